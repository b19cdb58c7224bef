"""Catalog CSV import/export on real databases: one transaction, exact round trip, line errors."""

from __future__ import annotations

import csv
import io

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st
from sqlalchemy import select, text
from sqlalchemy.orm import Session

from partsmatch.catalog.io import (
    ALL_COLUMNS, escape_cell, export_text, import_csv, read_csv_values, unescape_cell,
)
from partsmatch.catalog.models import Part, Stock, StockMovement
from partsmatch.catalog.queries import find_part
from partsmatch.errors import InputError, PartsmatchError

HEADER = ",".join(ALL_COLUMNS[:27])


def _csv(*rows: str) -> io.StringIO:
    return io.StringIO(HEADER + "\n" + "\n".join(rows) + "\n")


# 27 contract columns: part_number,maker,kind,description,capacitance,tolerance,voltage_ac,
# voltage_dc,bleeder,dielectric,polarized,ripple_current,temp_max,vrrm,if_avg,ifsm,trr,vf,
# rated_current,voltage,breaking_capacity,characteristic,i2t,size,quantity,location,unit_cost
CAP = "C-1,Maker One,capacitor,=SUM(A1) film,0.95 uF,3 %,2100 V,,10 Mohm,PP film,false,,85 degC,,,,,,,,,,,,4,A1-01,12.5"
CAP_B = "C-1,Maker One,capacitor,=SUM(A1) film,0.95 uF,3 %,2100 V,,10 Mohm,PP film,false,,85 degC,,,,,,,,,,,,2,B2-02,12.5"
DIODE = "D-1,Maker One,diode,@HV diode,,,,,,,,,,12 kV,350 mA,30 A,100 ns,10 V,,,,,,,0,A2-01,"
FUSE = "+F-1,Maker Two,fuse,-T fuse,,,,,,,,,,,,,,,1 A,250 V,35 A,T,1.2 A2s,5x20 mm,,,"


def _rows(engine):
    with engine.connect() as conn:
        parts = conn.execute(text("SELECT * FROM parts ORDER BY id")).all()
        stock = conn.execute(text("SELECT part_id, location, quantity, unit_cost FROM stock "
                                  "ORDER BY id")).all()
    return [tuple(r) for r in parts], [tuple(r) for r in stock]


def test_import_values_and_stock(engine):
    rep = import_csv(engine, stream=_csv(CAP, CAP_B, DIODE, FUSE), name="x.csv")
    assert (rep.rows, rep.parts_added, rep.stock_rows) == (4, 3, 3)
    with Session(engine) as s:
        c = find_part(s, "C-1")
        assert c.capacitance == 0.95e-6 and c.tolerance_minus == c.tolerance_plus == 3.0
        assert c.voltage_ac == 2100.0 and c.bleeder == 10e6 and c.polarized is False
        assert c.description == "=SUM(A1) film"
        assert {(x.location, x.quantity) for x in c.stock} == {("A1-01", 4), ("B2-02", 2)}
        d = find_part(s, "maker one:d1")  # maker:part, normal form of the number
        assert (d.vrrm, d.if_avg, d.ifsm, d.trr, d.vf) == (12e3, 0.35, 30.0, 100e-9, 10.0)
        assert find_part(s, "+F-1").characteristic == "T"
        moves = s.execute(select(StockMovement.delta)).scalars().all()
        assert sorted(moves) == [0, 2, 4]


def test_export_import_round_trip_reproduces_values(engine, tmp_path):
    import_csv(engine, stream=_csv(CAP, CAP_B, DIODE, FUSE), name="x.csv")
    out = export_text(engine)
    assert "'=SUM(A1) film" in out and "'+F-1" in out and "'-T fuse" in out and "'@HV" in out
    path = tmp_path / "export.csv"
    path.write_text(out)
    from partsmatch.catalog import db

    other = db.make_engine(f"sqlite:///{tmp_path / 'other.db'}")
    db.init(other)
    import_csv(other, path)
    assert export_text(other) == out
    again = tmp_path / "again.csv"
    again.write_text(export_text(other))
    assert list(read_csv_values(again)) == list(read_csv_values(path))
    with Session(other) as s:
        assert find_part(s, "+F-1").description == "-T fuse"
    other.dispose()


@pytest.mark.parametrize("s", ["=1+1", "+x", "-3", "@a", "'=x", "''+y", "'plain", "plain", ""])
def test_escape_is_inverted_exactly(s):
    assert unescape_cell(escape_cell(s)) == s


@settings(max_examples=300, derandomize=True)
@given(st.text(max_size=12))
def test_escape_round_trip_property(s):
    e = escape_cell(s)
    assert unescape_cell(e) == s
    assert not e or e[0] not in "=+-@"


@pytest.mark.parametrize("row,line,column", [
    ("C-2,Maker One,capacitor,,0.95 uV,,,,,,,,,,,,,,,,,,,,,,", 3, "capacitance"),
    ("C-2,Maker One,gadget,,,,,,,,,,,,,,,,,,,,,,,,", 3, "kind"),
    ("C-2,Maker One,capacitor,,-1 uF,,,,,,,,,,,,,,,,,,,,,,", 3, "capacitance"),
    ("C-2,Maker One,capacitor,,1 uF,,630 VDC,,,,,,,,,,,,,,,,,,,,", 3, "voltage_ac"),
    ("C-2,Maker One,capacitor,,1 uF,,,,,,maybe,,,,,,,,,,,,,,,,", 3, "polarized"),
    ("F-2,Maker One,fuse,,,,,,,,,,,,,,,,1 A,250 V,,X,,,,,", 3, "characteristic"),
    ("C-2,Maker One,capacitor,,1 uF,,,,,,,,,,,,,,,,,,,,-1,A1,", 3, "quantity"),
    ("C-2,,capacitor,,1 uF,,,,,,,,,,,,,,,,,,,,,,", 3, "maker"),
])
def test_bad_row_aborts_whole_import(engine, row, line, column):
    import_csv(engine, stream=_csv(FUSE), name="seed.csv")
    before = _rows(engine)
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=_csv(CAP, row, DIODE), name="bad.csv")
    msg = str(exc.value)
    assert msg.startswith(f"bad.csv:{line}: column '{column}':"), msg
    assert "\n" not in msg
    assert _rows(engine) == before


def test_bad_row_in_a_later_batch_rolls_back_earlier_batches(engine, monkeypatch):
    import partsmatch.catalog.io as cio

    monkeypatch.setattr(cio, "BATCH", 2)
    rows = [f"P-{i},Maker,resistor,,,,,,,,,,,,,,,,,,,,,,1,A{i},1" for i in range(7)]
    rows.append("P-x,Maker,resistor,,,,,,,,,,,,,,,,,,,,,,1,,")  # quantity without location
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=_csv(*rows), name="b.csv")
    assert "b.csv:9: column 'location'" in str(exc.value)
    assert _rows(engine) == ([], [])


def test_unknown_column_and_ignore_extra(engine):
    data = "part_number,maker,kind,colour\nX,M,diode,red\n"
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=io.StringIO(data), name="e.csv")
    assert str(exc.value) == ("e.csv:1: column 'colour': unknown column "
                              "(use --ignore-extra to skip it)")
    rep = import_csv(engine, stream=io.StringIO(data), name="e.csv", ignore_extra=True)
    assert rep.parts_added == 1


def test_existing_part_needs_update_and_update_sets_stock(engine):
    import_csv(engine, stream=_csv(CAP, CAP_B), name="a.csv")
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=_csv(CAP), name="a.csv")
    assert "already in the catalog" in str(exc.value) and "--update" in str(exc.value)
    changed = CAP.replace("2100 V", "2200 V").replace(",4,A1-01", ",9,A1-01")
    rep = import_csv(engine, stream=_csv(changed), name="u.csv", update=True)
    assert rep.parts_updated == 1
    with Session(engine) as s:
        c = find_part(s, "C-1")
        assert c.voltage_ac == 2200.0
        assert {(x.location, x.quantity) for x in c.stock} == {("A1-01", 9), ("B2-02", 2)}


def test_dry_run_changes_nothing(engine):
    rep = import_csv(engine, stream=_csv(CAP, DIODE), name="d.csv", dry_run=True)
    assert rep.parts_added == 2 and rep.dry_run
    assert _rows(engine) == ([], [])


def test_rows_of_one_part_must_agree(engine):
    other = CAP_B.replace("0.95 uF", "1 uF")
    with pytest.raises(InputError) as exc:
        import_csv(engine, stream=_csv(CAP, other), name="r.csv")
    assert str(exc.value).startswith("r.csv:3: column 'capacitance': differs from line 2")


_cell = st.text(alphabet=st.characters(blacklist_categories=("Cs",)), max_size=15)


@settings(max_examples=60, derandomize=True, deadline=None,
          suppress_health_check=[HealthCheck.function_scoped_fixture])
@given(st.lists(st.lists(_cell, min_size=3, max_size=8), min_size=1, max_size=4))
def test_import_of_arbitrary_text_fails_cleanly(sqlite_engine_for_fuzz, cells):
    engine = sqlite_engine_for_fuzz
    before = _rows(engine)
    buf = io.StringIO()
    w = csv.writer(buf)
    w.writerow(["part_number", "maker", "kind", "capacitance", "vrrm", "quantity", "location"][:8])
    for r in cells:
        w.writerow(r)
    buf.seek(0)
    try:
        import_csv(engine, stream=buf, name="fuzz.csv", dry_run=True)
    except PartsmatchError as exc:
        assert "\n" not in str(exc) and str(exc).startswith("fuzz.csv")
    assert _rows(engine) == before


@pytest.fixture(scope="module")
def sqlite_engine_for_fuzz(tmp_path_factory):
    from partsmatch.catalog import db

    eng = db.make_engine(f"sqlite:///{tmp_path_factory.mktemp('fuzz') / 'f.db'}")
    db.init(eng)
    yield eng
    eng.dispose()
