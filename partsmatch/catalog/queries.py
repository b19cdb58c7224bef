"""Reading parts: by name, lists, and the candidate prefilter by kind and rating window."""

from __future__ import annotations

from collections import defaultdict
from typing import Iterable

from sqlalchemy import func, select
from sqlalchemy.orm import Session

from partsmatch.catalog.models import Part, Stock
from partsmatch.catalog.names import normalize_part_number
from partsmatch.catalog.records import PartRecord, StockLine, record_from_row
from partsmatch.errors import PartNotFound


def _stock_for(session: Session, ids: Iterable[int]) -> dict[int, tuple[StockLine, ...]]:
    ids = list(ids)
    out: dict[int, list[StockLine]] = defaultdict(list)
    for chunk in range(0, len(ids), 900):
        rows = session.execute(
            select(Stock.part_id, Stock.location, Stock.quantity, Stock.unit_cost)
            .where(Stock.part_id.in_(ids[chunk:chunk + 900]))
            .order_by(Stock.part_id, Stock.location)
        )
        for pid, loc, qty, cost in rows:
            out[pid].append(StockLine(loc, qty, cost))
    return {k: tuple(v) for k, v in out.items()}


def records(session: Session, parts: list[Part]) -> list[PartRecord]:
    """ORM parts -> records with their stock lines."""
    stock = _stock_for(session, [p.id for p in parts])
    return [record_from_row(p, stock.get(p.id, ())) for p in parts]


def find_part(session: Session, name: str) -> PartRecord:
    """The part named ``PART`` or ``MAKER:PART``.

    The part number is compared exactly first, then in normal form (case, separators and
    look-alike characters folded). Raises PartNotFound when none or several parts match.
    """
    maker = None
    pn = name.strip()
    if ":" in pn:
        maker, pn = (s.strip() for s in pn.split(":", 1))
    stmt = select(Part).where(Part.part_number == pn)
    if maker:
        stmt = stmt.where(func.lower(Part.maker) == maker.lower())
    hits = list(session.scalars(stmt.order_by(Part.maker)))
    if not hits:
        stmt = select(Part).where(Part.pn_norm == normalize_part_number(pn))
        if maker:
            stmt = stmt.where(func.lower(Part.maker) == maker.lower())
        hits = list(session.scalars(stmt.order_by(Part.maker, Part.part_number)))
    if not hits:
        raise PartNotFound(f"no part {name!r} in the catalog (try `partsmatch find`)", value=name)
    if len(hits) > 1:
        names = ", ".join(f"{p.maker}:{p.part_number}" for p in hits[:5])
        raise PartNotFound(f"{name!r} names {len(hits)} parts ({names}): give MAKER:PART",
                           value=name)
    return records(session, hits)[0]


def list_parts(session: Session, kind: str | None = None, limit: int | None = None,
               offset: int = 0) -> list[PartRecord]:
    stmt = select(Part).order_by(Part.kind, Part.maker, Part.part_number)
    if kind:
        stmt = stmt.where(Part.kind == kind)
    if limit:
        stmt = stmt.limit(limit)
    if offset:
        stmt = stmt.offset(offset)
    return records(session, list(session.scalars(stmt)))


def count_parts(session: Session) -> int:
    return session.scalar(select(func.count()).select_from(Part)) or 0
