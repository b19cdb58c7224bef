"""Frozen records that leave the database layer (the rules never touch ORM sessions)."""

from __future__ import annotations

from dataclasses import asdict, dataclass, field, fields
from typing import Any, Literal

Kind = Literal["capacitor", "diode", "fuse", "resistor"]


@dataclass(frozen=True)
class StockLine:
    location: str
    quantity: int
    unit_cost: float | None = None


@dataclass(frozen=True)
class PartRecord:
    """A catalog part with SI ratings (None where the catalog has no value)."""

    kind: Kind
    maker: str
    part_number: str
    id: int | None = None
    description: str | None = None
    capacitance: float | None = None
    tolerance_minus: float | None = None
    tolerance_plus: float | None = None
    voltage_ac: float | None = None
    rated_frequency: float | None = None
    voltage_dc: float | None = None
    bleeder: float | None = None
    dielectric: str | None = None
    polarized: bool | None = None
    ripple_current: float | None = None
    temp_max: float | None = None
    vrrm: float | None = None
    if_avg: float | None = None
    ifsm: float | None = None
    trr: float | None = None
    vf: float | None = None
    rated_current: float | None = None
    voltage: float | None = None
    voltage_dc_fuse: float | None = None
    breaking_capacity: float | None = None
    characteristic: str | None = None
    fuse_standard: str | None = None
    i2t: float | None = None
    resistance: float | None = None
    power: float | None = None
    voltage_max: float | None = None
    size: str | None = None
    stock: tuple[StockLine, ...] = field(default=())

    @property
    def name(self) -> str:
        """``MAKER:PART`` — unambiguous across makers."""
        return f"{self.maker}:{self.part_number}"

    @property
    def in_stock(self) -> int:
        return sum(s.quantity for s in self.stock)

    @property
    def unit_cost(self) -> float | None:
        costs = [s.unit_cost for s in self.stock if s.unit_cost is not None]
        return min(costs) if costs else None

    def ratings(self) -> dict[str, Any]:
        """The rating fields that are set (SI floats and text), without identity or stock."""
        skip = {"kind", "maker", "part_number", "id", "description", "stock"}
        return {f.name: getattr(self, f.name) for f in fields(self)
                if f.name not in skip and getattr(self, f.name) is not None}

    def to_dict(self) -> dict[str, Any]:
        d = asdict(self)
        d["stock"] = [asdict(s) for s in self.stock]
        d["in_stock"] = self.in_stock
        return d


PART_FIELDS = tuple(f.name for f in fields(PartRecord) if f.name not in ("id", "stock"))


def record_from_row(part: Any, stock: tuple[StockLine, ...] = ()) -> PartRecord:
    """PartRecord from an ORM ``Part`` (or any object with the same attributes)."""
    values = {name: getattr(part, name) for name in PART_FIELDS}
    return PartRecord(id=part.id, stock=stock, **values)
