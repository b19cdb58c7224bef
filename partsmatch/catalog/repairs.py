"""The repair log: substitutions that were made, with the verdict they had at the time."""

from __future__ import annotations

from typing import Any

from sqlalchemy import Engine, or_, select
from sqlalchemy.orm import Session

from partsmatch.catalog.models import Repair
from partsmatch.catalog.records import PartRecord


def add_repair(engine: Engine, *, circuit: str, slot: str, original: PartRecord,
               substitute: PartRecord, verdict: str | None, snapshot: dict[str, Any] | None,
               note: str | None = None) -> dict[str, Any]:
    """Record a substitution; returns it as a dict."""
    with Session(engine) as session, session.begin():
        row = Repair(circuit=circuit, slot=slot, original_id=original.id,
                     original_text=original.name, substitute_id=substitute.id,
                     substitute_text=substitute.name, verdict=verdict, snapshot=snapshot,
                     note=note)
        session.add(row)
        session.flush()
        return _as_dict(row)


def list_repairs(engine: Engine, *, part: PartRecord | None = None, circuit: str | None = None,
                 limit: int | None = None) -> list[dict[str, Any]]:
    """Repairs, newest first, optionally those naming ``part`` (either side) or a circuit
    (name or file, case-insensitive substring)."""
    stmt = select(Repair).order_by(Repair.at.desc(), Repair.id.desc())
    if part is not None:
        stmt = stmt.where(or_(Repair.original_id == part.id, Repair.substitute_id == part.id))
    if circuit:
        stmt = stmt.where(Repair.circuit.ilike(f"%{circuit}%"))
    if limit:
        stmt = stmt.limit(limit)
    with Session(engine) as session:
        return [_as_dict(r) for r in session.scalars(stmt)]


def _as_dict(r: Repair) -> dict[str, Any]:
    return {"id": r.id, "at": r.at.isoformat() if r.at else None, "circuit": r.circuit,
            "slot": r.slot, "original": r.original_text, "substitute": r.substitute_text,
            "verdict": r.verdict, "note": r.note}


__all__ = ["add_repair", "list_repairs"]
