"""Stock by location, its movement history, and the cross-references a shop has verified.

Every change of a quantity is one transaction that changes the ``stock`` row and writes a
``stock_movements`` row (delta, quantity after, time, note), so the history always adds up to the
stock. Quantities never go negative: a take is a conditional ``UPDATE ... WHERE quantity >= n``
whose row count decides, so two processes taking from one row at once can neither drive it below
zero nor lose a movement, on SQLite and PostgreSQL alike.

SQLite note: a deferred transaction (plain ``BEGIN``, what :func:`partsmatch.catalog.db.make_engine`
issues) that *reads* before it *writes* can fail with "database is locked" when another process
commits in between (in WAL mode the stale read snapshot cannot be upgraded, and the busy timeout
does not help). Every write transaction here therefore starts with its write statement: parts are
looked up in a separate read transaction first, and the stock row is never read before it is
changed. A write statement that opens the transaction waits for the lock (busy timeout) instead.

Write functions take an :class:`~sqlalchemy.Engine` and own their transaction; read functions
take an Engine or a Session. A part is given as ``"PART"``, ``"MAKER:PART"``, a
:class:`~partsmatch.catalog.records.PartRecord` or a part id. Results are frozen records.
"""

from __future__ import annotations

import math
import numbers
from contextlib import contextmanager
from dataclasses import dataclass
from datetime import datetime, timezone
from typing import Any, Iterator

from sqlalchemy import Engine, func, insert, or_, select, update
from sqlalchemy.exc import DataError, IntegrityError, SQLAlchemyError
from sqlalchemy.orm import Session

from partsmatch.catalog.models import KINDS, CrossRef, Part, Stock, StockMovement, utcnow
from partsmatch.catalog.records import PartRecord
from partsmatch.catalog.vocab import MAX_QUANTITY
from partsmatch.errors import (
    DatabaseError, InputError, PartNotFound, StockError, short_message,
)

#: ``equivalent``: either part may replace the other (the pair is recorded once, either way
#: round); ``replaces``: part_b may replace part_a, not necessarily the other way.
RELATIONS: tuple[str, ...] = ("equivalent", "replaces")

#: Column widths of the schema (PostgreSQL enforces them; SQLite is held to the same).
LOCATION_MAX = 40

PartRef = str | PartRecord | int


# ------------------------------------------------------------------ records
def _aware(value: datetime | None) -> datetime | None:
    """SQLite returns naive datetimes (stored as UTC); make every time UTC-aware."""
    if value is not None and value.tzinfo is None:
        return value.replace(tzinfo=timezone.utc)
    return value


def _iso(value: datetime | None) -> str | None:
    return value.isoformat() if value is not None else None


@dataclass(frozen=True)
class StockRecord:
    """One stock line: a part's quantity at one location."""

    part_id: int
    maker: str
    part_number: str
    kind: str
    location: str
    quantity: int
    unit_cost: float | None
    updated_at: datetime | None

    @property
    def part(self) -> str:
        return f"{self.maker}:{self.part_number}"

    def to_dict(self) -> dict[str, Any]:
        return {"part": self.part, "maker": self.maker, "part_number": self.part_number,
                "kind": self.kind, "location": self.location, "quantity": self.quantity,
                "unit_cost": self.unit_cost, "updated_at": _iso(self.updated_at)}


@dataclass(frozen=True)
class MovementRecord:
    """One change of a stock quantity: ``delta`` (negative for a take) and the quantity after."""

    id: int
    part_id: int
    maker: str
    part_number: str
    location: str
    delta: int
    quantity_after: int
    note: str | None
    at: datetime

    @property
    def part(self) -> str:
        return f"{self.maker}:{self.part_number}"

    def to_dict(self) -> dict[str, Any]:
        return {"id": self.id, "part": self.part, "maker": self.maker,
                "part_number": self.part_number, "location": self.location,
                "delta": self.delta, "quantity_after": self.quantity_after, "note": self.note,
                "at": _iso(self.at)}


@dataclass(frozen=True)
class MoveRecord:
    """A move between two locations: the take at the source and the addition at the target."""

    taken: MovementRecord
    added: MovementRecord

    def to_dict(self) -> dict[str, Any]:
        return {"taken": self.taken.to_dict(), "added": self.added.to_dict()}


@dataclass(frozen=True)
class CrossRefRecord:
    """A verified cross-reference: ``part_b`` may replace ``part_a`` (both ways if equivalent)."""

    id: int
    part_a: str
    part_b: str
    part_a_id: int
    part_b_id: int
    relation: str
    note: str | None
    recorded_at: datetime

    def other(self, part_id: int) -> str:
        """The name of the pair's other part, seen from ``part_id``."""
        return self.part_b if part_id == self.part_a_id else self.part_a

    def to_dict(self) -> dict[str, Any]:
        return {"id": self.id, "part_a": self.part_a, "part_b": self.part_b,
                "relation": self.relation, "note": self.note,
                "recorded_at": _iso(self.recorded_at)}


# ------------------------------------------------------------------ helpers
@contextmanager
def _reading(bind: Engine | Session) -> Iterator[Session]:
    """A Session on ``bind`` (the caller's own Session is used as it is)."""
    try:
        if isinstance(bind, Session):
            yield bind
        else:
            with Session(bind) as session:
                yield session
    except SQLAlchemyError as exc:
        raise DatabaseError(f"cannot read stock: {short_message(exc)}") from None


@contextmanager
def _writing(engine: Engine, what: str) -> Iterator[Any]:
    """One write transaction on a Connection: committed on success, rolled back on any error.

    The first statement run in it must be a write (see the module docstring about SQLite).
    """
    if not isinstance(engine, Engine):
        raise TypeError(f"{what} needs an Engine (it runs its own transaction), "
                        f"not {type(engine).__name__}")
    try:
        with engine.begin() as conn:
            yield conn
    except SQLAlchemyError as exc:
        raise DatabaseError(f"{what} failed, nothing changed: {short_message(exc)}") from None


def _resolve(bind: Engine | Session, part: PartRef) -> tuple[int, str, str]:
    """(id, maker, part_number) of a part, looked up in a read transaction of its own."""
    if isinstance(part, PartRecord):
        if part.id is None:
            raise PartNotFound(f"part {part.name} has no catalog id", value=part.name)
        return part.id, part.maker, part.part_number
    if isinstance(part, bool) or not isinstance(part, (str, int)):
        raise InputError(f"a part is named by text (PART or MAKER:PART), not {part!r}",
                         value=part)
    with _reading(bind) as session:
        if isinstance(part, int):
            row = session.execute(select(Part.id, Part.maker, Part.part_number)
                                  .where(Part.id == part)).first()
            if row is None:
                raise PartNotFound(f"no part with id {part} in the catalog", value=part)
            return row[0], row[1], row[2]
        from partsmatch.catalog.queries import find_part

        if not part.strip() or "\x00" in part:
            raise InputError(f"not a part name: {part!r}", value=part)
        rec = find_part(session, part)
    assert rec.id is not None
    return rec.id, rec.maker, rec.part_number


def _quantity(value: Any) -> int:
    """A whole number of pieces > 0."""
    if isinstance(value, bool):
        raise InputError(f"quantity must be a whole number above 0, not {value!r}", value=value)
    if isinstance(value, numbers.Integral):
        n = int(value)
    elif isinstance(value, float) and math.isfinite(value) and value.is_integer():
        n = int(value)
    else:
        raise InputError(f"quantity must be a whole number above 0, not {value!r}", value=value)
    if n <= 0:
        raise InputError(f"quantity must be a whole number above 0, not {n}", value=value)
    if n > MAX_QUANTITY:
        raise InputError(f"quantity {n} is more than a stock line holds ({MAX_QUANTITY})",
                         value=value)
    return n


def _location(value: Any, what: str = "location") -> str:
    if not isinstance(value, str) or not value.strip():
        raise InputError(f"{what} must be a non-empty name, not {value!r}", value=value)
    loc = value.strip()
    if len(loc) > LOCATION_MAX:
        raise InputError(f"{what} {loc!r} is longer than {LOCATION_MAX} characters", value=value)
    if any(ord(c) < 32 for c in loc):
        raise InputError(f"{what} {loc!r} contains a control character", value=value)
    return loc


def _note(value: Any) -> str | None:
    if value is None:
        return None
    if not isinstance(value, str):
        raise InputError(f"a note is text, not {value!r}", value=value)
    if "\x00" in value:
        raise InputError("a note cannot hold a NUL character", value=value)
    return value.strip() or None


def _cost(value: Any) -> float | None:
    if value is None:
        return None
    if isinstance(value, bool) or not isinstance(value, numbers.Real):
        raise InputError(f"unit cost must be a number >= 0, not {value!r}", value=value)
    cost = float(value)
    if not math.isfinite(cost) or cost < 0:
        raise InputError(f"unit cost must be a number >= 0, not {value!r}", value=value)
    return cost


def _insert_for(engine_or_conn: Any):
    """The dialect's INSERT (it has ON CONFLICT for SQLite and PostgreSQL)."""
    name = engine_or_conn.dialect.name
    if name == "sqlite":
        from sqlalchemy.dialects.sqlite import insert as dialect_insert
    elif name == "postgresql":
        from sqlalchemy.dialects.postgresql import insert as dialect_insert
    else:  # pragma: no cover - only SQLite and PostgreSQL are supported
        raise DatabaseError(f"stock changes need SQLite or PostgreSQL, not {name}")
    return dialect_insert


def _increase(conn: Any, part_id: int, location: str, n: int, cost: float | None,
              now: datetime, *, keep_cost: bool = False) -> int:
    """Add ``n`` at (part, location), creating the line if missing; the quantity after.

    One atomic statement (INSERT ... ON CONFLICT DO UPDATE ... RETURNING), so two processes
    adding to a line that does not exist yet cannot collide on the unique (part, location).
    ``cost`` replaces the line's unit cost, or with ``keep_cost`` only fills a missing one.
    """
    dialect_insert = _insert_for(conn)
    stmt = dialect_insert(Stock).values(part_id=part_id, location=location, quantity=n,
                                        unit_cost=cost, updated_at=now)
    new_cost = (func.coalesce(Stock.unit_cost, stmt.excluded.unit_cost) if keep_cost
                else func.coalesce(stmt.excluded.unit_cost, Stock.unit_cost))
    stmt = stmt.on_conflict_do_update(
        index_elements=[Stock.part_id, Stock.location],
        set_={"quantity": Stock.quantity + stmt.excluded.quantity, "unit_cost": new_cost,
              "updated_at": stmt.excluded.updated_at},
    ).returning(Stock.quantity)
    try:
        after = conn.execute(stmt).scalar_one()
    except DataError:  # PostgreSQL: integer out of range
        after = None
    if after is None or after > MAX_QUANTITY:
        raise StockError(f"adding {n} at {location} would hold more than {MAX_QUANTITY} pieces; "
                         "nothing changed", value=n)
    return after


def _decrease(conn: Any, part_id: int, location: str, n: int,
              now: datetime) -> tuple[int, float | None] | None:
    """Take ``n`` from (part, location) if at least ``n`` is there: (quantity after, unit cost).

    None when the line is missing or holds less (nothing changed). The condition is in the
    UPDATE itself, so the database decides atomically (PostgreSQL re-checks it on the newest
    row version after waiting for a concurrent writer; SQLite holds the write lock).
    """
    stmt = (update(Stock)
            .where(Stock.part_id == part_id, Stock.location == location, Stock.quantity >= n)
            .values(quantity=Stock.quantity - n, updated_at=now)
            .returning(Stock.quantity, Stock.unit_cost))
    row = conn.execute(stmt).first()
    return None if row is None else (row[0], row[1])


def _movement(conn: Any, part_id: int, location: str, delta: int, after: int,
              note: str | None, now: datetime) -> int:
    return conn.execute(insert(StockMovement).values(
        part_id=part_id, location=location, delta=delta, quantity_after=after, note=note, at=now,
    ).returning(StockMovement.id)).scalar_one()


def _shortage(conn: Any, part_id: int, name: str, location: str, n: int) -> StockError:
    """The error for a take that found less than ``n`` (read inside the failed transaction)."""
    rows = conn.execute(select(Stock.location, Stock.quantity).where(Stock.part_id == part_id)
                        .order_by(Stock.location)).all()
    here = next((q for loc, q in rows if loc == location), None)
    elsewhere = [f"{q} at {loc}" for loc, q in rows if loc != location and q > 0]
    hint = f" (elsewhere: {', '.join(elsewhere)})" if elsewhere else ""
    if here is None:
        msg = f"no stock line for {name} at {location} (asked {n}){hint}; nothing changed"
    else:
        msg = f"{name} at {location}: {here} there, asked {n}{hint}; nothing changed"
    return StockError(msg, value=n)


# ------------------------------------------------------------------ stock changes
def add_stock(engine: Engine, part: PartRef, location: str, quantity: int,
              unit_cost: float | None = None, note: str | None = None) -> MovementRecord:
    """Add ``quantity`` pieces of ``part`` at ``location`` (the line is created if missing).

    Args:
        unit_cost: price of one piece in the shop's currency; replaces the line's cost when given.
        note: free text kept with the movement (supplier, invoice, repair job ...).
    Returns the movement written (delta = quantity, quantity_after = the new total).
    """
    n = _quantity(quantity)
    loc = _location(location)
    cost = _cost(unit_cost)
    text = _note(note)
    pid, maker, pn = _resolve(engine, part)
    now = utcnow()
    with _writing(engine, "stock add") as conn:
        after = _increase(conn, pid, loc, n, cost, now)
        mid = _movement(conn, pid, loc, n, after, text, now)
    return MovementRecord(mid, pid, maker, pn, loc, n, after, text, now)


def take_stock(engine: Engine, part: PartRef, location: str, quantity: int,
               note: str | None = None) -> MovementRecord:
    """Take ``quantity`` pieces of ``part`` from ``location``.

    Raises StockError (naming the part, the location, what is there and what was asked) when the
    location holds fewer pieces or has no line for the part; then nothing is changed. Safe
    against other processes taking at the same time (see the module docstring).
    Returns the movement written (delta = -quantity).
    """
    n = _quantity(quantity)
    loc = _location(location)
    text = _note(note)
    pid, maker, pn = _resolve(engine, part)
    now = utcnow()
    with _writing(engine, "stock take") as conn:
        done = _decrease(conn, pid, loc, n, now)
        if done is None:
            raise _shortage(conn, pid, f"{maker}:{pn}", loc, n)
        after = done[0]
        mid = _movement(conn, pid, loc, -n, after, text, now)
    return MovementRecord(mid, pid, maker, pn, loc, -n, after, text, now)


def move_stock(engine: Engine, part: PartRef, from_loc: str, to_loc: str, quantity: int,
               note: str | None = None) -> MoveRecord:
    """Move ``quantity`` pieces of ``part`` between locations, in one transaction.

    Two movement rows (the take and the addition) carry the note ``move FROM -> TO`` followed by
    the user's note. A new target line takes the source's unit cost. A shortage at the source is
    the StockError of :func:`take_stock`, and nothing changes.
    """
    n = _quantity(quantity)
    src = _location(from_loc, "from-location")
    dst = _location(to_loc, "to-location")
    if src == dst:
        raise InputError(f"a move needs two different locations, got {src} twice", value=dst)
    user = _note(note)
    text = f"move {src} -> {dst}" + (f": {user}" if user else "")
    pid, maker, pn = _resolve(engine, part)
    now = utcnow()
    with _writing(engine, "stock move") as conn:
        done = _decrease(conn, pid, src, n, now)
        if done is None:
            raise _shortage(conn, pid, f"{maker}:{pn}", src, n)
        src_after, cost = done
        m1 = _movement(conn, pid, src, -n, src_after, text, now)
        # the cost is only set on a new line: an existing target keeps its own cost
        dst_after = _increase(conn, pid, dst, n, cost, now, keep_cost=True)
        m2 = _movement(conn, pid, dst, n, dst_after, text, now)
    return MoveRecord(MovementRecord(m1, pid, maker, pn, src, -n, src_after, text, now),
                      MovementRecord(m2, pid, maker, pn, dst, n, dst_after, text, now))


# ------------------------------------------------------------------ stock reads
def list_stock(bind: Engine | Session, part: PartRef | None = None, location: str | None = None,
               kind: str | None = None) -> list[StockRecord]:
    """Stock lines (empty ones included), by maker, part number and location."""
    if kind is not None and kind not in KINDS:
        raise InputError(f"kind must be one of {', '.join(KINDS)}, not {kind!r}", value=kind)
    loc = _location(location) if location is not None else None
    pid = _resolve(bind, part)[0] if part is not None else None
    stmt = (select(Stock.part_id, Part.maker, Part.part_number, Part.kind, Stock.location,
                   Stock.quantity, Stock.unit_cost, Stock.updated_at)
            .join(Part, Part.id == Stock.part_id)
            .order_by(Part.maker, Part.part_number, Stock.location))
    if pid is not None:
        stmt = stmt.where(Stock.part_id == pid)
    if loc is not None:
        stmt = stmt.where(Stock.location == loc)
    if kind is not None:
        stmt = stmt.where(Part.kind == kind)
    with _reading(bind) as session:
        rows = session.execute(stmt).all()
    return [StockRecord(r[0], r[1], r[2], r[3], r[4], r[5], r[6], _aware(r[7])) for r in rows]


def movements(bind: Engine | Session, part: PartRef | None = None, limit: int | None = 50,
              location: str | None = None) -> list[MovementRecord]:
    """The stock history, newest first; ``limit=None`` for all of it."""
    if limit is not None and (isinstance(limit, bool) or not isinstance(limit, int) or limit < 1):
        raise InputError(f"limit must be a whole number above 0, not {limit!r}", value=limit)
    loc = _location(location) if location is not None else None
    pid = _resolve(bind, part)[0] if part is not None else None
    m = StockMovement
    stmt = (select(m.id, m.part_id, Part.maker, Part.part_number, m.location, m.delta,
                   m.quantity_after, m.note, m.at)
            .join(Part, Part.id == m.part_id)
            .order_by(m.at.desc(), m.id.desc()))
    if pid is not None:
        stmt = stmt.where(m.part_id == pid)
    if loc is not None:
        stmt = stmt.where(m.location == loc)
    if limit is not None:
        stmt = stmt.limit(limit)
    with _reading(bind) as session:
        rows = session.execute(stmt).all()
    return [MovementRecord(*r[:8], _aware(r[8])) for r in rows]


# ------------------------------------------------------------------ cross-references
def add_crossref(engine: Engine, part_a: PartRef, part_b: PartRef,
                 relation: str = "equivalent", note: str | None = None) -> CrossRefRecord:
    """Record that the shop has verified that ``part_b`` may replace ``part_a``.

    ``relation`` is ``equivalent`` (either replaces the other) or ``replaces`` (one way). The
    date is recorded. A part paired with itself, or a pair already recorded with the same
    relation (for ``equivalent`` in either order), is an InputError and nothing changes.
    """
    if relation not in RELATIONS:
        raise InputError(f"relation must be one of {', '.join(RELATIONS)}, not {relation!r}",
                         value=relation)
    text = _note(note)
    a_id, a_maker, a_pn = _resolve(engine, part_a)
    b_id, b_maker, b_pn = _resolve(engine, part_b)
    a_name, b_name = f"{a_maker}:{a_pn}", f"{b_maker}:{b_pn}"
    if a_id == b_id:
        raise InputError(f"a cross-reference needs two different parts, got {a_name} twice",
                         value=a_name)
    duplicate = InputError(f"{a_name} {relation} {b_name} is already recorded", value=b_name)
    now = utcnow()
    with _writing(engine, "xref add") as conn:
        try:
            with conn.begin_nested():  # the INSERT is the transaction's first write
                xid = conn.execute(insert(CrossRef).values(
                    part_a_id=a_id, part_b_id=b_id, relation=relation, note=text,
                    recorded_at=now).returning(CrossRef.id)).scalar_one()
        except IntegrityError:
            same = conn.scalar(select(CrossRef.id).where(
                CrossRef.part_a_id == a_id, CrossRef.part_b_id == b_id,
                CrossRef.relation == relation))
            if same is not None:
                raise duplicate from None
            raise
        if relation == "equivalent":
            if conn.dialect.name == "postgresql":
                # serialise concurrent adds of the same pair (either order), so that one of
                # them sees the other's row below; NO KEY UPDATE does not block FK checks
                conn.execute(select(Part.id).where(Part.id.in_(sorted((a_id, b_id))))
                             .order_by(Part.id).with_for_update(key_share=True))
            mirrored = conn.scalar(select(CrossRef.id).where(
                CrossRef.part_a_id == b_id, CrossRef.part_b_id == a_id,
                CrossRef.relation == "equivalent"))
            if mirrored is not None:
                raise InputError(f"{b_name} equivalent {a_name} is already recorded "
                                 "(equivalence holds both ways)", value=b_name)
    return CrossRefRecord(xid, a_name, b_name, a_id, b_id, relation, text, now)


def list_crossrefs(bind: Engine | Session, part: PartRef | None = None) -> list[CrossRefRecord]:
    """Cross-references, oldest first; with ``part``, those naming it on either side."""
    pid = _resolve(bind, part)[0] if part is not None else None
    a = Part.__table__.alias("pa")
    b = Part.__table__.alias("pb")
    x = CrossRef
    stmt = (select(x.id, a.c.maker, a.c.part_number, b.c.maker, b.c.part_number, x.part_a_id,
                   x.part_b_id, x.relation, x.note, x.recorded_at)
            .join(a, a.c.id == x.part_a_id)
            .join(b, b.c.id == x.part_b_id)
            .order_by(x.recorded_at, x.id))
    if pid is not None:
        stmt = stmt.where(or_(x.part_a_id == pid, x.part_b_id == pid))
    with _reading(bind) as session:
        rows = session.execute(stmt).all()
    return [CrossRefRecord(r[0], f"{r[1]}:{r[2]}", f"{r[3]}:{r[4]}", r[5], r[6], r[7], r[8],
                           _aware(r[9])) for r in rows]


__all__ = [
    "RELATIONS", "MAX_QUANTITY", "StockRecord", "MovementRecord", "MoveRecord", "CrossRefRecord",
    "add_stock", "take_stock", "move_stock", "list_stock", "movements", "add_crossref",
    "list_crossrefs",
]
