"""The catalog schema as SQLAlchemy Core tables (no ORM: reading the catalog needs none).

Ratings are SI floats in typed, nullable, indexed columns, so that a candidate prefilter is a SQL
range query: capacitance in F, tolerances in %, voltages in V (``voltage_ac`` RMS), currents in A,
times in s, I²t in A²s, resistance in ohm, power in W, temperatures in degC.

The lookups (:mod:`partsmatch.catalog.search`, :mod:`partsmatch.catalog.queries`) query these
tables directly, so that ``partsmatch find`` starts without importing the ORM (about a quarter
of its start-up); :mod:`partsmatch.catalog.models` maps ORM classes onto the same tables for
the code that writes. Schema changes go through Alembic revisions in ``migrations/`` only.
"""

from __future__ import annotations

from datetime import datetime, timezone

from sqlalchemy import (
    JSON, Boolean, CheckConstraint, Column, DateTime, Float, ForeignKey, Index, Integer, MetaData,
    String, Table, Text, UniqueConstraint,
)

from partsmatch.catalog.vocab import KINDS  # noqa: F401  (re-exported for the lookups)

NAMING = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}

metadata = MetaData(naming_convention=NAMING)


def utcnow() -> datetime:
    return datetime.now(timezone.utc)


def _when(name: str, **kw) -> Column:
    return Column(name, DateTime(timezone=True), **kw)


def _nonneg(*cols: str) -> list[CheckConstraint]:
    return [CheckConstraint(f"{c} IS NULL OR {c} >= 0", name=f"{c}_nonneg") for c in cols]


parts = Table(
    "parts", metadata,
    Column("id", Integer, primary_key=True),
    Column("kind", String(16), nullable=False),
    Column("maker", String(80), nullable=False),
    Column("part_number", String(80), nullable=False),
    Column("pn_norm", String(80), nullable=False, index=True),
    Column("description", Text),
    # capacitors
    Column("capacitance", Float),
    Column("tolerance_minus", Float),
    Column("tolerance_plus", Float),
    Column("voltage_ac", Float),
    Column("rated_frequency", Float),
    Column("voltage_dc", Float),
    Column("bleeder", Float),
    Column("dielectric", String(40)),
    Column("polarized", Boolean),
    Column("ripple_current", Float),
    Column("temp_max", Float),
    # diodes
    Column("vrrm", Float),
    Column("if_avg", Float),
    Column("ifsm", Float),
    Column("trr", Float),
    Column("vf", Float),
    # fuses
    Column("rated_current", Float),
    Column("voltage", Float),
    Column("voltage_dc_fuse", Float),
    Column("breaking_capacity", Float),
    Column("characteristic", String(4)),
    Column("fuse_standard", String(20)),
    Column("i2t", Float),
    # resistors
    Column("resistance", Float),
    Column("power", Float),
    Column("voltage_max", Float),
    # all kinds
    Column("size", String(60)),
    _when("created_at", nullable=False, default=utcnow),
    _when("updated_at"),
    UniqueConstraint("maker", "part_number", name="uq_parts_maker_part_number"),
    CheckConstraint("kind IN ('capacitor', 'diode', 'fuse', 'resistor')", name="kind"),
    CheckConstraint("characteristic IS NULL OR characteristic IN ('FF', 'F', 'M', 'T', 'TT')",
                    name="characteristic"),
    CheckConstraint("tolerance_minus IS NULL OR (tolerance_minus >= 0 AND tolerance_minus <= 100)",
                    name="tolerance_minus_range"),
    CheckConstraint("tolerance_plus IS NULL OR (tolerance_plus >= 0 AND tolerance_plus <= 1000)",
                    name="tolerance_plus_range"),
    CheckConstraint("fuse_standard IS NULL OR fuse_standard <> 'IEC 60127' "
                    "OR characteristic IS NOT NULL", name="iec_fuse_characteristic"),
    *_nonneg("capacitance", "voltage_ac", "rated_frequency", "voltage_dc", "bleeder",
             "ripple_current", "vrrm", "if_avg", "ifsm", "trr", "vf", "rated_current",
             "voltage", "voltage_dc_fuse", "breaking_capacity", "i2t", "resistance", "power",
             "voltage_max"),
    Index("ix_parts_kind_capacitance", "kind", "capacitance"),
    Index("ix_parts_kind_voltage_ac", "kind", "voltage_ac"),
    Index("ix_parts_kind_vrrm", "kind", "vrrm"),
    Index("ix_parts_kind_rated_current", "kind", "rated_current"),
    Index("ix_parts_kind_resistance", "kind", "resistance"),
)

stock = Table(
    "stock", metadata,
    Column("id", Integer, primary_key=True),
    Column("part_id", Integer, ForeignKey("parts.id", ondelete="CASCADE"), nullable=False,
           index=True),
    Column("location", String(40), nullable=False),
    Column("quantity", Integer, nullable=False, default=0),
    Column("unit_cost", Float),
    _when("updated_at", nullable=False, default=utcnow),
    UniqueConstraint("part_id", "location", name="uq_stock_part_location"),
    CheckConstraint("quantity >= 0", name="quantity_nonneg"),
    CheckConstraint("unit_cost IS NULL OR unit_cost >= 0", name="unit_cost_nonneg"),
)

#: Every change of a stock quantity, kept for the shop's history.
stock_movements = Table(
    "stock_movements", metadata,
    Column("id", Integer, primary_key=True),
    Column("part_id", Integer, ForeignKey("parts.id", ondelete="CASCADE"), nullable=False,
           index=True),
    Column("location", String(40), nullable=False),
    Column("delta", Integer, nullable=False),
    Column("quantity_after", Integer, nullable=False),
    Column("note", Text),
    _when("at", nullable=False, default=utcnow, index=True),
)

#: An equivalence the shop has verified (part_a may be replaced by part_b).
crossrefs = Table(
    "crossrefs", metadata,
    Column("id", Integer, primary_key=True),
    Column("part_a_id", Integer, ForeignKey("parts.id", ondelete="CASCADE"), nullable=False,
           index=True),
    Column("part_b_id", Integer, ForeignKey("parts.id", ondelete="CASCADE"), nullable=False,
           index=True),
    Column("relation", String(20), nullable=False, default="equivalent"),
    Column("note", Text),
    _when("recorded_at", nullable=False, default=utcnow),
    UniqueConstraint("part_a_id", "part_b_id", "relation", name="uq_crossrefs_pair"),
    CheckConstraint("part_a_id <> part_b_id", name="distinct_parts"),
)

#: A circuit file saved by name, with the catalog parts of its slots.
circuits = Table(
    "circuits", metadata,
    Column("id", Integer, primary_key=True),
    Column("name", String(120), nullable=False, unique=True),
    Column("spec_toml", Text, nullable=False),
    Column("slot_parts", JSON, nullable=False, default=dict),
    _when("saved_at", nullable=False, default=utcnow),
)

#: A substitution that was made, with the verdict it had at the time.
repairs = Table(
    "repairs", metadata,
    Column("id", Integer, primary_key=True),
    _when("at", nullable=False, default=utcnow),
    Column("circuit", String(200), nullable=False),
    Column("slot", String(16), nullable=False),
    Column("original_id", Integer, ForeignKey("parts.id", ondelete="SET NULL")),
    Column("original_text", String(200), nullable=False),
    Column("substitute_id", Integer, ForeignKey("parts.id", ondelete="SET NULL")),
    Column("substitute_text", String(200), nullable=False),
    Column("verdict", String(10)),
    Column("snapshot", JSON),
    Column("note", Text),
    Index("ix_repairs_circuit", "circuit"),
    CheckConstraint("verdict IS NULL OR verdict IN ('accept', 'caution', 'reject')",
                    name="verdict"),
)
