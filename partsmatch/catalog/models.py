"""The catalog schema (SQLAlchemy 2 typed models).

Ratings are SI floats in typed, nullable, indexed columns, so that a candidate prefilter is a SQL
range query: capacitance in F, tolerances in %, voltages in V (``voltage_ac`` RMS), currents in A,
times in s, I²t in A²s, resistance in ohm, power in W, temperatures in degC.
Schema changes go through Alembic revisions in ``migrations/`` only.
"""

from __future__ import annotations

from datetime import datetime, timezone

from sqlalchemy import (
    JSON, Boolean, CheckConstraint, DateTime, Float, ForeignKey, Index, Integer, MetaData,
    String, Text, UniqueConstraint,
)
from sqlalchemy.orm import DeclarativeBase, Mapped, mapped_column, relationship

#: Part kinds, fuse characteristics (IEC 60127-1) and fuse standards.
KINDS = ("capacitor", "diode", "fuse", "resistor")
CHARACTERISTICS = ("FF", "F", "M", "T", "TT")
FUSE_STANDARDS = ("IEC 60127", "UL 248-14", "HV")

#: Rating columns and their units (keys of partsmatch.units.UNITS), in CSV contract order.
RATING_UNITS: dict[str, str] = {
    "capacitance": "F", "tolerance_minus": "%", "tolerance_plus": "%", "voltage_ac": "V",
    "rated_frequency": "Hz", "voltage_dc": "V", "bleeder": "ohm", "ripple_current": "A",
    "temp_max": "degC", "vrrm": "V", "if_avg": "A", "ifsm": "A", "trr": "s", "vf": "V",
    "rated_current": "A", "voltage": "V", "voltage_dc_fuse": "V", "breaking_capacity": "A",
    "i2t": "A2s", "resistance": "ohm", "power": "W", "voltage_max": "V",
}
#: Free-text columns of a part.
TEXT_COLUMNS = ("description", "dielectric", "characteristic", "fuse_standard", "size")

NAMING = {
    "ix": "ix_%(column_0_label)s",
    "uq": "uq_%(table_name)s_%(column_0_name)s",
    "ck": "ck_%(table_name)s_%(constraint_name)s",
    "fk": "fk_%(table_name)s_%(column_0_name)s_%(referred_table_name)s",
    "pk": "pk_%(table_name)s",
}


def utcnow() -> datetime:
    return datetime.now(timezone.utc)


class Base(DeclarativeBase):
    metadata = MetaData(naming_convention=NAMING)


def _nonneg(*cols: str) -> list[CheckConstraint]:
    return [CheckConstraint(f"{c} IS NULL OR {c} >= 0", name=f"{c}_nonneg") for c in cols]


class Part(Base):
    __tablename__ = "parts"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    kind: Mapped[str] = mapped_column(String(16))
    maker: Mapped[str] = mapped_column(String(80))
    part_number: Mapped[str] = mapped_column(String(80))
    pn_norm: Mapped[str] = mapped_column(String(80), index=True)
    description: Mapped[str | None] = mapped_column(Text)
    # capacitors
    capacitance: Mapped[float | None] = mapped_column(Float)
    tolerance_minus: Mapped[float | None] = mapped_column(Float)
    tolerance_plus: Mapped[float | None] = mapped_column(Float)
    voltage_ac: Mapped[float | None] = mapped_column(Float)
    rated_frequency: Mapped[float | None] = mapped_column(Float)
    voltage_dc: Mapped[float | None] = mapped_column(Float)
    bleeder: Mapped[float | None] = mapped_column(Float)
    dielectric: Mapped[str | None] = mapped_column(String(40))
    polarized: Mapped[bool | None] = mapped_column(Boolean)
    ripple_current: Mapped[float | None] = mapped_column(Float)
    temp_max: Mapped[float | None] = mapped_column(Float)
    # diodes
    vrrm: Mapped[float | None] = mapped_column(Float)
    if_avg: Mapped[float | None] = mapped_column(Float)
    ifsm: Mapped[float | None] = mapped_column(Float)
    trr: Mapped[float | None] = mapped_column(Float)
    vf: Mapped[float | None] = mapped_column(Float)
    # fuses
    rated_current: Mapped[float | None] = mapped_column(Float)
    voltage: Mapped[float | None] = mapped_column(Float)
    voltage_dc_fuse: Mapped[float | None] = mapped_column(Float)
    breaking_capacity: Mapped[float | None] = mapped_column(Float)
    characteristic: Mapped[str | None] = mapped_column(String(4))
    fuse_standard: Mapped[str | None] = mapped_column(String(20))
    i2t: Mapped[float | None] = mapped_column(Float)
    # resistors
    resistance: Mapped[float | None] = mapped_column(Float)
    power: Mapped[float | None] = mapped_column(Float)
    voltage_max: Mapped[float | None] = mapped_column(Float)
    # all kinds
    size: Mapped[str | None] = mapped_column(String(60))
    created_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)
    updated_at: Mapped[datetime | None] = mapped_column(DateTime(timezone=True))

    stock: Mapped[list["Stock"]] = relationship(back_populates="part", order_by="Stock.location")

    __table_args__ = (
        UniqueConstraint("maker", "part_number", name="uq_parts_maker_part_number"),
        CheckConstraint("kind IN ('capacitor', 'diode', 'fuse', 'resistor')", name="kind"),
        CheckConstraint(
            "characteristic IS NULL OR characteristic IN ('FF', 'F', 'M', 'T', 'TT')",
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


class Stock(Base):
    __tablename__ = "stock"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    part_id: Mapped[int] = mapped_column(ForeignKey("parts.id", ondelete="CASCADE"), index=True)
    location: Mapped[str] = mapped_column(String(40))
    quantity: Mapped[int] = mapped_column(Integer, default=0)
    unit_cost: Mapped[float | None] = mapped_column(Float)
    updated_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)

    part: Mapped[Part] = relationship(back_populates="stock")

    __table_args__ = (
        UniqueConstraint("part_id", "location", name="uq_stock_part_location"),
        CheckConstraint("quantity >= 0", name="quantity_nonneg"),
        CheckConstraint("unit_cost IS NULL OR unit_cost >= 0", name="unit_cost_nonneg"),
    )


class StockMovement(Base):
    """Every change of a stock quantity, kept for the shop's history."""

    __tablename__ = "stock_movements"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    part_id: Mapped[int] = mapped_column(ForeignKey("parts.id", ondelete="CASCADE"), index=True)
    location: Mapped[str] = mapped_column(String(40))
    delta: Mapped[int] = mapped_column(Integer)
    quantity_after: Mapped[int] = mapped_column(Integer)
    note: Mapped[str | None] = mapped_column(Text)
    at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow, index=True)


class CrossRef(Base):
    """An equivalence the shop has verified (part_a may be replaced by part_b)."""

    __tablename__ = "crossrefs"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    part_a_id: Mapped[int] = mapped_column(ForeignKey("parts.id", ondelete="CASCADE"), index=True)
    part_b_id: Mapped[int] = mapped_column(ForeignKey("parts.id", ondelete="CASCADE"), index=True)
    relation: Mapped[str] = mapped_column(String(20), default="equivalent")
    note: Mapped[str | None] = mapped_column(Text)
    recorded_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)

    __table_args__ = (
        UniqueConstraint("part_a_id", "part_b_id", "relation", name="uq_crossrefs_pair"),
        CheckConstraint("part_a_id <> part_b_id", name="distinct_parts"),
    )


class SavedCircuit(Base):
    """A circuit file saved by name, with the catalog parts of its slots."""

    __tablename__ = "circuits"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    name: Mapped[str] = mapped_column(String(120), unique=True)
    spec_toml: Mapped[str] = mapped_column(Text)
    slot_parts: Mapped[dict] = mapped_column(JSON, default=dict)
    saved_at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)


class Repair(Base):
    """A substitution that was made, with the verdict it had at the time."""

    __tablename__ = "repairs"

    id: Mapped[int] = mapped_column(Integer, primary_key=True)
    at: Mapped[datetime] = mapped_column(DateTime(timezone=True), default=utcnow)
    circuit: Mapped[str] = mapped_column(String(200))
    slot: Mapped[str] = mapped_column(String(16))
    original_id: Mapped[int | None] = mapped_column(ForeignKey("parts.id", ondelete="SET NULL"))
    original_text: Mapped[str] = mapped_column(String(200))
    substitute_id: Mapped[int | None] = mapped_column(ForeignKey("parts.id", ondelete="SET NULL"))
    substitute_text: Mapped[str] = mapped_column(String(200))
    verdict: Mapped[str | None] = mapped_column(String(10))
    snapshot: Mapped[dict | None] = mapped_column(JSON)
    note: Mapped[str | None] = mapped_column(Text)

    __table_args__ = (
        Index("ix_repairs_circuit", "circuit"),
        CheckConstraint("verdict IS NULL OR verdict IN ('accept', 'caution', 'reject')",
                        name="verdict"),
    )
