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
import io
import math
from dataclasses import dataclass, field
from pathlib import Path
from typing import Callable, Iterable, Iterator, TextIO

from sqlalchemy import Engine, bindparam, insert, select, tuple_
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
BATCH = 2000

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


# ------------------------------------------------------------------ parsing one row
_TRUE = {"true", "yes", "y", "1"}
_FALSE = {"false", "no", "n", "0"}


def _tolerance(text: str, column: str) -> float:
    t = text.strip().replace("±", "").replace("+/-", "").replace("+-", "")
    v = parse_quantity(t, "%", column=column)
    if v < 0 or v > 100 and column != "tolerance_plus":
        raise UnitError(f"tolerance {text!r} is outside 0-100 %", column=column, value=text)
    return v


def parse_row(row: dict[str, str]) -> tuple[dict, tuple[str, int, float | None] | None]:
    """One CSV row (already unescaped, keys = column names) -> (part values, stock or None).

    Raises InputError/UnitError with ``column`` set; the caller adds file and line.
    """
    part: dict = {}
    for col in REQUIRED:
        v = (row.get(col) or "").strip()
        if not v:
            raise InputError("a value is required", column=col)
        part[col] = v
    kind = part["kind"].lower()
    if kind not in KINDS:
        raise InputError(f"kind {part['kind']!r} is not one of {', '.join(KINDS)}", column="kind",
                         value=part["kind"])
    part["kind"] = kind
    if len(part["part_number"]) > 80 or len(part["maker"]) > 80:
        raise InputError("longer than 80 characters",
                         column="part_number" if len(part["part_number"]) > 80 else "maker")
    part["pn_norm"] = normalize_part_number(part["part_number"])[:80]
    for col in ("description", "dielectric", "size"):
        v = (row.get(col) or "").strip()
        part[col] = v or None
    for col, limit in (("dielectric", 40), ("size", 60)):
        if part[col] and len(part[col]) > limit:
            raise InputError(f"longer than {limit} characters", column=col)
    for col, unit in RATING_UNITS.items():
        if col in ("tolerance_minus", "tolerance_plus"):
            continue
        text = (row.get(col) or "").strip()
        if not text:
            part[col] = None
            continue
        value = parse_quantity(text, unit, column=col)
        if value < 0 and col != "temp_max":
            raise UnitError(f"a rating cannot be negative ({text!r})", column=col, value=text)
        if col == "voltage_ac" and ac_dc(text) == "dc":
            raise UnitError(f"{text!r} is a DC rating: put it in voltage_dc", column=col, value=text)
        if col == "voltage_dc" and ac_dc(text) == "ac":
            raise UnitError(f"{text!r} is an AC rating: put it in voltage_ac", column=col, value=text)
        part[col] = value
    tol = (row.get("tolerance") or "").strip()
    tmin = (row.get("tolerance_minus") or "").strip()
    tplus = (row.get("tolerance_plus") or "").strip()
    part["tolerance_minus"] = _tolerance(tmin, "tolerance_minus") if tmin else None
    part["tolerance_plus"] = _tolerance(tplus, "tolerance_plus") if tplus else None
    if tol:
        t = _tolerance(tol, "tolerance")
        for col in ("tolerance_minus", "tolerance_plus"):
            if part[col] is not None and part[col] != t:
                raise InputError(f"tolerance {tol!r} disagrees with {col}", column="tolerance")
            part[col] = t
    pol = (row.get("polarized") or "").strip().lower()
    if pol and pol not in _TRUE | _FALSE:
        raise InputError(f"expected true or false, got {pol!r}", column="polarized", value=pol)
    part["polarized"] = (pol in _TRUE) if pol else None
    ch = (row.get("characteristic") or "").strip().upper()
    if ch and ch not in CHARACTERISTICS:
        raise InputError(f"{ch!r} is not an IEC 60127 characteristic ({' '.join(CHARACTERISTICS)})",
                         column="characteristic", value=ch)
    part["characteristic"] = ch or None
    std = (row.get("fuse_standard") or "").strip()
    if std:
        canon = {s.lower().replace(" ", ""): s for s in FUSE_STANDARDS}.get(
            std.lower().replace(" ", "").replace("-", "").replace("ul24814", "ul248-14"))
        if canon is None:
            raise InputError(f"{std!r} is not one of {', '.join(FUSE_STANDARDS)}",
                             column="fuse_standard", value=std)
        std = canon
    part["fuse_standard"] = std or None
    if std == "IEC 60127" and not ch:
        raise InputError("an IEC 60127 fuse needs its characteristic letter (FF F M T TT)",
                         column="characteristic")
    return part, _parse_stock(row)


def _parse_stock(row: dict[str, str]) -> tuple[str, int, float | None] | None:
    qty_text = (row.get("quantity") or "").strip()
    loc = (row.get("location") or "").strip()
    cost_text = (row.get("unit_cost") or "").strip()
    if not (qty_text or loc or cost_text):
        return None
    if not loc:
        raise InputError("a location is needed where quantity or unit_cost is given",
                         column="location")
    if len(loc) > 40:
        raise InputError("longer than 40 characters", column="location")
    qty = 0
    if qty_text:
        try:
            f = float(qty_text)
        except ValueError:
            raise InputError(f"expected a whole number, got {qty_text!r}", column="quantity",
                             value=qty_text) from None
        if not f.is_integer() or f < 0 or f > 2**31 - 1:
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


# ------------------------------------------------------------------ import
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


def _read_rows(fh: TextIO, name: str, ignore_extra: bool) -> Iterator[tuple[int, dict]]:
    reader = csv.reader(fh)
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
    while True:
        try:
            cells = next(reader)
        except StopIteration:
            return
        except csv.Error as exc:
            raise InputError(f"not a readable CSV row: {exc}", file=name, line=reader.line_num) \
                from None
        line = reader.line_num
        if not any(c.strip() for c in cells):
            continue
        if len(cells) > len(header):
            raise InputError(f"{len(cells)} cells where the header has {len(header)}", file=name,
                             line=line)
        row = {}
        for h, c in zip(header, cells):
            if h in ALL_COLUMNS:
                row[h] = unescape_cell(c) if h in FREE_TEXT else c
        yield line, row


def _same_ratings(a: dict, b: dict) -> str | None:
    for col in PART_COLUMNS:
        if col in ("maker", "part_number", "pn_norm"):
            continue
        if a.get(col) != b.get(col):
            return col
    return None


def import_csv(engine: Engine, path: str | Path | None = None, *, stream: TextIO | None = None,
               name: str | None = None, update: bool = False, dry_run: bool = False,
               ignore_extra: bool = False, note: str | None = None,
               progress: Callable[[int], None] | None = None) -> ImportReport:
    """Import a catalog CSV as one transaction; see the module docstring.

    Args:
        path / stream: the CSV file, or an open text stream (then ``name`` names it in errors).
        update: parts already in the catalog (by maker and part number) get the file's ratings,
            and a row's quantity sets the stock at its location; without it such a row is an error.
        dry_run: check everything, then roll back.
        progress: called with the number of rows read after each batch.
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
    movement_note = note or f"import {Path(name).name}"
    try:
        with fh:
            conn = engine.connect()
            trans = conn.begin()
            try:
                max_part = conn.scalar(select(Part.id).order_by(Part.id.desc()).limit(1)) or 0
                max_stock = conn.scalar(select(Stock.id).order_by(Stock.id.desc()).limit(1)) or 0
                batch: list[tuple[int, dict, tuple | None]] = []
                try:
                    for line, row in _read_rows(fh, name, ignore_extra):
                        try:
                            part, stock = parse_row(row)
                        except InputError as exc:
                            raise exc.located(file=name, line=line) from None
                        batch.append((line, part, stock))
                        if len(batch) >= BATCH:
                            _flush(conn, batch, name, update, max_part, max_stock, report,
                                   movement_note)
                            batch = []
                            if progress:
                                progress(report.rows)
                    if batch:
                        _flush(conn, batch, name, update, max_part, max_stock, report,
                               movement_note)
                        if progress:
                            progress(report.rows)
                except UnicodeDecodeError as exc:
                    raise InputError(f"not UTF-8 text ({exc.reason})", file=name) from None
                if dry_run:
                    trans.rollback()
                else:
                    trans.commit()
            except BaseException:
                if trans.is_active:
                    trans.rollback()
                raise
            finally:
                conn.close()
    except SQLAlchemyError as exc:
        from partsmatch.errors import DatabaseError

        msg = " ".join(str(getattr(exc, "orig", exc)).split())[:200]
        raise DatabaseError(f"import rolled back: {msg}", file=name) from None
    return report


def _flush(conn, batch, name, update, max_part, max_stock, report, movement_note) -> None:
    t = Part.__table__
    report.rows += len(batch)
    # first row of each part in this batch; later rows must repeat its ratings
    first: dict[tuple[str, str], tuple[int, dict]] = {}
    for line, part, _ in batch:
        key = (part["maker"], part["part_number"])
        if key in first:
            col = _same_ratings(first[key][1], part)
            if col:
                raise InputError(f"differs from line {first[key][0]} of the same part",
                                 file=name, line=line, column=col)
        else:
            first[key] = (line, part)
    keys = list(first)
    existing: dict[tuple[str, str], dict] = {}
    cols = [t.c.id] + [t.c[c] for c in PART_COLUMNS]
    for i in range(0, len(keys), 400):
        chunk = keys[i:i + 400]
        stmt = select(*cols).where(tuple_(t.c.maker, t.c.part_number).in_(chunk))
        for r in conn.execute(stmt).mappings():
            existing[(r["maker"], r["part_number"])] = dict(r)
    ids: dict[tuple[str, str], int] = {}
    preexisting: set[int] = set()
    updates = []
    new_rows = []
    for key, (line, part) in first.items():
        old = existing.get(key)
        if old is None:
            new_rows.append(part)
            continue
        ids[key] = old["id"]
        if old["id"] <= max_part:
            preexisting.add(old["id"])
            if not update:
                raise InputError(f"part {key[0]}:{key[1]} is already in the catalog "
                                 "(use --update to change it)", file=name, line=line)
            if _same_ratings(old, part):
                updates.append({"b_id": old["id"], "b_updated_at": utcnow(),
                                **{f"b_{c}": part[c] for c in PART_COLUMNS}})
        else:
            col = _same_ratings(old, part)
            if col:
                raise InputError("differs from an earlier row of the same part", file=name,
                                 line=line, column=col)
    if new_rows:
        now = utcnow()
        for r in new_rows:
            r["created_at"] = now
        result = conn.execute(
            insert(t).returning(t.c.id, t.c.maker, t.c.part_number, sort_by_parameter_order=True),
            new_rows)
        for pid, maker, pn in result:
            ids[(maker, pn)] = pid
        report.parts_added += len(new_rows)
    if updates:
        values = {c: bindparam(f"b_{c}") for c in PART_COLUMNS}
        conn.execute(sql_update(t).where(t.c.id == bindparam("b_id")).values(
            **values, updated_at=bindparam("b_updated_at")), updates)
        report.parts_updated += len(updates)
    _flush_stock(conn, batch, ids, preexisting, update, max_stock, report, movement_note)


def _flush_stock(conn, batch, ids, preexisting, update, max_stock, report, movement_note) -> None:
    s = Stock.__table__
    wanted: dict[tuple[int, str], list] = {}
    for _, part, stock in batch:
        if stock is None:
            continue
        loc, qty, cost = stock
        pid = ids[(part["maker"], part["part_number"])]
        cur = wanted.setdefault((pid, loc), [0, None])
        cur[0] += qty
        if cost is not None:
            cur[1] = cost
    if not wanted:
        return
    keys = list(wanted)
    have: dict[tuple[int, str], tuple[int, int]] = {}
    for i in range(0, len(keys), 400):
        chunk = keys[i:i + 400]
        stmt = select(s.c.id, s.c.part_id, s.c.location, s.c.quantity).where(
            tuple_(s.c.part_id, s.c.location).in_(chunk))
        for sid, pid, loc, qty in conn.execute(stmt):
            have[(pid, loc)] = (sid, qty)
    now = utcnow()
    inserts, updates, moves = [], [], []
    for (pid, loc), (qty, cost) in wanted.items():
        old = have.get((pid, loc))
        if old is None:
            inserts.append({"part_id": pid, "location": loc, "quantity": qty, "unit_cost": cost,
                            "updated_at": now})
            moves.append({"part_id": pid, "location": loc, "delta": qty, "quantity_after": qty,
                          "note": movement_note, "at": now})
            continue
        sid, old_qty = old
        new_qty = qty if (update and pid in preexisting and sid <= max_stock) else old_qty + qty
        updates.append({"b_id": sid, "b_quantity": new_qty, "b_updated_at": now, "b_cost": cost})
        if new_qty != old_qty:
            moves.append({"part_id": pid, "location": loc, "delta": new_qty - old_qty,
                          "quantity_after": new_qty, "note": movement_note, "at": now})
    if inserts:
        conn.execute(insert(s), inserts)
    if updates:
        keep_cost = [u for u in updates if u["b_cost"] is None]
        set_cost = [u for u in updates if u["b_cost"] is not None]
        if keep_cost:
            conn.execute(sql_update(s).where(s.c.id == bindparam("b_id")).values(
                quantity=bindparam("b_quantity"), updated_at=bindparam("b_updated_at")),
                [{k: v for k, v in u.items() if k != "b_cost"} for u in keep_cost])
        if set_cost:
            conn.execute(sql_update(s).where(s.c.id == bindparam("b_id")).values(
                quantity=bindparam("b_quantity"), unit_cost=bindparam("b_cost"),
                updated_at=bindparam("b_updated_at")), set_cost)
    if moves:
        conn.execute(insert(StockMovement.__table__), moves)
    report.stock_rows += len(inserts)


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
