"""Reading catalog CSV rows: the columns of the CSV contract (DESIGN.md section 4), the checks
of each cell, and the parsing half of a parallel import.

Every check that :func:`partsmatch.catalog.io.import_csv` makes of a row alone lives here; what
needs the catalog (known parts, stock) stays in ``io.py``. This module imports no database
layer, so that a large import can parse in a process of its own (:func:`parse_in_child`,
started as ``python -m partsmatch.catalog.csvrows``) while the importing process writes: see
:class:`ParsedRows`.
"""

from __future__ import annotations

import csv
import gc
import json
import math
import os
import pickle
import subprocess
import sys
import tempfile
from pathlib import Path
from typing import BinaryIO, Callable, Iterable, Iterator, TextIO

from partsmatch import errors
from partsmatch.catalog.names import normalize_part_number
from partsmatch.catalog.vocab import (
    CHARACTERISTICS, FUSE_STANDARDS, KINDS, MAX_QUANTITY, RATING_UNITS,
)
from partsmatch.errors import InputError, PartsmatchError, UnitError
from partsmatch.units import ac_dc, parse_quantity

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
    p_diel, p_pol, p_size = _POS["dielectric"], _POS["polarized"], _POS["size"]
    p_char, p_std = _POS["characteristic"], _POS["fuse_standard"]
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
            out[p_pol] = memo(m_pol, t, polarity)
        t = cells[i_char]
        ch = memo(m_char, t, _characteristic) if t else null
        t = cells[i_std]
        std = memo(m_std, t, _fuse_standard) if t else null
        if std == "IEC 60127" and not ch:
            raise InputError("an IEC 60127 fuse needs its characteristic letter (FF F M T TT)",
                             column="characteristic")
        out[p_diel] = diel
        out[p_char] = ch
        out[p_std] = std
        out[p_size] = size
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


def batches(rows: Iterable[tuple[int, list[str]]], parse: Callable, size: int,
            name: str) -> Iterator[tuple[list, dict]]:
    """Parsed rows in batches of ``size``: ``(batch, first)``.

    ``batch`` holds ``(line, key, values, stock)`` for each row, ``key`` being (maker,
    part_number); ``first`` maps each key to ``(line, values)`` of its first row in the batch.
    Rows of one part must agree on everything but stock: a later row that differs is an error.
    The first faulty row (a bad cell, a broken file structure, a disagreeing row) ends the
    batches: the rows before it come as a last, short batch, and the next step raises its
    :class:`InputError` with ``name`` and its line.
    """
    batch: list[tuple[int, tuple, tuple, tuple | None]] = []
    first: dict[tuple[str, str], tuple[int, tuple]] = {}
    it = iter(rows)
    while True:
        line = None
        try:
            got = next(it, None)
            if got is None:
                break
            line, cells = got
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
            if batch:
                yield batch, first
            raise exc from None
        batch.append((line, key, values, stock))
        if len(batch) >= size:
            yield batch, first
            batch, first = [], {}
    if batch:
        yield batch, first


# ------------------------------------------------------------------ parsing in a child process
def parse_in_child(path: str, name: str, ignore_extra: bool, sqlite: bool, size_of_batch: int,
                   out: BinaryIO) -> None:
    """The parsing half of a parallel import: read and check ``path`` and write pickled frames
    to ``out``.

    Frames: ``("batch", batch, first, fraction_of_file_read)`` for each batch of
    :func:`batches`; then ``("end",)``, or ``("error", fields)`` for the first faulty row (after
    the short batch of the rows before it, so that the importing process checks those first, as
    a serial import does). ``sqlite`` selects the parser's SQLite forms of empty values and
    polarity (see :func:`compile_row_parser`).
    """
    gc.disable()  # millions of short-lived tuples and no reference cycles (as the import does)
    null, booleans = ("", (0, 1)) if sqlite else (None, (False, True))

    def emit(frame: tuple) -> None:
        pickle.dump(frame, out, protocol=pickle.HIGHEST_PROTOCOL)
        out.flush()

    try:
        with open(path, newline="", encoding="utf-8-sig") as fh:
            size = os.fstat(fh.fileno()).st_size or 1
            raw = fh.buffer
            reader = csv.reader(fh)
            header = _read_header(reader, name, ignore_extra)
            parse = compile_row_parser(header, null=null, booleans=booleans)
            rows = _data_rows(reader, name, len(header))
            for batch, first in batches(rows, parse, size_of_batch, name):
                emit(("batch", batch, first, min(1.0, raw.tell() / size)))
        emit(("end",))
    except PartsmatchError as exc:
        emit(("error", _error_fields(exc)))
    except UnicodeDecodeError as exc:  # as a serial import: the rows of its batch go unchecked
        emit(("error", _error_fields(InputError(f"not UTF-8 text ({exc.reason})", file=name,
                                                line=_decode_error_line(path)))))
    except OSError as exc:
        emit(("error", _error_fields(InputError(f"cannot read the file: {exc.strerror}",
                                                file=name))))


def _error_fields(exc: PartsmatchError) -> dict:
    value = exc.value
    if not isinstance(value, (str, int, float, type(None))):
        value = repr(value)
    return {"class": type(exc).__name__, "message": exc.message, "file": exc.file,
            "line": exc.line, "column": exc.column, "key": exc.key, "value": value}


def _error_from(fields: dict) -> PartsmatchError:
    cls = getattr(errors, str(fields.get("class")), None)
    if not (isinstance(cls, type) and issubclass(cls, PartsmatchError)):
        cls = InputError
    return cls(fields["message"], file=fields["file"], line=fields["line"],
               column=fields["column"], key=fields["key"], value=fields["value"])


class ChildUnavailable(RuntimeError):
    """The parsing child stopped before its first frame (it could not start partsmatch)."""


#: Pipe buffer asked for on Linux (a batch of 5000 rows pickles to about 1.2 MB; the default
#: 64 KiB would make the child wait on every 64 KiB the importing process has not read yet).
PIPE_BYTES = 1 << 20


class ParsedRows:
    """The rows of a CSV file, parsed and checked in a child process while this one writes.

    Iterating yields the ``(batch, first)`` pairs of :func:`batches` as a serial import makes
    them, and raises the child's first error (a :class:`PartsmatchError` with file and line)
    where a serial import would. ``fraction`` is the part of the file read so far. The child
    is killed on :meth:`close` if it is still running. A child that dies before its first
    frame raises :class:`ChildUnavailable` (nothing has been read: the caller can read the file
    itself); one that dies later is an internal error (RuntimeError); both name its exit code
    and the last line it wrote to stderr.
    """

    def __init__(self, path: str | Path, name: str, ignore_extra: bool, sqlite: bool,
                 size_of_batch: int) -> None:
        self.fraction: float | None = 0.0
        self._stderr = tempfile.TemporaryFile()
        args = json.dumps([str(path), name, ignore_extra, sqlite, size_of_batch])
        try:  # -P: the current directory stays off sys.path (the installed partsmatch runs)
            self._proc = subprocess.Popen(
                [sys.executable, "-P", "-m", "partsmatch.catalog.csvrows", args],
                stdin=subprocess.DEVNULL, stdout=subprocess.PIPE, stderr=self._stderr)
        except OSError:
            self._stderr.close()
            raise
        try:  # Linux: a pipe that holds a whole batch, so that the child rarely waits on it
            import fcntl

            fcntl.fcntl(self._proc.stdout.fileno(), getattr(fcntl, "F_SETPIPE_SZ", 1031),
                        PIPE_BYTES)
        except (ImportError, OSError):
            pass

    def __iter__(self) -> Iterator[tuple[list, dict]]:
        out = self._proc.stdout
        started = False
        while True:
            try:
                frame = pickle.load(out)
            except (EOFError, pickle.UnpicklingError):
                if not started:  # nothing read yet: the caller may read the file itself
                    raise ChildUnavailable(self._died()) from None
                raise RuntimeError(self._died()) from None
            started = True
            if frame[0] == "batch":
                self.fraction = frame[3]
                yield frame[1], frame[2]
            elif frame[0] == "error":
                raise _error_from(frame[1])
            else:
                return

    def _died(self) -> str:
        code = self._proc.wait()
        self._stderr.seek(0)
        tail = self._stderr.read().decode("utf-8", "replace").strip().splitlines()[-1:]
        return (f"the CSV parsing process stopped (exit code {code})"
                + (f": {tail[0]}" if tail else ""))

    def close(self) -> None:
        if self._proc.poll() is None:
            self._proc.kill()
        self._proc.wait()
        if self._proc.stdout is not None:
            self._proc.stdout.close()
        self._stderr.close()


def _child_main(argv: list[str]) -> int:
    path, name, ignore_extra, sqlite, batch = json.loads(argv[0])
    parse_in_child(path, name, bool(ignore_extra), bool(sqlite), int(batch), sys.stdout.buffer)
    return 0


if __name__ == "__main__":
    raise SystemExit(_child_main(sys.argv[1:]))
