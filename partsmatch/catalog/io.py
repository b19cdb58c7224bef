"""Catalog CSV import and export (the CSV contract of DESIGN.md section 4).

Import streams the file in batches (constant memory), runs as ONE transaction and stops at the
first bad row with ``FILE:LINE: column 'X': why`` (an :class:`InputError`); the database is then
exactly as it was. ``dry_run`` runs every check, the database's own included, and rolls back.
The checks of a row alone live in :mod:`partsmatch.catalog.csvrows`; a large file is read and
checked there in a child process while this one writes (the rows, counts and first error are
the same as when one process does both).

Export writes every value so that importing it again reproduces it exactly: numbers in
engineering units where that text reads back to the same float, else as bare SI numbers.
Free-text cells that a spreadsheet would run as a formula (leading ``= + - @``) get a leading
apostrophe (OWASP "CSV injection" guidance); import removes exactly that apostrophe.
"""

from __future__ import annotations

import csv
import gc
import io
import json
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, Iterator, TextIO

from sqlalchemy import DateTime, Engine, bindparam, select
from sqlalchemy import update as sql_update
from sqlalchemy.exc import SQLAlchemyError

from partsmatch.catalog.csvrows import (  # noqa: F401  (the CSV contract, re-exported)
    _NOT_NULL, ALL_COLUMNS, FREE_TEXT, MAX_QUANTITY, PART_COLUMNS, ChildUnavailable, ParsedRows,
    _data_rows, _decode_error_line, _differs, _read_header, batches, compile_row_parser,
    escape_cell, unescape_cell,
)
from partsmatch.catalog.models import RATING_UNITS, Part, Stock, utcnow
from partsmatch.errors import DatabaseError, InputError, UnitError, short_message
from partsmatch.units import format_quantity, parse_quantity

#: Rows per batch: each batch is parsed, checked against the catalog with one query, and
#: written with one executemany per table.
BATCH = 5000
#: SQLite page cache of the import's connection, in KiB (restored afterwards): the indexes of
#: a large catalog stay in memory while it is written (SQLite "PRAGMA cache_size").
SQLITE_CACHE_KIB = 65536
#: A SQLite import of a file expected to hold at least this many rows, and at least as many
#: as the catalog holds, drops the secondary indexes of the tables it writes and builds them
#: again before commit (one sort per index instead of a B-tree insert per row and index). The
#: unique indexes stay: the import's own look-ups use them. Rows are estimated from the file's
#: size at :data:`BYTES_PER_ROW`.
BULK_ROWS = 50_000
BYTES_PER_ROW = 200
#: A file expected to hold at least this many rows (by its size, as above) is read and checked
#: in a child process while this one writes (:class:`~partsmatch.catalog.csvrows.ParsedRows`),
#: on a machine with more than one CPU. Below it, starting the child costs more than it saves.
PARALLEL_ROWS = 20_000

# ------------------------------------------------------------------ the report
@dataclass
class ImportReport:
    file: str
    rows: int = 0
    parts_added: int = 0
    parts_updated: int = 0
    stock_rows: int = 0
    dry_run: bool = False
    notes: list[str] = field(default_factory=list)

    def to_dict(self) -> dict:
        return dict(self.__dict__)


# ------------------------------------------------------------------ import
def import_csv(engine: Engine, path: str | Path | None = None, *, stream: TextIO | None = None,
               name: str | None = None, update: bool = False, dry_run: bool = False,
               ignore_extra: bool = False, note: str | None = None,
               progress: Callable[[int, float | None], None] | None = None,
               parallel: bool | None = None) -> ImportReport:
    """Import a catalog CSV as one transaction; see the module docstring.

    Args:
        path / stream: the CSV file, or an open text stream (then ``name`` names it in errors).
        update: parts already in the catalog (by maker and part number) get the file's ratings,
            and a row's quantity sets the stock at its location; without it such a row is an error.
        dry_run: check everything, then roll back.
        note: the note of the stock movements (default ``import FILE``).
        progress: called after each batch with the number of rows read and the fraction of the
            file read (by bytes; None for a stream whose size is unknown).
        parallel: read and check the rows in a child process while this one writes (a file
            only, not a stream). None (the default) does so for a file of at least
            :data:`PARALLEL_ROWS` rows (estimated from its size) on a machine with more than
            one CPU. Results and errors are the same either way.

    Raises:
        InputError: ``FILE:LINE: column 'X': why`` for the first bad row; nothing is changed.
        DatabaseError: the database refused the import (rolled back, nothing changed).
    """
    if stream is None:
        if path is None:
            raise ValueError("import_csv needs a path or a stream")
        name = name or str(path)
        try:
            fh: TextIO = open(path, newline="", encoding="utf-8-sig")
        except OSError as exc:
            raise InputError(f"cannot read the file: {exc.strerror}", file=name) from None
    else:
        fh = stream
        name = name or "<stdin>"
    report = ImportReport(file=name, dry_run=dry_run)
    dbapi_error = getattr(engine.dialect.dbapi, "Error", SQLAlchemyError)
    reader = csv.reader(fh)
    size = _size_of(fh)
    if parallel is None:
        parallel = ((size or 0) // BYTES_PER_ROW >= PARALLEL_ROWS and (os.cpu_count() or 1) > 1)
    parsed: ParsedRows | None = None
    # The import allocates millions of short-lived tuples and makes no reference cycles worth
    # collecting; the cycle collector's passes over them cost about a seventh of the time.
    gc_was_enabled = gc.isenabled()
    gc.disable()
    try:
        with fh:
            with engine.connect() as conn:
                trans = conn.begin()
                job = _Import(conn, name, update, report, note or f"import {Path(name).name}")
                try:
                    job.start(size)
                    if parallel and stream is None:
                        try:
                            parsed = ParsedRows(path, name, ignore_extra, job.sqlite, BATCH)
                        except OSError:  # no child process here: read the file in this one
                            parsed = None
                    if parsed is not None:
                        try:
                            job.run(parsed, _progress_of_child(parsed, progress))
                        except ChildUnavailable:  # it wrote nothing: read the file here
                            parsed.close()
                            parsed = None
                    if parsed is None:
                        header = _read_header(reader, name, ignore_extra)
                        parse = compile_row_parser(header, null=job.null, booleans=job.booleans)
                        job.run(batches(_data_rows(reader, name, len(header)), parse, BATCH,
                                        name), _progress_of(fh, progress))
                    if not dry_run:
                        job.rebuild_indexes()
                    if dry_run:
                        trans.rollback()
                    else:
                        trans.commit()
                except BaseException:
                    if trans.is_active:
                        trans.rollback()
                    raise
                finally:
                    job.finish()
                    if parsed is not None:
                        parsed.close()
    except UnicodeDecodeError as exc:
        line = _decode_error_line(path) if stream is None else reader.line_num + 1
        raise InputError(f"not UTF-8 text ({exc.reason})", file=name, line=line) from None
    except (SQLAlchemyError, dbapi_error) as exc:
        raise DatabaseError(f"import rolled back: {short_message(exc)}", file=name) from None
    finally:
        if gc_was_enabled:
            gc.enable()
    return report


def _size_of(fh: TextIO) -> int | None:
    """Size in bytes of the file behind a text stream, None when it is not a regular file."""
    try:
        st = os.fstat(fh.fileno())
    except (AttributeError, OSError, ValueError):
        return None
    import stat

    return st.st_size if stat.S_ISREG(st.st_mode) else None


def _progress_of_child(parsed: ParsedRows, progress):
    """``progress(rows)`` with the fraction of the file the parsing child has read."""
    if progress is None:
        return None
    return lambda rows: progress(rows, parsed.fraction)


def _progress_of(fh: TextIO, progress):
    """``progress(rows)`` with the fraction of the file read, when the file's size is known."""
    if progress is None:
        return None
    try:
        total = os.fstat(fh.fileno()).st_size
        raw = fh.buffer  # type: ignore[attr-defined]
        raw.tell()
    except (AttributeError, OSError, ValueError, io.UnsupportedOperation):
        total, raw = 0, None

    def report(rows: int) -> None:
        frac = None
        if raw is not None and total > 0:
            try:
                frac = min(1.0, raw.tell() / total)
            except (OSError, ValueError):
                frac = None
        progress(rows, frac)

    return report


class _Import:
    """One import on one connection, inside the caller's transaction.

    New parts get their ids up front and go in without RETURNING, with ``executemany`` on the
    DBAPI cursor (SQLite) or COPY (PostgreSQL). On SQLite the import holds the database's write
    lock from its first statement, so ``max(id) + 1`` onward is free; on PostgreSQL the ids come
    from the table's sequence, and the parts and stock tables are locked against other writers
    (readers go on).
    Each batch looks up the keys it names with one indexed join, so memory stays constant.
    """

    def __init__(self, conn, name: str, update: bool, report: ImportReport, note: str) -> None:
        self.conn = conn
        self.name = name
        self.update = update
        self.report = report
        self.note = note
        self.sqlite = conn.dialect.name == "sqlite"
        self.ph = "?" if conn.dialect.paramstyle == "qmark" else "%s"
        # how the parser writes an empty value and a polarity (see compile_row_parser)
        self.null, self.booleans = ("", (0, 1)) if self.sqlite else (None, (False, True))
        self.cur = None
        self.cache_size = None
        self.dropped: list[tuple[str, str]] = []
        self.max_part = self.max_stock = self.next_id = self.next_stock = 0
        #: SQLite: insert a batch's parts first and look up only when one was already there
        #: (see :meth:`flush`); off after a batch that met a known part, on again after a
        #: batch whose look-up found none.
        self.optimistic = self.sqlite
        when = DateTime(timezone=True).dialect_impl(conn.dialect)
        self._when = when.bind_processor(conn.dialect) or (lambda v: v)
        ph = self.ph
        cols = ", ".join(PART_COLUMNS)
        marks = [ph if (c in _NOT_NULL or not self.sqlite) else f"NULLIF({ph}, '')"
                 for c in PART_COLUMNS]
        self.sql_part = (f"INSERT INTO parts (id, {cols}, created_at) VALUES "
                         f"({ph}, {', '.join(marks)}, {ph})")
        self.sql_part_new = (f"{self.sql_part} ON CONFLICT (maker, part_number) DO NOTHING")
        self.sql_stock_ids = ("INSERT INTO stock (id, part_id, location, quantity, unit_cost, "
                              f"updated_at) VALUES ({ph}, {ph}, {ph}, {ph}, {ph}, {ph})")
        self.sql_move_of_stock = ("INSERT INTO stock_movements (part_id, location, delta, "
                                  f"quantity_after, note, at) SELECT part_id, location, quantity, "
                                  f"quantity, {ph}, updated_at FROM stock WHERE id >= {ph} "
                                  f"AND id < {ph} ORDER BY id")
        self.sql_stock = ("INSERT INTO stock (part_id, location, quantity, unit_cost, updated_at) "
                          f"VALUES ({ph}, {ph}, {ph}, {ph}, {ph})")
        self.sql_move = ("INSERT INTO stock_movements (part_id, location, delta, quantity_after, "
                         f"note, at) VALUES ({ph}, {ph}, {ph}, {ph}, {ph}, {ph})")
        sel = ", ".join(f"p.{c}" for c in PART_COLUMNS)
        if self.sqlite:
            self.sql_find = (f"SELECT p.id, {sel} FROM json_each(?) AS k JOIN parts AS p "
                             "ON p.maker = json_extract(k.value, '$[0]') "
                             "AND p.part_number = json_extract(k.value, '$[1]')")
            self.sql_find_stock = ("SELECT s.id, s.part_id, s.location, s.quantity "
                                   "FROM json_each(?) AS k JOIN stock AS s "
                                   "ON s.part_id = json_extract(k.value, '$[0]') "
                                   "AND s.location = json_extract(k.value, '$[1]')")
        else:
            self.sql_find = (f"SELECT p.id, {sel} FROM unnest(%s::text[], %s::text[]) "
                             "AS k(maker, part_number) JOIN parts AS p "
                             "ON p.maker = k.maker AND p.part_number = k.part_number")
            self.sql_find_stock = ("SELECT s.id, s.part_id, s.location, s.quantity "
                                   "FROM unnest(%s::int[], %s::text[]) AS k(part_id, location) "
                                   "JOIN stock AS s "
                                   "ON s.part_id = k.part_id AND s.location = k.location")

    # -- set-up and tear-down
    def start(self, size_bytes: int | None) -> None:
        self.cur = self.conn.connection.dbapi_connection.cursor()
        cur = self.cur
        if self.sqlite:
            # Take the write lock now (waiting for the busy timeout if another bench writes),
            # so that the ids read below stay free until commit.
            cur.execute("DELETE FROM parts WHERE 0")
            cur.execute("PRAGMA cache_size")
            self.cache_size = cur.fetchone()[0]
            cur.execute(f"PRAGMA cache_size = {-SQLITE_CACHE_KIB}")
            expected = (size_bytes or 0) // BYTES_PER_ROW
            if expected >= BULK_ROWS:
                cur.execute("SELECT count(*) FROM parts")
                if expected >= cur.fetchone()[0]:
                    self._drop_indexes()
        else:
            cur.execute("LOCK TABLE parts, stock IN SHARE ROW EXCLUSIVE MODE")
        cur.execute("SELECT max(id) FROM parts")
        self.max_part = cur.fetchone()[0] or 0
        cur.execute("SELECT max(id) FROM stock")
        self.max_stock = cur.fetchone()[0] or 0
        self.next_id = self.max_part + 1
        self.next_stock = self.max_stock + 1

    def _drop_indexes(self) -> None:
        """Drop the secondary (non-unique, explicitly created) indexes of the written tables."""
        cur = self.cur
        cur.execute("SELECT name, sql FROM sqlite_master WHERE type = 'index' AND sql IS NOT NULL "
                    "AND tbl_name IN ('parts', 'stock', 'stock_movements') "
                    "AND sql NOT LIKE 'CREATE UNIQUE%' ORDER BY name")
        self.dropped = cur.fetchall()
        for name, _ in self.dropped:
            cur.execute(f'DROP INDEX "{name}"')

    def rebuild_indexes(self) -> None:
        """Create again, from their own saved SQL, the indexes dropped for a bulk import."""
        for _, sql in self.dropped:
            self.cur.execute(sql)
        self.dropped = []

    def finish(self) -> None:
        if self.cur is None:
            return
        try:
            if self.cache_size is not None:
                self.cur.execute(f"PRAGMA cache_size = {int(self.cache_size)}")
            self.cur.close()
        except Exception:  # noqa: BLE001 - the connection may already be broken; nothing to keep
            pass
        self.cur = None

    # -- the rows
    def run(self, batches: Iterable[tuple[list, dict]], progress) -> None:
        """Write the batches of :func:`~partsmatch.catalog.csvrows.batches` (read here or by a
        :class:`ParsedRows` child). A faulty row ends them after the rows before it, which are
        written (and so checked against the catalog) before its error is raised."""
        for batch, first in batches:
            self.flush(batch, first)
            if progress:
                progress(self.report.rows)
        if progress and not self.report.rows:
            progress(0)

    def _insert(self, sql: str, rows: list[tuple]) -> None:
        """Rows into a table: executemany on SQLite; COPY on PostgreSQL (one statement for the
        batch instead of one round trip per row)."""
        if self.sqlite:
            self.cur.executemany(sql, rows)
            return
        head = sql[:sql.index(" VALUES")].replace("INSERT INTO", "COPY", 1)
        with self.cur.copy(f"{head} FROM STDIN") as copy:
            for row in rows:
                copy.write_row(row)

    def _insert_stock_sqlite(self, rows: list[tuple]) -> int:
        """Stock rows ``(part_id, location, quantity, unit_cost, updated_at)`` into SQLite with
        ids from the import's own count (it holds the write lock); returns the first id."""
        first_id = self.next_stock
        self.next_stock += len(rows)
        self.cur.executemany(self.sql_stock_ids,
                             [(sid, *row) for sid, row in enumerate(rows, first_id)])
        return first_id

    def _from_db(self, row: tuple) -> tuple:
        """A row read from the database in the parser's form (empty values as ``null``)."""
        null = self.null
        return row if null is None else tuple(null if v is None else v for v in row)

    def _to_db(self, v):
        return None if (self.null is not None and isinstance(v, str) and v == self.null) else v

    def _ids(self, n: int) -> list[int]:
        if self.sqlite:
            start = self.next_id
            self.next_id += n
            return list(range(start, start + n))
        self.cur.execute("SELECT nextval(pg_get_serial_sequence('parts', 'id')) "
                         "FROM generate_series(1, %s)", (n,))
        return [r[0] for r in self.cur.fetchall()]

    def _find(self, keys: list[tuple[str, str]]) -> dict[tuple[str, str], tuple]:
        if self.sqlite:
            self.cur.execute(self.sql_find, (json.dumps(keys),))
        else:
            self.cur.execute(self.sql_find, ([k[0] for k in keys], [k[1] for k in keys]))
        return {(r[2], r[3]): r for r in self.cur.fetchall()}

    def _find_stock(self, keys: list[tuple[int, str]]) -> dict[tuple[int, str], tuple[int, int]]:
        if self.sqlite:
            self.cur.execute(self.sql_find_stock, (json.dumps(keys),))
        else:
            self.cur.execute(self.sql_find_stock, ([k[0] for k in keys], [k[1] for k in keys]))
        return {(pid, loc): (sid, qty) for sid, pid, loc, qty in self.cur.fetchall()}

    def flush(self, batch, first) -> None:
        """Write one batch: its new parts, its updates and its stock.

        On SQLite a batch's parts first go in with ``ON CONFLICT DO NOTHING``; when every one
        went in (the usual case: new parts), no look-up is needed at all. When some were already
        there, one look-up sorts the batch's keys into the rows just written (found under the id
        given them) and the known parts, which are then treated as below (an error without
        ``update``, compared, updated); the ids given to the known ones stay unused.
        """
        name, report = self.name, self.report
        report.rows += len(batch)
        now = self._when(utcnow())
        mine: dict[tuple[str, str], int] = {}  # parts this batch has just written
        if self.optimistic:
            keys = list(first)
            new_ids = self._ids(len(keys))
            self.cur.executemany(self.sql_part_new, [
                (pid, *values, now) for pid, (_, values) in zip(new_ids, first.values())])
            if self.cur.rowcount == len(keys):
                report.parts_added += len(keys)
                self._flush_stock(batch, dict(zip(keys, new_ids)), set(), set(), now)
                return
            self.optimistic = False
            mine = dict(zip(keys, new_ids))
        existing = self._find(list(first))
        if self.sqlite and not mine and not existing:
            self.optimistic = True
        ids: dict[tuple[str, str], int] = {}
        seen: set[int] = set()  # parts in the catalog before this batch
        preexisting: set[int] = set()  # ... and before this import
        updates, new = [], []
        for key, (line, values) in first.items():
            old = existing.get(key)
            if old is None:
                new.append(values)
                continue
            pid = old[0]
            ids[key] = pid
            if mine.get(key) == pid:
                report.parts_added += 1
                continue
            seen.add(pid)
            col = _differs(self._from_db(old[1:]), values)
            if pid <= self.max_part:
                preexisting.add(pid)
                if not self.update:
                    raise InputError(f"part {key[0]}:{key[1]} is already in the catalog "
                                     "(use --update to change it)", file=name, line=line)
                if col:
                    updates.append({"b_id": pid, "b_updated_at": utcnow(),
                                    **{f"b_{c}": self._to_db(v)
                                       for c, v in zip(PART_COLUMNS, values)}})
            elif col:
                raise InputError("differs from an earlier row of the same part", file=name,
                                 line=line, column=col)
        if new:
            new_ids = self._ids(len(new))
            self._insert(self.sql_part,
                                 [(pid, *values, now) for pid, values in zip(new_ids, new)])
            for pid, values in zip(new_ids, new):
                ids[(values[1], values[2])] = pid
            report.parts_added += len(new)
        if updates:
            t = Part.__table__
            bound = {c: bindparam(f"b_{c}") for c in PART_COLUMNS}
            self.conn.execute(sql_update(t).where(t.c.id == bindparam("b_id")).values(
                **bound, updated_at=bindparam("b_updated_at")), updates)
            report.parts_updated += len(updates)
        self._flush_stock(batch, ids, seen, preexisting, now)

    def _flush_stock(self, batch, ids, seen, preexisting, now) -> None:
        wanted: dict[tuple[int, str], list] = {}
        for line, key, _, stock in batch:
            if stock is None:
                continue
            loc, qty, cost = stock
            pid = ids[key]
            cur = wanted.get((pid, loc))
            if cur is None:
                wanted[(pid, loc)] = [qty, cost, line]
                continue
            cur[0] += qty
            cur[2] = line
            if cost is not None:
                cur[1] = cost
            if cur[0] > MAX_QUANTITY:
                raise InputError(f"the stock at {loc} would exceed {MAX_QUANTITY}",
                                 file=self.name, line=line, column="quantity")
        if not wanted:
            return
        look = [k for k in wanted if k[0] in seen] if seen else None
        have = self._find_stock(look) if look else {}
        note = self.note
        if not have:  # every (part, location) is new: the usual case, in bulk
            items = wanted.items()
            if self.sqlite:
                # their movement rows are copied from them by the database in one statement
                first_id = self._insert_stock_sqlite([(pid, loc, q, c, now)
                                                      for (pid, loc), (q, c, _) in items])
                self.cur.execute(self.sql_move_of_stock, (note, first_id, self.next_stock))
            else:
                self._insert(self.sql_stock, [(pid, loc, q, c, now)
                                              for (pid, loc), (q, c, _) in items])
                self._insert(self.sql_move, [(pid, loc, q, q, note, now)
                                             for (pid, loc), (q, _, _) in items])
            self.report.stock_rows += len(wanted)
            return
        inserts, updates, moves = [], [], []
        for (pid, loc), (qty, cost, line) in wanted.items():
            old = have.get((pid, loc))
            if old is None:
                inserts.append((pid, loc, qty, cost, now))
                moves.append((pid, loc, qty, qty, note, now))
                continue
            sid, old_qty = old
            setting = self.update and pid in preexisting and sid <= self.max_stock
            new_qty = qty if setting else old_qty + qty
            if new_qty > MAX_QUANTITY:
                raise InputError(f"the stock at {loc} would exceed {MAX_QUANTITY}",
                                 file=self.name, line=line, column="quantity")
            updates.append({"b_id": sid, "b_quantity": new_qty, "b_updated_at": utcnow(),
                            "b_cost": cost})
            if new_qty != old_qty:
                moves.append((pid, loc, new_qty - old_qty, new_qty, note, now))
        if inserts:
            if self.sqlite:
                self._insert_stock_sqlite(inserts)
            else:
                self._insert(self.sql_stock, inserts)
        if updates:
            s = Stock.__table__
            keep_cost = [u for u in updates if u["b_cost"] is None]
            set_cost = [u for u in updates if u["b_cost"] is not None]
            if keep_cost:
                self.conn.execute(sql_update(s).where(s.c.id == bindparam("b_id")).values(
                    quantity=bindparam("b_quantity"), updated_at=bindparam("b_updated_at")),
                    [{k: v for k, v in u.items() if k != "b_cost"} for u in keep_cost])
            if set_cost:
                self.conn.execute(sql_update(s).where(s.c.id == bindparam("b_id")).values(
                    quantity=bindparam("b_quantity"), unit_cost=bindparam("b_cost"),
                    updated_at=bindparam("b_updated_at")), set_cost)
        if moves:
            self._insert(self.sql_move, moves)
        self.report.stock_rows += len(inserts)


# ------------------------------------------------------------------ export
def format_exact(value: float, unit: str) -> str:
    """Engineering text that reads back to exactly ``value``; else the bare SI number."""
    for digits in (3, 4, 6, 9, 12, 15, 17):
        text = format_quantity(value, unit, digits).replace("Ω", "ohm").replace("µ", "u") \
            .replace("°C", "degC").replace("A²s", "A2s")
        try:
            if parse_quantity(text, unit) == value:
                return text
        except UnitError:
            break
    return repr(float(value))


def _cells(part: Part) -> dict[str, str]:
    out = {c: "" for c in ALL_COLUMNS}
    for c in ("part_number", "maker", "kind", "description", "dielectric", "size",
              "characteristic", "fuse_standard"):
        v = getattr(part, c)
        out[c] = escape_cell(v) if (v is not None and c in FREE_TEXT) else (v or "")
    for col, unit in RATING_UNITS.items():
        if col in ("tolerance_minus", "tolerance_plus"):
            continue
        v = getattr(part, col)
        if v is not None:
            out[col] = format_exact(v, unit)
    tm, tp = part.tolerance_minus, part.tolerance_plus
    if tm is not None and tm == tp:
        out["tolerance"] = format_exact(tm, "%")
    else:
        out["tolerance_minus"] = format_exact(tm, "%") if tm is not None else ""
        out["tolerance_plus"] = format_exact(tp, "%") if tp is not None else ""
    if part.polarized is not None:
        out["polarized"] = "true" if part.polarized else "false"
    return out


def export_rows(engine: Engine, kind: str | None = None) -> Iterator[dict[str, str]]:
    """Rows of the export, one per part and stock location, streamed."""
    from sqlalchemy.orm import Session

    with Session(engine) as session:
        stmt = select(Part).order_by(Part.kind, Part.maker, Part.part_number)
        if kind:
            stmt = stmt.where(Part.kind == kind)
        for batch in session.scalars(stmt.execution_options(yield_per=1000)).partitions():
            ids = [p.id for p in batch]
            stock: dict[int, list[Stock]] = {}
            for st in session.scalars(select(Stock).where(Stock.part_id.in_(ids))
                                      .order_by(Stock.part_id, Stock.location)):
                stock.setdefault(st.part_id, []).append(st)
            for p in batch:
                base = _cells(p)
                lines = stock.get(p.id) or [None]
                for st in lines:
                    row = dict(base)
                    if st is not None:
                        row["quantity"] = str(st.quantity)
                        row["location"] = escape_cell(st.location)
                        row["unit_cost"] = repr(st.unit_cost) if st.unit_cost is not None else ""
                    yield row


def export_csv(engine: Engine, out: TextIO, kind: str | None = None) -> int:
    """Write the catalog (or one kind) as CSV to ``out``; returns the number of rows."""
    writer = csv.DictWriter(out, fieldnames=list(ALL_COLUMNS), lineterminator="\n")
    writer.writeheader()
    n = 0
    for row in export_rows(engine, kind):
        writer.writerow(row)
        n += 1
    return n


def read_csv_values(path: str | Path) -> Iterable[tuple[dict, tuple | None]]:
    """Parsed rows of a catalog CSV (for comparisons in tests and tools)."""
    name = str(path)
    with open(path, newline="", encoding="utf-8-sig") as fh:
        reader = csv.reader(fh)
        header = _read_header(reader, name, ignore_extra=False)
        parse = compile_row_parser(header)
        for line, cells in _data_rows(reader, name, len(header)):
            try:
                values, stock = parse(cells)
            except InputError as exc:
                raise exc.located(file=name, line=line) from None
            yield dict(zip(PART_COLUMNS, values)), stock


def export_text(engine: Engine, kind: str | None = None) -> str:
    buf = io.StringIO()
    export_csv(engine, buf, kind)
    return buf.getvalue()


def load_demo(engine: Engine) -> ImportReport:
    """Load the invented demo catalog (``data/demo_parts.csv``) into an empty catalog."""
    from partsmatch._resources import data_path
    from partsmatch.catalog.queries import count_parts
    from sqlalchemy.orm import Session

    path = data_path("demo_parts.csv")
    with Session(engine) as session:
        n = count_parts(session)
        if n:
            with open(path, newline="", encoding="utf-8") as fh:
                first = next(csv.DictReader(fh))
            loaded = session.scalar(select(Part.id).where(
                Part.maker == first["maker"], Part.part_number == first["part_number"]))
            if loaded is not None:
                report = ImportReport(file=str(path))
                report.notes.append("the demo data is already loaded")
                return report
            raise InputError(f"the catalog already holds {n} parts; the demo data goes into an "
                             "empty catalog (use another --db)")
    return import_csv(engine, path, note="demo data")
