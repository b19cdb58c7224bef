"""Catalog import under stress, on SQLite and PostgreSQL.

Properties (Hypothesis, fixed seeds):
* import of arbitrary bytes, text and rows raises nothing but a PartsmatchError whose one-line
  message names the file and the line;
* a failed import (or any dry run) leaves every table with exactly the same rows: full dumps of
  every table, each value with its type and repr, compared before and after;
* export -> import of generated valid parts reproduces every value exactly: the oracle is the
  generated Python values themselves (floats drawn over the whole double range, free text that
  starts with = + - @ or apostrophes, which export must neutralise and import restore).
Plus the behaviour of the bulk path (secondary indexes dropped and rebuilt on SQLite), error
order inside a batch, progress reports, and stock rows that span batches.
"""

from __future__ import annotations

import csv
import io
import re

import pytest
from hypothesis import HealthCheck, assume, given, settings
from hypothesis import strategies as st
from sqlalchemy import text

import partsmatch.catalog.io as cio
from partsmatch.catalog.io import ALL_COLUMNS, PART_COLUMNS, export_text, import_csv
from partsmatch.catalog.models import Base, RATING_UNITS
from partsmatch.errors import InputError, PartsmatchError

FUZZ = settings(max_examples=60, derandomize=True, deadline=None,
                suppress_health_check=[HealthCheck.function_scoped_fixture,
                                       HealthCheck.too_slow])


# ---------------------------------------------------------------- helpers
def dump(engine) -> dict[str, list[tuple]]:
    """Every row of every table, each value as (type name, repr): 1 and 1.0 differ here."""
    out = {}
    with engine.connect() as conn:
        for table in Base.metadata.sorted_tables:
            order = ", ".join(c.name for c in table.primary_key.columns) or "1"
            rows = conn.execute(text(f"SELECT * FROM {table.name} ORDER BY {order}")).all()
            out[table.name] = [tuple((type(v).__name__, repr(v)) for v in r) for r in rows]
    return out


def schema(engine) -> list[tuple]:
    """SQLite's own record of the schema (tables, indexes, their SQL)."""
    with engine.connect() as conn:
        return [tuple(r) for r in conn.execute(text(
            "SELECT type, name, tbl_name, sql FROM sqlite_master ORDER BY type, name"))]


def write_csv(path, header, rows) -> None:
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(header)
        w.writerows(rows)


def assert_located(exc: BaseException, name: str) -> None:
    """The error contract: a PartsmatchError, one line, ``FILE:LINE: ...``."""
    assert isinstance(exc, PartsmatchError), repr(exc)
    msg = str(exc)
    assert "\n" not in msg and "\r" not in msg, msg
    assert re.match(rf"^{re.escape(name)}:\d+: \S", msg), msg


def wipe(engine) -> None:
    with engine.begin() as conn:
        for table in reversed(Base.metadata.sorted_tables):
            conn.execute(table.delete())


SEED = ("part_number,maker,kind,capacitance,voltage_ac,tolerance,quantity,location,unit_cost\n"
        "SEED-1,Seedworks,capacitor,0.95 uF,2100 VAC,3 %,4,A1-01,12.5\n"
        "SEED-2,Seedworks,diode,,,,7,B1-02,\n")


def seed(engine) -> None:
    import_csv(engine, stream=io.StringIO(SEED), name="seed.csv")


# ---------------------------------------------------------------- arbitrary input
# Cells: mostly values that pass (so that rows reach the database, batches get written and a
# later fault must undo them), some that must fail or are odd (NUL, lengths, signs, letters),
# and arbitrary text from anywhere in Unicode.
_VALID = {
    "kind": ["capacitor", "diode", "fuse", "resistor", "Diode "],
    "maker": ["Seedworks", "Quillmoor", "=cmd", "'@x"],
    "description": ["HV diode", "=1+1", "", "é" * 300],
    "capacitance": ["0.95 uF", "950nF", "1e-6", ""],
    "voltage_ac": ["2100 VAC", "2.1 kV", "2100", ""],
    "voltage_dc": ["630 VDC", "3 kV", ""],
    "tolerance": ["3 %", "±5%", "3", ""],
    "tolerance_plus": ["5 %", "999", ""],
    "vrrm": ["12 kV", "12kV", "12000", ""],
    "temp_max": ["-40 degC", "85 °C", ""],
    "characteristic": ["T", "FF", ""],
    "fuse_standard": ["UL 248-14", "HV", ""],
    "polarized": ["true", "no", ""],
    "dielectric": ["PP film", ""],
    "size": ["5x20 mm", ""],
    "quantity": ["4", "0", "2147483647", ""],
    "location": ["A1-01", "'=B2", "-x"],
    "unit_cost": ["12.5", "0", ""],
}
_ODD = {
    "kind": ["gadget", ""],
    "maker": ["m" * 81, "M\x00", ""],
    "part_number": ["p" * 81, "N\x00L", ""],
    "description": ["nul\x00here"],
    "capacitance": ["-1 uF", "0.95 uV", "2 x", "nan"],
    "voltage_ac": ["630 VDC"],
    "voltage_dc": ["2100 VAC"],
    "tolerance": ["150 %"],
    "tolerance_plus": ["2000 %"],
    "vrrm": ["-3 kV", "inf"],
    "characteristic": ["X"],
    "fuse_standard": ["IEC 60127", "DIN"],
    "polarized": ["maybe"],
    "dielectric": ["y" * 41, "P\x00P"],
    "size": ["s" * 61],
    "quantity": ["-1", "1.5", "99999999999", "nan"],
    "location": ["x" * 41, "A\x00", ""],
    "unit_cost": ["-1", "inf", "abc"],
}
_any_text = st.text(max_size=12)
_serial = st.integers(0, 30).map(lambda n: f"QM-{n}")


def _cell_of(col: str):
    valid = _serial if col == "part_number" else st.sampled_from(_VALID.get(col, [""]))
    return st.one_of(valid, valid, valid, valid, valid, valid,
                     st.sampled_from(_ODD.get(col, [""])), _any_text)


@st.composite
def _table(draw):
    header = draw(st.lists(st.sampled_from(ALL_COLUMNS + ("colour",)), max_size=8, unique=True))
    if draw(st.integers(0, 9)):  # mostly a header with the required columns
        for col in ("kind", "maker", "part_number"):
            if col not in header:
                header.insert(0, col)
    rows = [[draw(_cell_of(col)) for col in header] for _ in range(draw(st.integers(0, 8)))]
    return header, rows


@FUZZ
@given(table=_table(), update=st.booleans(), dry_run=st.booleans(),
       ignore_extra=st.booleans())
def test_arbitrary_rows_fail_cleanly_and_change_nothing(engine, tmp_path, monkeypatch, table,
                                                        update, dry_run, ignore_extra):
    monkeypatch.setattr(cio, "BATCH", 2)  # failures after earlier batches were written
    if not dump(engine)["parts"]:
        seed(engine)
    header, rows = table
    path = tmp_path / "fuzz.csv"
    try:
        write_csv(path, header, rows)
    except UnicodeEncodeError:  # a lone surrogate cannot even be written as UTF-8
        assume(False)
    before = dump(engine)
    try:
        import_csv(engine, path, update=update, dry_run=dry_run, ignore_extra=ignore_extra)
    except BaseException as exc:  # noqa: BLE001 - the property is about every exception
        assert_located(exc, str(path))
        assert dump(engine) == before
    else:
        if dry_run:
            assert dump(engine) == before


@FUZZ
@given(data=st.one_of(st.binary(max_size=200), st.text(max_size=200).map(
    lambda s: s.encode("utf-8", "surrogatepass"))))
def test_arbitrary_bytes_fail_cleanly(engine, tmp_path, data):
    path = tmp_path / "junk.csv"
    path.write_bytes(data)
    before = dump(engine)
    try:
        import_csv(engine, path, dry_run=False, ignore_extra=True)
    except BaseException as exc:  # noqa: BLE001
        assert_located(exc, str(path))
        assert dump(engine) == before


@pytest.mark.parametrize("cell,column", [
    ("bad\x00text", "description"),
    ("A1\x00", "location"),
    ("PP\x00", "dielectric"),
])
def test_text_a_database_cannot_store_is_a_located_error(engine, cell, column):
    seed(engine)
    before = dump(engine)
    cols = ["part_number", "maker", "kind", "description", "dielectric", "quantity", "location"]
    row = ["NUL-1", "Quillmoor", "capacitor", "", "", "1", "A1"]
    row[cols.index(column)] = cell
    data = ",".join(cols) + "\nOK-1,Quillmoor,diode,,,1,A2\n" + ",".join(row) + "\n"
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=io.StringIO(data), name="nul.csv")
    assert str(exc.value).startswith(f"nul.csv:3: column '{column}': contains a NUL"), exc.value
    assert dump(engine) == before


def test_tolerance_beyond_the_schema_is_a_located_error(engine):
    # The schema allows a plus tolerance up to 1000 % (models.py); beyond it the row, not the
    # database, must be named.
    data = "part_number,maker,kind,tolerance_plus\nT-1,Quillmoor,capacitor,1500 %\n"
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=io.StringIO(data), name="t.csv")
    assert str(exc.value).startswith("t.csv:2: column 'tolerance_plus':")


def test_stock_sum_beyond_the_column_is_a_located_error(engine):
    big = 2**31 - 1  # the stock quantity column is a 32-bit integer (models.py, PostgreSQL)
    data = ("part_number,maker,kind,quantity,location\n"
            f"Q-1,Quillmoor,diode,{big},A1\nQ-1,Quillmoor,diode,1,A1\n")
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=io.StringIO(data), name="q.csv")
    assert str(exc.value).startswith("q.csv:3: column 'quantity':")
    assert dump(engine)["parts"] == []


def test_the_first_bad_row_of_a_batch_is_the_one_named(engine):
    seed(engine)
    # line 2 is already in the catalog (found only when the batch meets the database), line 3
    # is unreadable (found while reading): the earlier line is the first fault.
    data = ("part_number,maker,kind,capacitance\n"
            "SEED-1,Seedworks,capacitor,0.95 uF\n"
            "NEW-1,Seedworks,capacitor,12 parsecs\n")
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=io.StringIO(data), name="o.csv")
    assert str(exc.value).startswith("o.csv:2: part Seedworks:SEED-1 is already"), exc.value


def test_undecodable_bytes_name_their_line(engine, tmp_path):
    path = tmp_path / "latin1.csv"
    path.write_bytes(b"part_number,maker,kind,description\nA-1,M,diode,ok\n"
                     b"A-2,M,diode,caf\xe9\n")
    with pytest.raises(InputError) as exc:
        import_csv(engine, path)
    assert str(exc.value).startswith(f"{path}:3: not UTF-8 text"), exc.value


# ---------------------------------------------------------------- round trip
_finite = dict(allow_nan=False, allow_infinity=False)
_free = st.text(alphabet=st.characters(blacklist_categories=("Cs", "Cc")), min_size=1,
                max_size=30)


@st.composite
def _free_text(draw, limit: int):
    """Free text as people type it, often starting like a spreadsheet formula."""
    lead = draw(st.sampled_from(["", "", "=", "+", "-", "@", "'", "''", "'=", "'+", "-'"]))
    s = (lead + draw(_free)).strip()
    assume(s and len(s) <= limit)
    return s


@st.composite
def _part(draw):
    kind = draw(st.sampled_from(("capacitor", "diode", "fuse", "resistor")))
    p: dict = {c: None for c in PART_COLUMNS if c != "pn_norm"}
    p.update(kind=kind, maker=draw(_free_text(80)), part_number=draw(_free_text(80)))
    for col in RATING_UNITS:
        if col in ("tolerance_minus", "tolerance_plus") or not draw(st.booleans()):
            continue
        lo = None if col == "temp_max" else 0.0
        p[col] = draw(st.floats(min_value=lo, **_finite))
    if draw(st.booleans()):
        tm = draw(st.floats(0.0, 100.0, **_finite))
        tp = tm if draw(st.booleans()) else draw(st.floats(0.0, 1000.0, **_finite))
        p["tolerance_minus"], p["tolerance_plus"] = tm, tp
    p["description"] = draw(st.none() | _free_text(200))
    p["dielectric"] = draw(st.none() | _free_text(40))
    p["size"] = draw(st.none() | _free_text(60))
    p["polarized"] = draw(st.sampled_from((None, True, False)))
    p["fuse_standard"] = draw(st.sampled_from((None, "IEC 60127", "UL 248-14", "HV")))
    p["characteristic"] = draw(st.sampled_from(
        ("FF", "F", "M", "T", "TT") if p["fuse_standard"] == "IEC 60127"
        else (None, "FF", "F", "M", "T", "TT")))
    locs = draw(st.lists(_free_text(40), max_size=2, unique=True))
    p["stock"] = sorted((loc, draw(st.integers(0, 2**31 - 1)),
                         draw(st.none() | st.floats(min_value=0.0, **_finite)))
                        for loc in locs)
    return p


def _cell(value) -> str:
    if value is None:
        return ""
    if isinstance(value, bool):
        return "true" if value else "false"
    return repr(value)  # a bare SI number: repr reads back to the same double


def _as_csv(parts: list[dict]) -> str:
    """The generated parts written as the test's own CSV (bare SI numbers, escaped text)."""
    buf = io.StringIO()
    w = csv.writer(buf, lineterminator="\n")
    w.writerow(ALL_COLUMNS)
    for p in parts:
        base = {c: "" for c in ALL_COLUMNS}
        for c in ("part_number", "maker", "description", "dielectric", "size"):
            base[c] = cio.escape_cell(p[c]) if p[c] is not None else ""
        base["kind"] = p["kind"]
        for c in RATING_UNITS:
            base[c] = _cell(p[c])
        base["polarized"] = _cell(p["polarized"])
        base["characteristic"] = p["characteristic"] or ""
        base["fuse_standard"] = p["fuse_standard"] or ""
        for loc, qty, cost in p["stock"] or [(None, None, None)]:
            row = dict(base)
            if loc is not None:
                row.update(location=cio.escape_cell(loc), quantity=str(qty), unit_cost=_cell(cost))
            w.writerow([row[c] for c in ALL_COLUMNS])
    return buf.getvalue()


def _stored(engine) -> dict[tuple[str, str], dict]:
    cols = [c for c in PART_COLUMNS if c != "pn_norm"]
    out = {}
    with engine.connect() as conn:
        rows = conn.execute(text(f"SELECT id, {', '.join(cols)} FROM parts")).all()
        stock = conn.execute(text("SELECT part_id, location, quantity, unit_cost FROM stock "
                                  "ORDER BY part_id, location")).all()
    by_id = {}
    for r in rows:
        d = dict(zip(cols, r[1:]))
        if d["polarized"] is not None:
            d["polarized"] = bool(d["polarized"])
        d["stock"] = []
        by_id[r[0]] = d
        out[(d["maker"], d["part_number"])] = d
    for pid, loc, qty, cost in stock:
        by_id[pid]["stock"].append((loc, qty, cost))
    for d in out.values():
        d["stock"].sort()
    return out


def _same(expected: dict, got: dict) -> None:
    for key, value in expected.items():
        g = got[key]
        if isinstance(value, float):
            # exact: same double, sign of zero aside (a database may store -0.0 as 0)
            assert isinstance(g, float) and (g == value), (key, value, g)
        elif key == "stock":
            assert [(l, q) for l, q, _ in g] == [(l, q) for l, q, _ in value], (g, value)
            for (_, _, c1), (_, _, c2) in zip(g, value):
                assert c1 == c2, (c1, c2)
        else:
            assert g == value, (key, value, g)


@settings(max_examples=30, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(parts=st.lists(_part(), min_size=1, max_size=6,
                      unique_by=lambda p: (p["maker"], p["part_number"])))
def test_export_import_round_trip_is_exact(engine, parts):
    wipe(engine)
    import_csv(engine, stream=io.StringIO(_as_csv(parts)), name="gen.csv")
    first = _stored(engine)
    assert set(first) == {(p["maker"], p["part_number"]) for p in parts}
    for p in parts:
        _same(p, first[(p["maker"], p["part_number"])])
    exported = export_text(engine)
    # export neutralises every free-text cell that a spreadsheet would run as a formula
    for row in csv.DictReader(io.StringIO(exported)):
        for col in cio.FREE_TEXT:
            assert not row[col] or row[col][0] not in "=+-@", (col, row[col])
    wipe(engine)
    import_csv(engine, stream=io.StringIO(exported), name="export.csv")
    second = _stored(engine)
    for p in parts:
        _same(p, second[(p["maker"], p["part_number"])])
    assert export_text(engine) == exported


# ---------------------------------------------------------------- batches and the bulk path
def _rows(n: int, start: int = 0) -> list[str]:
    return [f"BK-{i:05d},Quillmoor,diode,HV diode {i},12 kV,350 mA,{i % 7},A{i % 3}"
            for i in range(start, start + n)]


_BK_HEADER = "part_number,maker,kind,description,vrrm,if_avg,quantity,location"


def test_bulk_sqlite_import_rebuilds_the_same_indexes(tmp_path, monkeypatch):
    from partsmatch.catalog import db

    engine = db.make_engine(f"sqlite:///{tmp_path / 'bulk.db'}")
    db.init(engine)
    seed(engine)
    monkeypatch.setattr(cio, "BULK_ROWS", 10)
    monkeypatch.setattr(cio, "BYTES_PER_ROW", 1)
    monkeypatch.setattr(cio, "BATCH", 7)
    before_schema, before_rows = schema(engine), dump(engine)
    good = tmp_path / "good.csv"
    good.write_text("\n".join([_BK_HEADER] + _rows(40)) + "\n")
    bad = tmp_path / "bad.csv"
    bad.write_text("\n".join([_BK_HEADER] + _rows(30, 100) + ["BK-x,Quillmoor,diode,,-1 kV,,,"])
                   + "\n")
    with pytest.raises(InputError) as exc:
        import_csv(engine, bad)
    assert f"{bad}:32: column 'vrrm'" in str(exc.value)
    assert schema(engine) == before_schema and dump(engine) == before_rows
    rep = import_csv(engine, good)
    assert (rep.rows, rep.parts_added) == (40, 40)
    assert schema(engine) == before_schema  # every index back, with its own SQL
    with engine.connect() as conn:
        assert conn.execute(text("PRAGMA integrity_check")).scalar() == "ok"
        plan = " ".join(str(r) for r in conn.execute(text(
            "EXPLAIN QUERY PLAN SELECT id FROM parts WHERE kind = 'diode' AND vrrm > 1000")))
        assert "ix_parts_kind_vrrm" in plan, plan
        n = conn.execute(text("SELECT count(*) FROM parts WHERE part_number LIKE 'BK-%'")).scalar()
    assert n == 40
    engine.dispose()


def test_stock_rows_across_batches(engine, monkeypatch):
    monkeypatch.setattr(cio, "BATCH", 2)
    rows = ["S-1,Quillmoor,fuse,,,,3,A1", "S-2,Quillmoor,fuse,,,,1,A1",
            "S-3,Quillmoor,fuse,,,,1,A1", "S-1,Quillmoor,fuse,,,,2,B1",
            "S-1,Quillmoor,fuse,,,,5,A1"]
    data = _BK_HEADER + "\n" + "\n".join(rows) + "\n"
    rep = import_csv(engine, stream=io.StringIO(data), name="s.csv")
    assert (rep.parts_added, rep.stock_rows) == (3, 4)
    with engine.connect() as conn:
        got = conn.execute(text(
            "SELECT p.part_number, s.location, s.quantity FROM stock s JOIN parts p "
            "ON p.id = s.part_id ORDER BY 1, 2")).all()
        moves = conn.execute(text("SELECT delta, quantity_after FROM stock_movements m JOIN "
                                  "parts p ON p.id = m.part_id WHERE p.part_number = 'S-1' "
                                  "AND m.location = 'A1' ORDER BY m.id")).all()
    # rows of one part add stock at each location (DESIGN.md, catalog CSV)
    assert [tuple(r) for r in got] == [("S-1", "A1", 8), ("S-1", "B1", 2), ("S-2", "A1", 1),
                                       ("S-3", "A1", 1)]
    assert [tuple(m) for m in moves] == [(3, 3), (5, 8)]
    # an earlier batch's row of the same part must agree on its ratings
    clash = _BK_HEADER + "\nS-9,Quillmoor,fuse,,,,1,A1\nS-8,Quillmoor,fuse,,,,1,A1\n" \
        "S-9,Quillmoor,diode,,,,1,A1\n"
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=io.StringIO(clash), name="c.csv")
    assert str(exc.value) == ("c.csv:4: column 'kind': differs from an earlier row of the "
                              "same part")


def test_update_across_batches_sets_stock_once_per_location(engine, monkeypatch):
    monkeypatch.setattr(cio, "BATCH", 1)
    import_csv(engine, stream=io.StringIO(_BK_HEADER + "\nU-1,Quillmoor,diode,,12 kV,,9,A1\n"),
               name="u0.csv")
    data = _BK_HEADER + "\nU-1,Quillmoor,diode,,15 kV,,4,A1\nU-2,Quillmoor,diode,,,,2,A1\n"
    rep = import_csv(engine, stream=io.StringIO(data), name="u.csv", update=True)
    assert (rep.parts_updated, rep.parts_added) == (1, 1)
    with engine.connect() as conn:
        vrrm, qty = conn.execute(text(
            "SELECT p.vrrm, s.quantity FROM parts p JOIN stock s ON s.part_id = p.id "
            "WHERE p.part_number = 'U-1'")).one()
    assert (vrrm, qty) == (15e3, 4)


def test_progress_reports_rows_and_the_fraction_of_the_file(engine, tmp_path, monkeypatch):
    monkeypatch.setattr(cio, "BATCH", 10)
    path = tmp_path / "p.csv"
    path.write_text("\n".join([_BK_HEADER] + _rows(35)) + "\n")
    seen: list[tuple[int, float | None]] = []
    import_csv(engine, path, progress=lambda rows, frac: seen.append((rows, frac)))
    assert [r for r, _ in seen] == [10, 20, 30, 35]
    fractions = [f for _, f in seen]
    assert fractions[-1] == 1.0 and all(0 < f <= 1 for f in fractions)
    assert fractions == sorted(fractions)
    seen.clear()
    data = io.StringIO("\n".join([_BK_HEADER] + _rows(5, 50)) + "\n")
    import_csv(engine, stream=data, name="s.csv", progress=lambda r, f: seen.append((r, f)))
    assert seen == [(5, None)]  # a stream of unknown size: rows only


def test_cli_import_prints_no_progress_into_a_pipe(cli, tmp_path):
    url = f"sqlite:///{tmp_path / 'c.db'}"
    path = tmp_path / "c.csv"
    path.write_text("\n".join([_BK_HEADER] + _rows(3)) + "\n")
    assert cli("--db", url, "init")[0] == 0
    code, out, err = cli("--db", url, "parts", "import", str(path))
    assert code == 0 and err == "" and "3 rows; added 3 parts" in out


def _ledger_disagreements(engine) -> list[tuple]:
    """Stock rows whose movements do not add up to their quantity (the ledger rule of the
    stock commands: every change is a movement row; common practice, no source)."""
    with engine.connect() as conn:
        return [tuple(r) for r in conn.execute(text(
            "SELECT s.id, s.quantity, coalesce(sum(m.delta), 0), count(m.id) FROM stock s "
            "LEFT JOIN stock_movements m ON m.part_id = s.part_id AND m.location = s.location "
            "GROUP BY s.id, s.quantity HAVING s.quantity <> coalesce(sum(m.delta), 0) "
            "OR count(m.id) = 0"))]


def test_batch_mixing_new_and_known_parts(engine, monkeypatch):
    """A batch whose parts are partly in the catalog already: on SQLite the batch is first
    written optimistically, then sorted out by one look-up; later all-new batches go back to
    the fast path. Counts, stock, ids and the movement ledger must come out as on PostgreSQL."""
    monkeypatch.setattr(cio, "BATCH", 3)
    import_csv(engine, stream=io.StringIO(_BK_HEADER + "\nK-1,Quillmoor,diode,,12 kV,,9,A1\n"),
               name="k.csv")
    rows = ["N-1,Quillmoor,diode,,,,2,A1", "K-1,Quillmoor,diode,,15 kV,,4,A1",
            "N-2,Quillmoor,diode,,,,1,B1",
            "N-3,Quillmoor,diode,,,,1,A1", "N-1,Quillmoor,diode,,,,3,B1",
            "K-1,Quillmoor,diode,,15 kV,,2,C1",
            "N-4,Quillmoor,diode,,,,1,A1", "N-5,Quillmoor,diode,,,,6,A1",
            "N-6,Quillmoor,diode,,,,7,A2"]
    data = _BK_HEADER + "\n" + "\n".join(rows) + "\n"
    with pytest.raises(InputError) as exc:  # without --update the known part is an error
        import_csv(engine, stream=io.StringIO(data), name="m.csv")
    assert str(exc.value).startswith("m.csv:3: part Quillmoor:K-1 is already in the catalog")
    rep = import_csv(engine, stream=io.StringIO(data), name="m.csv", update=True)
    assert (rep.rows, rep.parts_added, rep.parts_updated, rep.stock_rows) == (9, 6, 1, 8)
    with engine.connect() as conn:
        got = conn.execute(text(
            "SELECT p.part_number, s.location, s.quantity, p.vrrm FROM stock s JOIN parts p "
            "ON p.id = s.part_id ORDER BY 1, 2")).all()
        n_parts = conn.execute(text("SELECT count(*) FROM parts")).scalar()
    assert [tuple(r) for r in got] == [
        ("K-1", "A1", 4, 15e3), ("K-1", "C1", 2, 15e3), ("N-1", "A1", 2, None),
        ("N-1", "B1", 3, None), ("N-2", "B1", 1, None), ("N-3", "A1", 1, None),
        ("N-4", "A1", 1, None), ("N-5", "A1", 6, None), ("N-6", "A2", 7, None)]
    assert n_parts == 7
    assert _ledger_disagreements(engine) == []


# ---------------------------------------------------------------- parallel reading
# A large file is read and checked in a child process while the importing one writes
# (csvrows.ParsedRows). The serial import is the oracle: the same file must give the same
# rows, counts and first error either way.
def untimed(engine) -> dict[str, list[tuple]]:
    """:func:`dump` without the time stamps (two imports never run at the same instant)."""
    from sqlalchemy import DateTime

    out = {}
    with engine.connect() as conn:
        for table in Base.metadata.sorted_tables:
            cols = [c for c in table.columns if not isinstance(c.type, DateTime)]
            rows = conn.execute(table.select().with_only_columns(*cols)
                                .order_by(*table.primary_key.columns)).all()
            out[table.name] = [tuple((type(v).__name__, repr(v)) for v in r) for r in rows]
    return out


def _no_serial_reading(*args, **kw):
    raise AssertionError("the file was read in the importing process, not by the child")


def _outcome(engine, path, parallel: bool, **kw):
    if engine.dialect.name == "postgresql":  # ids from 1 again, as on SQLite after a wipe
        names = ", ".join(t.name for t in Base.metadata.sorted_tables)
        with engine.begin() as conn:
            conn.execute(text(f"TRUNCATE {names} RESTART IDENTITY CASCADE"))
    else:
        wipe(engine)
    seed(engine)
    with pytest.MonkeyPatch.context() as mp:
        if parallel:  # the child really reads the file (no quiet fall-back to serial reading)
            mp.setattr(cio, "batches", _no_serial_reading)
        try:
            rep = import_csv(engine, path, parallel=parallel, **kw)
            result = ("ok", rep.rows, rep.parts_added, rep.parts_updated, rep.stock_rows)
        except PartsmatchError as exc:
            result = ("error", str(exc))
    return result, untimed(engine)


@st.composite
def _mostly_valid_table(draw):
    """Rows whose cells pass on their own (the faults left are between rows and against the
    catalog), so that most files import and their last, short batch counts."""
    extra = draw(st.lists(st.sampled_from(sorted(_VALID)), max_size=5, unique=True))
    header = ["part_number", "maker", "kind"] + [c for c in extra
                                                 if c not in ("maker", "kind")]
    cell = {c: _serial if c == "part_number" else st.sampled_from(_VALID[c]) for c in header}
    rows = [[draw(cell[c]) for c in header] for _ in range(draw(st.integers(0, 11)))]
    return header, rows


@settings(max_examples=25, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture, HealthCheck.too_slow])
@given(table=st.one_of(_table(), _mostly_valid_table()), update=st.booleans(),
       dry_run=st.booleans(),
       ignore_extra=st.booleans())
def test_parallel_reading_gives_what_serial_reading_gives(engine, tmp_path, monkeypatch, table,
                                                          update, dry_run, ignore_extra):
    monkeypatch.setattr(cio, "BATCH", 3)  # several batches, faults after earlier ones
    header, rows = table
    path = tmp_path / "t.csv"
    write_csv(path, header, rows)
    kw = dict(update=update, dry_run=dry_run, ignore_extra=ignore_extra)
    serial = _outcome(engine, path, False, **kw)
    parallel = _outcome(engine, path, True, **kw)
    assert parallel == serial


def test_parallel_reading_of_faults_found_at_every_stage(engine, tmp_path, monkeypatch):
    """Each kind of first fault, read by the child: in a cell, in the file's structure, in
    the encoding, against the catalog, between rows of one part."""
    monkeypatch.setattr(cio, "BATCH", 2)
    head = "part_number,maker,kind,capacitance\n"
    cases = {
        "cell": (head + "A-1,M,capacitor,1 uF\nA-2,M,capacitor,1 uF\nA-3,M,capacitor,2 x\n",
                 "{}:4: column 'capacitance'"),
        "structure": (head + "A-1,M,capacitor,1 uF\nA-2,M,capacitor,1 uF,extra,cells\n",
                      "{}:3: 6 cells where the header has 4"),
        # the known part is in the short batch of the rows before a bad cell
        "known part": (head + "A-1,M,capacitor,1 uF\nA-2,M,capacitor,1 uF\n"
                       "SEED-1,Seedworks,capacitor,0.95 uF\nA-4,M,capacitor,2 x\n",
                       "{}:4: part Seedworks:SEED-1 is already in the catalog"),
        "rows disagree": (head + "A-1,M,capacitor,1 uF\nA-1,M,capacitor,2 uF\n",
                          "{}:3: column 'capacitance': differs from line 2 of the same part"),
        "header": ("part_number,maker\nA-1,M\n", "{}:1: column 'kind': the header lacks"),
    }
    for label, (text_, expected) in cases.items():
        path = tmp_path / f"{label.replace(' ', '_')}.csv"
        path.write_text(text_)
        for parallel in (False, True):
            (kind, msg), _ = _outcome(engine, path, parallel)
            assert kind == "error" and msg.startswith(expected.format(path)), (label, msg)
    bad = tmp_path / "latin1.csv"
    bad.write_bytes(b"part_number,maker,kind\nA-1,M,diode\nA-2,M,caf\xe9\n")
    (kind, msg), _ = _outcome(engine, bad, True)
    assert msg.startswith(f"{bad}:3: not UTF-8 text"), msg


def test_parallel_reading_reports_progress_from_the_child(engine, tmp_path, monkeypatch):
    monkeypatch.setattr(cio, "BATCH", 10)
    monkeypatch.setattr(cio, "batches", _no_serial_reading)  # the child really reads it
    path = tmp_path / "p.csv"
    path.write_text("\n".join([_BK_HEADER] + _rows(35)) + "\n")
    seen: list[tuple[int, float | None]] = []
    import_csv(engine, path, parallel=True, progress=lambda rows, frac: seen.append((rows, frac)))
    assert [r for r, _ in seen] == [10, 20, 30, 35]
    fractions = [f for _, f in seen]
    assert fractions == sorted(fractions) and fractions[-1] == 1.0 and fractions[0] > 0


def test_a_child_that_dies_is_an_internal_error_and_changes_nothing(engine, tmp_path,
                                                                    monkeypatch):
    import sys

    import partsmatch.catalog.csvrows as rows_mod

    seed(engine)
    before = dump(engine)
    path = tmp_path / "d.csv"
    path.write_text("\n".join([_BK_HEADER] + _rows(5)) + "\n")
    # a child that sends one (empty) batch, complains and dies
    fake = tmp_path / "fake-python"
    fake.write_text("#!/bin/sh\n" f"exec {sys.executable} -c \"import pickle, sys; "
                    "pickle.dump(('batch', [], {}, 0.1), sys.stdout.buffer); "
                    "sys.stdout.flush(); print('parser broke', file=sys.stderr); "
                    "sys.exit(3)\"\n")
    fake.chmod(0o755)
    monkeypatch.setattr(rows_mod.sys, "executable", str(fake))
    with pytest.raises(RuntimeError,
                       match=r"the CSV parsing process stopped \(exit code 3\): parser broke"):
        import_csv(engine, path, parallel=True)
    assert dump(engine) == before
    # a child that dies before its first frame, or a Python that cannot be started at all:
    # the file is read in this process instead
    for exe in ("/bin/false", str(tmp_path / "no-such-python")):
        monkeypatch.setattr(rows_mod.sys, "executable", exe)
        rep = import_csv(engine, path, parallel=True, dry_run=True)
        assert (rep.rows, rep.parts_added) == (5, 5), exe
    assert dump(engine) == before
