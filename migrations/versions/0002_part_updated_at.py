"""Parts remember when their ratings last changed (``--update`` imports); movements indexed by time.

On PostgreSQL with the pg_trgm extension available, also a trigram index on the normalised part
number for fuzzy lookup (skipped where the extension cannot be created).

Revision ID: 0002_part_updated_at
Revises: 0001_baseline
Create Date: 2026-12-02
"""
from alembic import op
import sqlalchemy as sa

revision = "0002_part_updated_at"
down_revision = "0001_baseline"
branch_labels = None
depends_on = None


def _has_trgm(bind) -> bool:
    row = bind.execute(sa.text(
        "SELECT 1 FROM pg_available_extensions WHERE name = 'pg_trgm'")).first()
    return row is not None


def upgrade() -> None:
    with op.batch_alter_table("parts") as batch_op:
        batch_op.add_column(sa.Column("updated_at", sa.DateTime(timezone=True), nullable=True))
    op.create_index("ix_stock_movements_at", "stock_movements", ["at"])
    bind = op.get_bind()
    if bind.dialect.name == "postgresql" and _has_trgm(bind):
        op.execute("CREATE EXTENSION IF NOT EXISTS pg_trgm")
        op.execute("CREATE INDEX IF NOT EXISTS ix_parts_pn_norm_trgm ON parts "
                   "USING gin (pn_norm gin_trgm_ops)")


def downgrade() -> None:
    bind = op.get_bind()
    if bind.dialect.name == "postgresql":
        op.execute("DROP INDEX IF EXISTS ix_parts_pn_norm_trgm")
    op.drop_index("ix_stock_movements_at", table_name="stock_movements")
    with op.batch_alter_table("parts") as batch_op:
        batch_op.drop_column("updated_at")
