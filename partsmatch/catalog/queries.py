"""Reading parts: by name, lists, and the candidate prefilter by kind and rating window."""

from __future__ import annotations

from collections import defaultdict
from typing import TYPE_CHECKING, Any, Iterable

from sqlalchemy import func, select

from partsmatch.catalog.names import normalize_part_number
from partsmatch.catalog.records import PartRecord, StockLine, record_from_row
from partsmatch.catalog.tables import parts, stock
from partsmatch.errors import PartNotFound

if TYPE_CHECKING:
    from sqlalchemy import Connection
    from sqlalchemy.orm import Session

    #: Reading needs Core statements only: an ORM session or a Core connection will do.
    Reader = Session | Connection

P, S = parts.c, stock.c


def _stock_for(session: Reader, ids: Iterable[int]) -> dict[int, tuple[StockLine, ...]]:
    ids = list(ids)
    out: dict[int, list[StockLine]] = defaultdict(list)
    for chunk in range(0, len(ids), 900):
        rows = session.execute(
            select(S.part_id, S.location, S.quantity, S.unit_cost)
            .where(S.part_id.in_(ids[chunk:chunk + 900]))
            .order_by(S.part_id, S.location)
        )
        for pid, loc, qty, cost in rows:
            out[pid].append(StockLine(loc, qty, cost))
    return {k: tuple(v) for k, v in out.items()}


def records(session: Reader, rows: list[Any]) -> list[PartRecord]:
    """Parts (rows of ``parts`` or ORM ``Part`` objects) -> records with their stock lines."""
    lines = _stock_for(session, [p.id for p in rows])
    return [record_from_row(p, lines.get(p.id, ())) for p in rows]


def find_part(session: Reader, name: str) -> PartRecord:
    """The part named ``PART`` or ``MAKER:PART``.

    The part number is compared exactly first, then in normal form (case, separators and
    look-alike characters folded). Raises PartNotFound when none or several parts match.
    """
    maker = None
    pn = name.strip()
    if ":" in pn:
        maker, pn = (s.strip() for s in pn.split(":", 1))
    stmt = select(parts).where(P.part_number == pn)
    if maker:
        stmt = stmt.where(func.lower(P.maker) == maker.lower())
    hits = list(session.execute(stmt.order_by(P.maker)))
    if not hits:
        stmt = select(parts).where(P.pn_norm == normalize_part_number(pn))
        if maker:
            stmt = stmt.where(func.lower(P.maker) == maker.lower())
        hits = list(session.execute(stmt.order_by(P.maker, P.part_number)))
    if not hits:
        raise PartNotFound(f"no part {name!r} in the catalog (try `partsmatch find`)", value=name)
    if len(hits) > 1:
        names = ", ".join(f"{p.maker}:{p.part_number}" for p in hits[:5])
        raise PartNotFound(f"{name!r} names {len(hits)} parts ({names}): give MAKER:PART",
                           value=name)
    return records(session, hits)[0]


def list_parts(session: Reader, kind: str | None = None, limit: int | None = None,
               offset: int = 0) -> list[PartRecord]:
    stmt = select(parts).order_by(P.kind, P.maker, P.part_number)
    if kind:
        stmt = stmt.where(P.kind == kind)
    if limit:
        stmt = stmt.limit(limit)
    if offset:
        stmt = stmt.offset(offset)
    return records(session, list(session.execute(stmt)))


def count_parts(session: Reader) -> int:
    return session.scalar(select(func.count()).select_from(parts)) or 0
