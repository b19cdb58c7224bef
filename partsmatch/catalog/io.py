"""Catalog CSV import and export (the CSV contract of DESIGN.md section 4).

Import streams the file in batches (constant memory), runs as ONE transaction and stops at the
first bad row with ``FILE:LINE: column 'X': why`` (an :class:`InputError`); the database is then
exactly as it was. ``dry_run`` runs every check, the database's own included, and rolls back.

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
import math
import os
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, Iterator, TextIO

from sqlalchemy import DateTime, Engine, bindparam, select
from sqlalchemy import update as sql_update
from sqlalchemy.exc import SQLAlchemyError

from partsmatch.catalog.models import (
    CHARACTERISTICS, FUSE_STANDARDS, KINDS, RATING_UNITS, Part, Stock, StockMovement, utcnow,
)
from partsmatch.catalog.names import normalize_part_number
from partsmatch.errors import InputError, UnitError
from partsmatch.units import ac_dc, format_quantity, parse_quantity

#: The contract's columns, in order; the optional ones follow.
CSV_COLUMNS = (
    "part_number", "maker", "kind", "description", "capacitance", "tolerance", "voltage_ac",
    "voltage_dc", "bleeder", "dielectric", "polarized", "ripple_current", "temp_max", "vrrm",
    "if_avg", "ifsm", "trr", "vf", "rated_current", "voltage", "breaking_capacity",
    "characteristic", "i2t", "size", "quantity", "location", "unit_cost",
)
OPTIONAL_COLUMNS = (
    "tolerance_minus", "tolerance_plus", "rated_frequency", "voltage_dc_fuse", "fuse_standard",
    "resistance", "power", "voltage_max",
)
ALL_COLUMNS = CSV_COLUMNS + OPTIONAL_COLUMNS
REQUIRED = ("part_number", "maker", "kind")
#: Free-text cells that get formula neutralisation.
FREE_TEXT = ("part_number", "maker", "description", "dielectric", "size", "location")

PART_COLUMNS = ("kind", "maker", "part_number", "pn_norm", "description", *RATING_UNITS,
                "dielectric", "polarized", "characteristic", "fuse_standard", "size")
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

_FORMULA_START = ("=", "+", "-", "@")


def _needs_escape(s: str) -> bool:
    if not s:
        return False
    if s[0] in _FORMULA_START:
        return True
    return s[0] == "'" and _needs_escape(s[1:])


def escape_cell(s: str) -> str:
    """Prefix an apostrophe to a cell a spreadsheet would run as a formula."""
    return "'" + s if _needs_escape(s) else s


def unescape_cell(s: str) -> str:
    """Inverse of :func:`escape_cell`: removes exactly the apostrophe export added."""
    return s[1:] if s.startswith("'") and _needs_escape(s[1:]) else s


# ------------------------------------------------------------------ parsing rows
_TRUE = {"true", "yes", "y", "1"}
_FALSE = {"false", "no", "n", "0"}
_MISSING = object()
#: Largest stock quantity (the database column is a 32-bit integer).
MAX_QUANTITY = 2**31 - 1
#: A memo of cell text -> checked value is emptied when it grows past this (constant memory).
MEMO_LIMIT = 10_000
_TOLERANCES = ("tolerance_minus", "tolerance_plus")
_RATINGS = tuple((c, u) for c, u in RATING_UNITS.items() if c not in _TOLERANCES)
_POS = {c: i for i, c in enumerate(PART_COLUMNS)}
_NOT_NULL = ("kind", "maker", "part_number", "pn_norm")
_FUSE_STANDARD = {s.lower().replace(" ", ""): s for s in FUSE_STANDARDS}


def _check_text(s: str, column: str) -> None:
    """Text a database can store: no NUL (PostgreSQL refuses it) and no lone surrogate."""
    if "\x00" in s:
        raise InputError("contains a NUL character", column=column)
    if not s.isascii():
        try:
            s.encode("utf-8")
        except UnicodeEncodeError:
            raise InputError("contains a lone surrogate (not valid Unicode text)",
                             column=column) from None


def _free_text(raw: str, column: str, limit: int | None) -> str | None:
    """A free-text cell: export's apostrophe removed, stripped, None when empty."""
    v = unescape_cell(raw).strip()
    if not v:
        return None
    if limit is not None and len(v) > limit:
        raise InputError(f"longer than {limit} characters", column=column)
    _check_text(v, column)
    return v


def _rating(text: str, column: str, unit: str) -> float | None:
    t = text.strip()
    if not t:
        return None
    value = parse_quantity(t, unit, column=column)
    if value < 0 and column != "temp_max":
        raise UnitError(f"a rating cannot be negative ({t!r})", column=column, value=t)
    if column == "voltage_ac" and ac_dc(t) == "dc":
        raise UnitError(f"{t!r} is a DC rating: put it in voltage_dc", column=column, value=t)
    if column == "voltage_dc" and ac_dc(t) == "ac":
        raise UnitError(f"{t!r} is an AC rating: put it in voltage_ac", column=column, value=t)
    return value


def _tolerance(text: str, column: str) -> float | None:
    """A tolerance in % (0-100; an asymmetric plus side up to the schema's 1000)."""
    t = text.strip()
    if not t:
        return None
    t = t.replace("±", "").replace("+/-", "").replace("+-", "")
    v = parse_quantity(t, "%", column=column)
    if v < 0 or (v > 100 and column != "tolerance_plus"):
        raise UnitError(f"tolerance {text.strip()!r} is outside 0-100 %", column=column,
                        value=text)
    if v > 1000:
        raise UnitError(f"tolerance {text.strip()!r} is outside 0-1000 %", column=column,
                        value=text)
    return v


def _polarized(text: str) -> bool | None:
    p = text.strip().lower()
    if p and p not in _TRUE | _FALSE:
        raise InputError(f"expected true or false, got {p!r}", column="polarized", value=p)
    return (p in _TRUE) if p else None


def _characteristic(text: str) -> str | None:
    ch = text.strip().upper()
    if ch and ch not in CHARACTERISTICS:
        raise InputError(f"{ch!r} is not an IEC 60127 characteristic ({' '.join(CHARACTERISTICS)})",
                         column="characteristic", value=ch)
    return ch or None


def _fuse_standard(text: str) -> str | None:
    std = text.strip()
    if not std:
        return None
    canon = _FUSE_STANDARD.get(
        std.lower().replace(" ", "").replace("-", "").replace("ul24814", "ul248-14"))
    if canon is None:
        raise InputError(f"{std!r} is not one of {', '.join(FUSE_STANDARDS)}",
                         column="fuse_standard", value=std)
    return canon


def _stock(qty_raw: str, loc_raw: str, cost_raw: str) -> tuple[str, int, float | None] | None:
    """(location, quantity, unit cost) of a row, None when the row names no stock."""
    qty_text = qty_raw.strip()
    loc = unescape_cell(loc_raw).strip()
    cost_text = cost_raw.strip()
    if not (qty_text or loc or cost_text):
        return None
    if not loc:
        raise InputError("a location is needed where quantity or unit_cost is given",
                         column="location")
    if len(loc) > 40:
        raise InputError("longer than 40 characters", column="location")
    _check_text(loc, "location")
    qty = 0
    if qty_text:
        try:
            f = float(qty_text)
        except ValueError:
            raise InputError(f"expected a whole number, got {qty_text!r}", column="quantity",
                             value=qty_text) from None
        if not f.is_integer() or f < 0 or f > MAX_QUANTITY:
            raise InputError(f"expected a whole number >= 0, got {qty_text!r}", column="quantity",
                             value=qty_text)
        qty = int(f)
    cost = None
    if cost_text:
        try:
            cost = float(cost_text)
        except ValueError:
            raise InputError(f"expected a number, got {cost_text!r}", column="unit_cost",
                             value=cost_text) from None
        if not math.isfinite(cost) or cost < 0:
            raise InputError(f"expected a number >= 0, got {cost_text!r}", column="unit_cost",
                             value=cost_text)
    return loc, qty, cost


def compile_row_parser(header: list[str], *, null: object = None,
                       booleans: tuple = (False, True)) -> Callable[[list[str]], tuple]:
    """A parser for rows under ``header`` (lower-case column names; unknown ones are skipped).

    The parser takes a row's cells (as read, export's apostrophes still on) and returns
    ``(values, stock)``: ``values`` in :data:`PART_COLUMNS` order, ``stock`` as
    ``(location, quantity, unit_cost)`` or None. It raises InputError/UnitError with ``column``
    set; the caller adds file and line. Checks run in a fixed order (required columns, kind,
    lengths, ratings in contract order, tolerances, polarity, fuse letters, stock), so the
    column named for a row with several faults does not depend on the file's column order.

    The text of each column that repeats (units, makers, locations, letters) is checked once
    and remembered; each memo is bounded by :data:`MEMO_LIMIT`.

    ``null`` and ``booleans`` are what an empty value and polarity become in ``values``: the
    import on SQLite uses ``''`` (turned back into NULL by the INSERT) and ``(0, 1)``, which
    the sqlite3 module binds without its slow adaptation path for None and bool.
    """
    width = len(header)
    where = {h: i for i, h in enumerate(header) if h in ALL_COLUMNS}

    def at(col: str) -> int:  # a missing column reads the empty cell appended at ``width``
        return where.get(col, width)

    i_pn, i_mk, i_kind = at("part_number"), at("maker"), at("kind")
    i_desc, i_diel, i_size = at("description"), at("dielectric"), at("size")
    i_tol, i_tmin, i_tplus = at("tolerance"), at("tolerance_minus"), at("tolerance_plus")
    i_pol, i_char, i_std = at("polarized"), at("characteristic"), at("fuse_standard")
    i_qty, i_loc, i_cost = at("quantity"), at("location"), at("unit_cost")
    ratings = tuple((where[c], _POS[c], {}) for c, _ in _RATINGS if c in where)
    rating_of = {_POS[c]: (c, u) for c, u in _RATINGS}
    m_maker: dict = {}
    m_kind: dict = {}
    m_diel: dict = {}
    m_size: dict = {}
    m_tol: dict = {}
    m_tmin: dict = {}
    m_tplus: dict = {}
    m_pol: dict = {}
    m_char: dict = {}
    m_std: dict = {}
    m_loc: dict = {}
    m_qty: dict = {}
    m_cost: dict = {}
    template = [null] * len(PART_COLUMNS)
    no, yes = booleans

    def polarity(raw: str):
        p = _polarized(raw)
        return null if p is None else (yes if p else no)
    p_tmin, p_tplus = _POS["tolerance_minus"], _POS["tolerance_plus"]
    missing = _MISSING

    def memo(table: dict, raw: str, fn, *args):
        v = table.get(raw, missing)
        if v is missing:
            v = fn(raw, *args)
            if v is None:
                v = null
            if len(table) >= MEMO_LIMIT:
                table.clear()
            table[raw] = v
        return v

    def tolerance(table: dict, raw: str, column: str) -> float | None:
        v = table.get(raw, missing)
        if v is missing:
            v = _tolerance(raw, column)
            if len(table) >= MEMO_LIMIT:
                table.clear()
            table[raw] = v
        return v

    def parse(cells: list[str]) -> tuple[tuple, tuple | None]:
        n = len(cells)
        if n < width:
            cells = cells + [""] * (width - n)
        cells.append("")
        # required columns first, in contract order
        pn = cells[i_pn]
        if pn[:1] == "'":
            pn = unescape_cell(pn)
        pn = pn.strip()
        if not pn:
            raise InputError("a value is required", column="part_number")
        raw_maker = cells[i_mk]
        maker = m_maker.get(raw_maker)
        new_maker = maker is None
        if new_maker:
            maker = unescape_cell(raw_maker).strip()
            if not maker:
                raise InputError("a value is required", column="maker")
        raw_kind = cells[i_kind]
        kind = m_kind.get(raw_kind)
        if kind is None:
            k = raw_kind.strip()
            if not k:
                raise InputError("a value is required", column="kind")
            kind = k.lower()
            if kind not in KINDS:
                raise InputError(f"kind {k!r} is not one of {', '.join(KINDS)}", column="kind",
                                 value=k)
            m_kind[raw_kind] = kind
        if len(pn) > 80:
            raise InputError("longer than 80 characters", column="part_number")
        if new_maker:
            if len(maker) > 80:
                raise InputError("longer than 80 characters", column="maker")
            _check_text(maker, "maker")
            if len(m_maker) >= MEMO_LIMIT:
                m_maker.clear()
            m_maker[raw_maker] = maker
        if "\x00" in pn or not pn.isascii():
            _check_text(pn, "part_number")
        out = template.copy()
        out[0] = kind
        out[1] = maker
        out[2] = pn
        out[3] = normalize_part_number(pn)[:80]
        desc = cells[i_desc]
        if desc:
            if desc[0] == "'":
                desc = unescape_cell(desc)
            desc = desc.strip()
            if desc:
                if "\x00" in desc or not desc.isascii():
                    _check_text(desc, "description")
                out[4] = desc
        diel = cells[i_diel]
        if diel:
            v = m_diel.get(diel, missing)
            diel = memo(m_diel, diel, _free_text, "dielectric", 40) if v is missing else v
        else:
            diel = null
        size = cells[i_size]
        if size:
            v = m_size.get(size, missing)
            size = memo(m_size, size, _free_text, "size", 60) if v is missing else v
        else:
            size = null
        for i, pos, table in ratings:
            t = cells[i]
            if t:
                v = table.get(t, missing)
                if v is missing:
                    v = _rating(t, *rating_of[pos])
                    if v is None:
                        v = null
                    if len(table) >= MEMO_LIMIT:
                        table.clear()
                    table[t] = v
                out[pos] = v
        t = cells[i_tmin]
        tmin = tolerance(m_tmin, t, "tolerance_minus") if t else None
        t = cells[i_tplus]
        tplus = tolerance(m_tplus, t, "tolerance_plus") if t else None
        t = cells[i_tol]
        tol = tolerance(m_tol, t, "tolerance") if t else None
        if tol is not None:
            for col, v in (("tolerance_minus", tmin), ("tolerance_plus", tplus)):
                if v is not None and v != tol:
                    raise InputError(f"tolerance {t.strip()!r} disagrees with {col}",
                                     column="tolerance")
            tmin = tplus = tol
        if tmin is not None:
            out[p_tmin] = tmin
        if tplus is not None:
            out[p_tplus] = tplus
        t = cells[i_pol]
        if t:
            out[28] = memo(m_pol, t, polarity)
        t = cells[i_char]
        ch = memo(m_char, t, _characteristic) if t else null
        t = cells[i_std]
        std = memo(m_std, t, _fuse_standard) if t else null
        if std == "IEC 60127" and not ch:
            raise InputError("an IEC 60127 fuse needs its characteristic letter (FF F M T TT)",
                             column="characteristic")
        out[27] = diel
        out[29] = ch
        out[30] = std
        out[31] = size
        q, lo, c = cells[i_qty], cells[i_loc], cells[i_cost]
        stock = None
        if q or lo or c:
            loc = m_loc.get(lo)
            qty = m_qty.get(q)
            cost = m_cost.get(c, missing)
            if loc is None or qty is None or cost is missing:
                stock = _stock(q, lo, c)
                if stock is not None:
                    for table, key, v in ((m_loc, lo, stock[0]), (m_qty, q, stock[1]),
                                          (m_cost, c, stock[2])):
                        if len(table) >= MEMO_LIMIT:
                            table.clear()
                        table[key] = v
            else:
                stock = (loc, qty, cost)
        return tuple(out), stock

    return parse


_GENERIC: dict[tuple[str, ...], Callable] = {}


def parse_row(row: dict[str, str]) -> tuple[dict, tuple[str, int, float | None] | None]:
    """One CSV row (keys = column names, export's apostrophes still on) -> (part values, stock).

    Raises InputError/UnitError with ``column`` set; the caller adds file and line.
    """
    header = tuple(row)
    parse = _GENERIC.get(header)
    if parse is None:
        if len(_GENERIC) >= 16:
            _GENERIC.clear()
        parse = _GENERIC[header] = compile_row_parser(list(header))
    values, stock = parse([row[h] or "" for h in header])
    return dict(zip(PART_COLUMNS, values)), stock


def _differs(a: tuple, b: tuple) -> str | None:
    """The first column (PART_COLUMNS order, identity left out) where two parts disagree."""
    if a[0] == b[0] and a[4:] == b[4:]:
        return None
    for i, col in enumerate(PART_COLUMNS):
        if i in (1, 2, 3):
            continue
        if a[i] != b[i]:
            return col
    return None


# ------------------------------------------------------------------ reading the file
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


def _read_header(reader, name: str, ignore_extra: bool) -> list[str]:
    try:
        header = next(reader)
    except StopIteration:
        raise InputError("the file is empty (no header row)", file=name, line=1) from None
    except csv.Error as exc:
        raise InputError(f"not a readable CSV file: {exc}", file=name, line=1) from None
    header = [h.strip().lower() for h in header]
    for col in REQUIRED:
        if col not in header:
            raise InputError("the header lacks this required column", file=name, line=1,
                             column=col)
    seen = set()
    for h in header:
        if h in seen:
            raise InputError("column named twice in the header", file=name, line=1, column=h)
        seen.add(h)
        if h not in ALL_COLUMNS and not ignore_extra:
            raise InputError("unknown column (use --ignore-extra to skip it)", file=name, line=1,
                             column=h)
    return header


def _data_rows(reader, name: str, width: int) -> Iterator[tuple[int, list[str]]]:
    """(line, cells) of each non-blank data row; ``line`` is the row's last physical line."""
    while True:
        try:
            cells = next(reader)
        except StopIteration:
            return
        except csv.Error as exc:
            raise InputError(f"not a readable CSV row: {exc}", file=name,
                             line=reader.line_num) from None
        if len(cells) > width:
            if not "".join(cells).strip():
                continue
            raise InputError(f"{len(cells)} cells where the header has {width}", file=name,
                             line=reader.line_num)
        if not cells or (not cells[0].strip() and not "".join(cells).strip()):
            continue
        yield reader.line_num, cells


def _read_rows(fh: TextIO, name: str, ignore_extra: bool) -> Iterator[tuple[int, dict]]:
    """(line, {column: cell}) of each data row (for tools and tests; import uses cells)."""
    reader = csv.reader(fh)
    header = _read_header(reader, name, ignore_extra)
    for line, cells in _data_rows(reader, name, len(header)):
        yield line, {h: c for h, c in zip(header, cells) if h in ALL_COLUMNS}


def _decode_error_line(path: str | Path) -> int | None:
    """The line of a file's first byte that is not UTF-8 (read again in chunks, on failure)."""
    import codecs

    dec = codecs.getincrementaldecoder("utf-8")()
    line = 1
    try:
        with open(path, "rb") as fb:
            while chunk := fb.read(1 << 20):
                try:
                    dec.decode(chunk)
                except UnicodeDecodeError as exc:
                    return line + chunk.count(b"\n", 0, max(exc.start, 0))
                line += chunk.count(b"\n")
    except OSError:
        return None
    return None


# ------------------------------------------------------------------ import
def import_csv(engine: Engine, path: str | Path | None = None, *, stream: TextIO | None = None,
               name: str | None = None, update: bool = False, dry_run: bool = False,
               ignore_extra: bool = False, note: str | None = None,
               progress: Callable[[int, float | None], None] | None = None) -> ImportReport:
    """Import a catalog CSV as one transaction; see the module docstring.

    Args:
        path / stream: the CSV file, or an open text stream (then ``name`` names it in errors).
        update: parts already in the catalog (by maker and part number) get the file's ratings,
            and a row's quantity sets the stock at its location; without it such a row is an error.
        dry_run: check everything, then roll back.
        note: the note of the stock movements (default ``import FILE``).
        progress: called after each batch with the number of rows read and the fraction of the
            file read (by bytes; None for a stream whose size is unknown).

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
                    job.start(_size_of(fh))
                    header = _read_header(reader, name, ignore_extra)
                    job.run(_data_rows(reader, name, len(header)),
                            compile_row_parser(header, null=job.null, booleans=job.booleans),
                            _progress_of(fh, progress))
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
    except UnicodeDecodeError as exc:
        line = _decode_error_line(path) if stream is None else reader.line_num + 1
        raise InputError(f"not UTF-8 text ({exc.reason})", file=name, line=line) from None
    except (SQLAlchemyError, dbapi_error) as exc:
        from partsmatch.errors import DatabaseError

        msg = " ".join(str(getattr(exc, "orig", None) or exc).split())[:200]
        raise DatabaseError(f"import rolled back: {msg}", file=name) from None
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
    def run(self, rows: Iterator[tuple[int, list[str]]], parse, progress) -> None:
        batch: list[tuple[int, tuple, tuple, tuple | None]] = []
        first: dict[tuple[str, str], tuple[int, tuple]] = {}
        size = BATCH
        name = self.name
        for line, cells in rows:
            try:
                values, stock = parse(cells)
                key = (values[1], values[2])
                prev = first.get(key)
                if prev is None:
                    first[key] = (line, values)
                else:
                    col = _differs(prev[1], values)
                    if col:
                        raise InputError(f"differs from line {prev[0]} of the same part",
                                         column=col)
            except InputError as exc:
                exc.located(file=name, line=line)
                if batch:  # a fault in an earlier row of this batch is the first one
                    self.flush(batch, first)
                raise exc from None
            batch.append((line, key, values, stock))
            if len(batch) >= size:
                self.flush(batch, first)
                batch, first = [], {}
                if progress:
                    progress(self.report.rows)
        if batch:
            self.flush(batch, first)
        if progress:
            progress(self.report.rows)

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
                # the stock rows get their ids here (the import holds the write lock), and
                # their movement rows are copied from them by the database in one statement
                first_id = self.next_stock
                self.next_stock += len(wanted)
                self.cur.executemany(self.sql_stock_ids, [
                    (sid, pid, loc, q, c, now)
                    for sid, ((pid, loc), (q, c, _)) in enumerate(items, first_id)])
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
            if self.sqlite:  # ids from the import's own count (see the bulk case above)
                first_id = self.next_stock
                self.next_stock += len(inserts)
                self.cur.executemany(self.sql_stock_ids,
                                     [(sid, *row) for sid, row in enumerate(inserts, first_id)])
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
    with open(path, newline="", encoding="utf-8-sig") as fh:
        for line, row in _read_rows(fh, str(path), ignore_extra=False):
            try:
                yield parse_row(row)
            except InputError as exc:
                raise exc.located(file=str(path), line=line) from None


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
