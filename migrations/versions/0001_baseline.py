"""Baseline schema: parts, stock and its movements, cross-references, saved circuits, repairs.

Revision ID: 0001_baseline
Revises: (none)
Create Date: 2026-12-02 02:25:37.307071
"""
from alembic import op
import sqlalchemy as sa


revision = '0001_baseline'
down_revision = None
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table('circuits',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('name', sa.String(length=120), nullable=False),
    sa.Column('spec_toml', sa.Text(), nullable=False),
    sa.Column('slot_parts', sa.JSON(), nullable=False),
    sa.Column('saved_at', sa.DateTime(timezone=True), nullable=False),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_circuits')),
    sa.UniqueConstraint('name', name=op.f('uq_circuits_name'))
    )
    op.create_table('parts',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('kind', sa.String(length=16), nullable=False),
    sa.Column('maker', sa.String(length=80), nullable=False),
    sa.Column('part_number', sa.String(length=80), nullable=False),
    sa.Column('pn_norm', sa.String(length=80), nullable=False),
    sa.Column('description', sa.Text(), nullable=True),
    sa.Column('capacitance', sa.Float(), nullable=True),
    sa.Column('tolerance_minus', sa.Float(), nullable=True),
    sa.Column('tolerance_plus', sa.Float(), nullable=True),
    sa.Column('voltage_ac', sa.Float(), nullable=True),
    sa.Column('rated_frequency', sa.Float(), nullable=True),
    sa.Column('voltage_dc', sa.Float(), nullable=True),
    sa.Column('bleeder', sa.Float(), nullable=True),
    sa.Column('dielectric', sa.String(length=40), nullable=True),
    sa.Column('polarized', sa.Boolean(), nullable=True),
    sa.Column('ripple_current', sa.Float(), nullable=True),
    sa.Column('temp_max', sa.Float(), nullable=True),
    sa.Column('vrrm', sa.Float(), nullable=True),
    sa.Column('if_avg', sa.Float(), nullable=True),
    sa.Column('ifsm', sa.Float(), nullable=True),
    sa.Column('trr', sa.Float(), nullable=True),
    sa.Column('vf', sa.Float(), nullable=True),
    sa.Column('rated_current', sa.Float(), nullable=True),
    sa.Column('voltage', sa.Float(), nullable=True),
    sa.Column('voltage_dc_fuse', sa.Float(), nullable=True),
    sa.Column('breaking_capacity', sa.Float(), nullable=True),
    sa.Column('characteristic', sa.String(length=4), nullable=True),
    sa.Column('fuse_standard', sa.String(length=20), nullable=True),
    sa.Column('i2t', sa.Float(), nullable=True),
    sa.Column('resistance', sa.Float(), nullable=True),
    sa.Column('power', sa.Float(), nullable=True),
    sa.Column('voltage_max', sa.Float(), nullable=True),
    sa.Column('size', sa.String(length=60), nullable=True),
    sa.Column('created_at', sa.DateTime(timezone=True), nullable=False),
    sa.CheckConstraint("characteristic IS NULL OR characteristic IN ('FF', 'F', 'M', 'T', 'TT')", name=op.f('ck_parts_characteristic')),
    sa.CheckConstraint("fuse_standard IS NULL OR fuse_standard <> 'IEC 60127' OR characteristic IS NOT NULL", name=op.f('ck_parts_iec_fuse_characteristic')),
    sa.CheckConstraint("kind IN ('capacitor', 'diode', 'fuse', 'resistor')", name=op.f('ck_parts_kind')),
    sa.CheckConstraint('bleeder IS NULL OR bleeder >= 0', name=op.f('ck_parts_bleeder_nonneg')),
    sa.CheckConstraint('breaking_capacity IS NULL OR breaking_capacity >= 0', name=op.f('ck_parts_breaking_capacity_nonneg')),
    sa.CheckConstraint('capacitance IS NULL OR capacitance >= 0', name=op.f('ck_parts_capacitance_nonneg')),
    sa.CheckConstraint('i2t IS NULL OR i2t >= 0', name=op.f('ck_parts_i2t_nonneg')),
    sa.CheckConstraint('if_avg IS NULL OR if_avg >= 0', name=op.f('ck_parts_if_avg_nonneg')),
    sa.CheckConstraint('ifsm IS NULL OR ifsm >= 0', name=op.f('ck_parts_ifsm_nonneg')),
    sa.CheckConstraint('power IS NULL OR power >= 0', name=op.f('ck_parts_power_nonneg')),
    sa.CheckConstraint('rated_current IS NULL OR rated_current >= 0', name=op.f('ck_parts_rated_current_nonneg')),
    sa.CheckConstraint('rated_frequency IS NULL OR rated_frequency >= 0', name=op.f('ck_parts_rated_frequency_nonneg')),
    sa.CheckConstraint('resistance IS NULL OR resistance >= 0', name=op.f('ck_parts_resistance_nonneg')),
    sa.CheckConstraint('ripple_current IS NULL OR ripple_current >= 0', name=op.f('ck_parts_ripple_current_nonneg')),
    sa.CheckConstraint('tolerance_minus IS NULL OR (tolerance_minus >= 0 AND tolerance_minus <= 100)', name=op.f('ck_parts_tolerance_minus_range')),
    sa.CheckConstraint('tolerance_plus IS NULL OR (tolerance_plus >= 0 AND tolerance_plus <= 1000)', name=op.f('ck_parts_tolerance_plus_range')),
    sa.CheckConstraint('trr IS NULL OR trr >= 0', name=op.f('ck_parts_trr_nonneg')),
    sa.CheckConstraint('vf IS NULL OR vf >= 0', name=op.f('ck_parts_vf_nonneg')),
    sa.CheckConstraint('voltage IS NULL OR voltage >= 0', name=op.f('ck_parts_voltage_nonneg')),
    sa.CheckConstraint('voltage_ac IS NULL OR voltage_ac >= 0', name=op.f('ck_parts_voltage_ac_nonneg')),
    sa.CheckConstraint('voltage_dc IS NULL OR voltage_dc >= 0', name=op.f('ck_parts_voltage_dc_nonneg')),
    sa.CheckConstraint('voltage_dc_fuse IS NULL OR voltage_dc_fuse >= 0', name=op.f('ck_parts_voltage_dc_fuse_nonneg')),
    sa.CheckConstraint('voltage_max IS NULL OR voltage_max >= 0', name=op.f('ck_parts_voltage_max_nonneg')),
    sa.CheckConstraint('vrrm IS NULL OR vrrm >= 0', name=op.f('ck_parts_vrrm_nonneg')),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_parts')),
    sa.UniqueConstraint('maker', 'part_number', name='uq_parts_maker_part_number')
    )
    with op.batch_alter_table('parts', schema=None) as batch_op:
        batch_op.create_index('ix_parts_kind_capacitance', ['kind', 'capacitance'], unique=False)
        batch_op.create_index('ix_parts_kind_rated_current', ['kind', 'rated_current'], unique=False)
        batch_op.create_index('ix_parts_kind_resistance', ['kind', 'resistance'], unique=False)
        batch_op.create_index('ix_parts_kind_voltage_ac', ['kind', 'voltage_ac'], unique=False)
        batch_op.create_index('ix_parts_kind_vrrm', ['kind', 'vrrm'], unique=False)
        batch_op.create_index(batch_op.f('ix_parts_pn_norm'), ['pn_norm'], unique=False)

    op.create_table('crossrefs',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('part_a_id', sa.Integer(), nullable=False),
    sa.Column('part_b_id', sa.Integer(), nullable=False),
    sa.Column('relation', sa.String(length=20), nullable=False),
    sa.Column('note', sa.Text(), nullable=True),
    sa.Column('recorded_at', sa.DateTime(timezone=True), nullable=False),
    sa.CheckConstraint('part_a_id <> part_b_id', name=op.f('ck_crossrefs_distinct_parts')),
    sa.ForeignKeyConstraint(['part_a_id'], ['parts.id'], name=op.f('fk_crossrefs_part_a_id_parts'), ondelete='CASCADE'),
    sa.ForeignKeyConstraint(['part_b_id'], ['parts.id'], name=op.f('fk_crossrefs_part_b_id_parts'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_crossrefs')),
    sa.UniqueConstraint('part_a_id', 'part_b_id', 'relation', name='uq_crossrefs_pair')
    )
    with op.batch_alter_table('crossrefs', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_crossrefs_part_a_id'), ['part_a_id'], unique=False)
        batch_op.create_index(batch_op.f('ix_crossrefs_part_b_id'), ['part_b_id'], unique=False)

    op.create_table('repairs',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('at', sa.DateTime(timezone=True), nullable=False),
    sa.Column('circuit', sa.String(length=200), nullable=False),
    sa.Column('slot', sa.String(length=16), nullable=False),
    sa.Column('original_id', sa.Integer(), nullable=True),
    sa.Column('original_text', sa.String(length=200), nullable=False),
    sa.Column('substitute_id', sa.Integer(), nullable=True),
    sa.Column('substitute_text', sa.String(length=200), nullable=False),
    sa.Column('verdict', sa.String(length=10), nullable=True),
    sa.Column('snapshot', sa.JSON(), nullable=True),
    sa.Column('note', sa.Text(), nullable=True),
    sa.CheckConstraint("verdict IS NULL OR verdict IN ('accept', 'caution', 'reject')", name=op.f('ck_repairs_verdict')),
    sa.ForeignKeyConstraint(['original_id'], ['parts.id'], name=op.f('fk_repairs_original_id_parts'), ondelete='SET NULL'),
    sa.ForeignKeyConstraint(['substitute_id'], ['parts.id'], name=op.f('fk_repairs_substitute_id_parts'), ondelete='SET NULL'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_repairs'))
    )
    with op.batch_alter_table('repairs', schema=None) as batch_op:
        batch_op.create_index('ix_repairs_circuit', ['circuit'], unique=False)

    op.create_table('stock',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('part_id', sa.Integer(), nullable=False),
    sa.Column('location', sa.String(length=40), nullable=False),
    sa.Column('quantity', sa.Integer(), nullable=False),
    sa.Column('unit_cost', sa.Float(), nullable=True),
    sa.Column('updated_at', sa.DateTime(timezone=True), nullable=False),
    sa.CheckConstraint('quantity >= 0', name=op.f('ck_stock_quantity_nonneg')),
    sa.CheckConstraint('unit_cost IS NULL OR unit_cost >= 0', name=op.f('ck_stock_unit_cost_nonneg')),
    sa.ForeignKeyConstraint(['part_id'], ['parts.id'], name=op.f('fk_stock_part_id_parts'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_stock')),
    sa.UniqueConstraint('part_id', 'location', name='uq_stock_part_location')
    )
    with op.batch_alter_table('stock', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_stock_part_id'), ['part_id'], unique=False)

    op.create_table('stock_movements',
    sa.Column('id', sa.Integer(), nullable=False),
    sa.Column('part_id', sa.Integer(), nullable=False),
    sa.Column('location', sa.String(length=40), nullable=False),
    sa.Column('delta', sa.Integer(), nullable=False),
    sa.Column('quantity_after', sa.Integer(), nullable=False),
    sa.Column('note', sa.Text(), nullable=True),
    sa.Column('at', sa.DateTime(timezone=True), nullable=False),
    sa.ForeignKeyConstraint(['part_id'], ['parts.id'], name=op.f('fk_stock_movements_part_id_parts'), ondelete='CASCADE'),
    sa.PrimaryKeyConstraint('id', name=op.f('pk_stock_movements'))
    )
    with op.batch_alter_table('stock_movements', schema=None) as batch_op:
        batch_op.create_index(batch_op.f('ix_stock_movements_part_id'), ['part_id'], unique=False)



def downgrade() -> None:
    with op.batch_alter_table('stock_movements', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_stock_movements_part_id'))

    op.drop_table('stock_movements')
    with op.batch_alter_table('stock', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_stock_part_id'))

    op.drop_table('stock')
    with op.batch_alter_table('repairs', schema=None) as batch_op:
        batch_op.drop_index('ix_repairs_circuit')

    op.drop_table('repairs')
    with op.batch_alter_table('crossrefs', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_crossrefs_part_b_id'))
        batch_op.drop_index(batch_op.f('ix_crossrefs_part_a_id'))

    op.drop_table('crossrefs')
    with op.batch_alter_table('parts', schema=None) as batch_op:
        batch_op.drop_index(batch_op.f('ix_parts_pn_norm'))
        batch_op.drop_index('ix_parts_kind_vrrm')
        batch_op.drop_index('ix_parts_kind_voltage_ac')
        batch_op.drop_index('ix_parts_kind_resistance')
        batch_op.drop_index('ix_parts_kind_rated_current')
        batch_op.drop_index('ix_parts_kind_capacitance')

    op.drop_table('parts')
    op.drop_table('circuits')
