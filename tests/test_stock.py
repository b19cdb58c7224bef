"""Stock, movements and cross-references on real SQLite files and PostgreSQL databases.

The check values are the arithmetic of the stock itself (pieces added minus pieces taken) and the
contract of issue 2, item 3: a quantity never goes negative; a take of more than is there is an
error and changes nothing; every change is kept as a movement row; concurrent takes from several
processes on one database never drive a quantity negative or lose a movement.
The makers and part numbers below are invented.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import threading
import time
from pathlib import Path

import pytest
from sqlalchemy import insert, select, update
from sqlalchemy.orm import Session

import partsmatch
from partsmatch.catalog import db
from partsmatch.catalog.models import Part, Stock, StockMovement
from partsmatch.catalog.names import normalize_part_number
from partsmatch.catalog.stock import (
    add_crossref, add_stock, list_crossrefs, list_stock, move_stock, movements, take_stock,
)
from partsmatch.errors import InputError, PartNotFound, StockError

CAP = "Zembrook:ZB-C095-21K"
DIODE = "Halvoric:HX-D12-350"
FUSE = "Orvane:OV-T075-5K"
TWIN = "Quellmark:ZB-C095-21K"  # same part number as CAP under another maker


def _add_parts(engine) -> None:
    rows = []
    for name, kind in ((CAP, "capacitor"), (DIODE, "diode"), (FUSE, "fuse"),
                       (TWIN, "capacitor")):
        maker, pn = name.split(":")
        rows.append(dict(kind=kind, maker=maker, part_number=pn,
                         pn_norm=normalize_part_number(pn)))
    with engine.begin() as conn:
        conn.execute(insert(Part), rows)


@pytest.fixture
def shop(engine):
    """A database at head with four invented parts and no stock."""
    _add_parts(engine)
    return engine


def _rows(engine) -> tuple[list, list]:
    """Every stock and movement row, in id order (to compare before and after)."""
    with engine.connect() as conn:
        stock = [tuple(r) for r in conn.execute(select(Stock).order_by(Stock.id))]
        moves = [tuple(r) for r in conn.execute(select(StockMovement).order_by(StockMovement.id))]
    return stock, moves


def _quantities(engine) -> dict[tuple[str, str], int]:
    return {(s.part, s.location): s.quantity for s in list_stock(engine)}


# ------------------------------------------------------------------ add / take / move / list
def test_add_take_move_list(shop):
    m = add_stock(shop, CAP, "A1-07", 5, unit_cost=14.5, note="delivery 7")
    assert (m.part, m.location, m.delta, m.quantity_after, m.note) == (CAP, "A1-07", 5, 5,
                                                                       "delivery 7")
    assert m.at.tzinfo is not None
    # a second addition to the same line adds up: 5 + 3 = 8; no cost given keeps 14.5
    assert add_stock(shop, CAP, "A1-07", 3).quantity_after == 8
    assert take_stock(shop, CAP, "A1-07", 2, note="job 1141").quantity_after == 6  # 8 - 2
    mv = move_stock(shop, CAP, "A1-07", "B2-01", 4, note="shelf swap")
    assert (mv.taken.location, mv.taken.delta, mv.taken.quantity_after) == ("A1-07", -4, 2)
    assert (mv.added.location, mv.added.delta, mv.added.quantity_after) == ("B2-01", 4, 4)
    assert mv.taken.note == mv.added.note == "move A1-07 -> B2-01: shelf swap"
    add_stock(shop, DIODE, "D-03", 10, unit_cost=2.0)
    add_stock(shop, TWIN, "A1-07", 1)

    lines = list_stock(shop)
    assert [(s.part, s.location, s.quantity, s.unit_cost) for s in lines] == [
        (DIODE, "D-03", 10, 2.0),
        (TWIN, "A1-07", 1, None),
        (CAP, "A1-07", 2, 14.5),
        (CAP, "B2-01", 4, 14.5),   # a new line made by a move takes the source's cost
    ]
    assert [s.location for s in list_stock(shop, CAP)] == ["A1-07", "B2-01"]
    assert [s.part for s in list_stock(shop, location="A1-07")] == [TWIN, CAP]
    assert [s.part for s in list_stock(shop, kind="diode")] == [DIODE]
    assert list_stock(shop, kind="fuse") == []
    with Session(shop) as session:  # read functions also take a Session
        assert [s.quantity for s in list_stock(session, "Halvoric:HX-D12-350")] == [10]

    # a take to zero keeps the line (shown with quantity 0)
    take_stock(shop, DIODE, "D-03", 10)
    assert _quantities(shop)[(DIODE, "D-03")] == 0

    # a cost given replaces the line's cost, none given keeps it
    add_stock(shop, FUSE, "A", 2, unit_cost=10.0)
    add_stock(shop, FUSE, "B", 2, unit_cost=12.0)
    add_stock(shop, FUSE, "A", 1)
    add_stock(shop, FUSE, "B", 1, unit_cost=11.0)
    move_stock(shop, FUSE, "A", "B", 1)              # an existing target keeps its own cost
    assert {s.location: s.unit_cost for s in list_stock(shop, FUSE)} == {"A": 10.0, "B": 11.0}
    assert add_stock(shop, FUSE, "A", 3.0).quantity_after == 5   # 2 + 1 - 1 + 3

    # parts are named as find_part reads them
    add_stock(shop, "HX-D12-350", "D-01", 1)          # bare part number, unique
    add_stock(shop, "halvoric:HX-D12-350", "D-01", 1)  # maker compared without case
    assert _quantities(shop)[(DIODE, "D-01")] == 2
    before = _rows(shop)
    with pytest.raises(PartNotFound, match="MAKER:PART"):  # two makers use this number
        add_stock(shop, "ZB-C095-21K", "A1", 1)
    with pytest.raises(PartNotFound):
        take_stock(shop, "Nobody:NO-SUCH-1", "A1", 1)
    assert _rows(shop) == before


# ------------------------------------------------------------------ errors change nothing
BAD_VALUES = [
    lambda e: add_stock(e, CAP, "A1-07", 0),
    lambda e: add_stock(e, CAP, "A1-07", -3),
    lambda e: add_stock(e, CAP, "A1-07", 1.5),
    lambda e: add_stock(e, CAP, "A1-07", True),
    lambda e: add_stock(e, CAP, "A1-07", "2"),
    lambda e: add_stock(e, CAP, "A1-07", 2**31),
    lambda e: add_stock(e, CAP, "A1-07", 1, unit_cost=-1.0),
    lambda e: add_stock(e, CAP, "A1-07", 1, unit_cost=float("nan")),
    lambda e: add_stock(e, CAP, "", 1),
    lambda e: add_stock(e, CAP, "L" * 41, 1),
    lambda e: add_stock(e, CAP, "A\n1", 1),
    lambda e: take_stock(e, CAP, "A1-07", 0),
    lambda e: move_stock(e, CAP, "A1-07", "A1-07", 1),
    lambda e: move_stock(e, CAP, "A1-07", " A1-07 ", 1),
    lambda e: list_stock(e, kind="transistor"),
    lambda e: movements(e, limit=0),
    lambda e: take_stock(e, CAP, "A1-07", 1, note="job\x00"),   # PostgreSQL text holds no NUL
    lambda e: take_stock(e, "ZB\x00", "A1-07", 1),
    lambda e: take_stock(e, "  ", "A1-07", 1),
]


SHORTAGES = [
    (lambda e: take_stock(e, CAP, "A1-07", 6), ["A1-07", "5 there", "asked 6", CAP]),
    (lambda e: take_stock(e, CAP, "Z9", 1), ["no stock line", "Z9", "asked 1", "5 at A1-07"]),
    (lambda e: move_stock(e, CAP, "A1-07", "B1", 7), ["A1-07", "5 there", "asked 7"]),
    (lambda e: take_stock(e, DIODE, "A1-07", 1), ["no stock line", DIODE, "A1-07"]),
]


def test_errors_change_nothing(shop):
    """A take of more than is there, and every bad value, raise and leave every row as it was."""
    add_stock(shop, CAP, "A1-07", 5)
    before = _rows(shop)
    for action, words in SHORTAGES:
        with pytest.raises(StockError) as info:
            action(shop)
        message = str(info.value)
        assert "\n" not in message
        for w in words:
            assert w in message, (w, message)
        assert _rows(shop) == before
    for i, call in enumerate(BAD_VALUES):
        with pytest.raises(InputError):
            call(shop)
        assert _rows(shop) == before, i
    # one piece beyond the largest quantity a line holds (PostgreSQL INTEGER, 2**31 - 1)
    add_stock(shop, FUSE, "F1", 2**31 - 1)
    before = _rows(shop)
    with pytest.raises(StockError, match="more than"):
        add_stock(shop, FUSE, "F1", 1)
    assert _rows(shop) == before


# ------------------------------------------------------------------ movements
def test_every_change_leaves_a_movement_row(shop):
    add_stock(shop, CAP, "A1", 10, note="in")
    take_stock(shop, CAP, "A1", 3, note="job 1")
    move_stock(shop, CAP, "A1", "B1", 2)
    add_stock(shop, DIODE, "D1", 4)
    take_stock(shop, DIODE, "D1", 4, note="job 2")
    with pytest.raises(StockError):
        take_stock(shop, DIODE, "D1", 1)      # a failed take leaves no row

    hist = movements(shop, limit=None)
    assert len(hist) == 6                       # 5 changes, a move being two rows
    assert [(m.part, m.location, m.delta, m.quantity_after) for m in hist] == [
        (DIODE, "D1", -4, 0),
        (DIODE, "D1", 4, 4),
        (CAP, "B1", 2, 2),
        (CAP, "A1", -2, 5),
        (CAP, "A1", -3, 7),
        (CAP, "A1", 10, 10),
    ]
    assert all(m.at.tzinfo is not None for m in hist)
    assert [m.note for m in movements(shop, DIODE)] == ["job 2", None]
    assert len(movements(shop, limit=2)) == 2
    assert [m.delta for m in movements(shop, CAP, limit=None, location="A1")] == [-2, -3, 10]
    # the history adds up to the stock on every line
    totals: dict[tuple[str, str], int] = {}
    for m in hist:
        totals[(m.part, m.location)] = totals.get((m.part, m.location), 0) + m.delta
    assert totals == _quantities(shop)


# ------------------------------------------------------------------ cross-references
def test_crossrefs_both_directions_duplicates_and_self_reference(shop):
    x = add_crossref(shop, CAP, TWIN, note="bench test 2026-03, same case and ratings")
    assert (x.part_a, x.part_b, x.relation) == (CAP, TWIN, "equivalent")
    assert x.recorded_at.tzinfo is not None
    y = add_crossref(shop, FUSE, CAP, relation="replaces")
    assert (y.part_a, y.part_b, y.relation) == (FUSE, CAP, "replaces")

    before = list_crossrefs(shop)
    for a, b, rel, why in [
            (CAP, TWIN, "equivalent", "already recorded"),    # same pair again
            (TWIN, CAP, "equivalent", "holds both ways"),     # equivalence holds both ways
            (FUSE, CAP, "replaces", "already recorded"),
            (CAP, CAP, "equivalent", "two different parts"),  # a part with itself
            ("zembrook:ZB-C095-21K", CAP, "replaces", "two different parts")]:  # by another name
        with pytest.raises(InputError, match=why):
            add_crossref(shop, a, b, relation=rel)
    with pytest.raises(InputError, match="relation"):
        add_crossref(shop, CAP, DIODE, relation="similar")
    assert list_crossrefs(shop) == before

    # "replaces" is one way: the reverse is a new fact
    add_crossref(shop, CAP, FUSE, relation="replaces")
    assert [(r.part_a, r.part_b) for r in list_crossrefs(shop, CAP)] == [
        (CAP, TWIN), (FUSE, CAP), (CAP, FUSE)]
    # seen from either side of a pair
    assert [(r.part_a, r.part_b) for r in list_crossrefs(shop, TWIN)] == [(CAP, TWIN)]
    assert [r.other(r.part_b_id) for r in list_crossrefs(shop, TWIN)] == [CAP]
    assert list_crossrefs(shop, DIODE) == []
    assert len(list_crossrefs(shop)) == 3


def test_mirrored_equivalences_added_at_once_are_recorded_once(shop, db_url):
    """DIODE~FUSE and FUSE~DIODE added by two connections at once: exactly one is recorded.

    The first add is held for 0.5 s after it has looked for the mirrored pair, before it
    commits; the second starts once the first has inserted its row. Unless the adds are
    serialised, both look before either commits and both are recorded.
    """
    from sqlalchemy import event

    first, second = db.make_engine(db_url), db.make_engine(db_url)
    inserted, outcome = threading.Event(), {}

    def hold(conn, cursor, statement, *_):
        if statement.lstrip().upper().startswith("INSERT INTO CROSSREFS"):
            inserted.set()
        elif "FROM crossrefs" in statement and "relation" in statement:
            time.sleep(0.5)

    event.listen(first, "after_cursor_execute", hold)

    def add(e, a, b, key) -> None:
        try:
            add_crossref(e, a, b)
            outcome[key] = "recorded"
        except InputError as exc:
            outcome[key] = "already recorded" if "already recorded" in str(exc) else str(exc)

    t1 = threading.Thread(target=add, args=(first, DIODE, FUSE, "first"))
    t1.start()
    assert inserted.wait(30)
    add(second, FUSE, DIODE, "second")
    t1.join(30)
    first.dispose()
    second.dispose()
    assert outcome == {"first": "recorded", "second": "already recorded"}
    assert [(r.part_a, r.part_b) for r in list_crossrefs(shop, DIODE)] == [(DIODE, FUSE)]


# ------------------------------------------------------------------ CLI
CLI_ERRORS = [
    (("stock", "take", CAP, "A1-07", "99"), 2, ["A1-07", "3 there", "asked 99"]),
    (("stock", "take", CAP, "A1-07", "many"), 2, ["QTY", "many"]),
    (("stock", "add", CAP, "A1-07", "0"), 2, ["quantity"]),
    (("stock", "add", CAP, "A1-07", "1", "--cost", "cheap"), 2, ["--cost"]),
    (("stock", "add", "NO-SUCH-9", "A1-07", "1"), 2, ["NO-SUCH-9"]),
    (("stock", "history", "--limit", "-1"), 2, ["limit"]),
    (("stock", "list", "--kind", "valve"), 2, ["kind"]),
    (("stock", "move", CAP, "A1-07", "A1-07", "1"), 2, ["two different locations"]),
    (("xref", "add", CAP, CAP), 2, ["two different parts"]),
    (("xref", "add", CAP, TWIN, "--relation", "alike"), 2, ["relation"]),
]


def test_cli_round_trip_with_json(shop, db_url, cli):
    base = ("--db", db_url)
    code, out, err = cli(*base, "stock", "add", CAP, "A1-07", "6", "--cost", "14.5",
                         "--note", "delivery 7", "--json")
    assert (code, err) == (0, "")
    added = json.loads(out)
    assert (added["part"], added["location"], added["delta"], added["quantity_after"],
            added["note"]) == (CAP, "A1-07", 6, 6, "delivery 7")
    code, out, _ = cli(*base, "stock", "take", CAP, "A1-07", "2", "--json")
    assert code == 0 and json.loads(out)["quantity_after"] == 4     # 6 - 2
    code, out, _ = cli(*base, "stock", "move", CAP, "A1-07", "C5", "1", "--json")
    moved = json.loads(out)
    assert code == 0
    assert (moved["taken"]["quantity_after"], moved["added"]["quantity_after"]) == (3, 1)

    code, out, _ = cli(*base, "stock", "list", "--json")
    assert code == 0
    assert json.loads(out) == [s.to_dict() for s in list_stock(shop)]
    assert [(r["location"], r["quantity"]) for r in json.loads(out)] == [("A1-07", 3), ("C5", 1)]
    code, out, _ = cli(*base, "stock", "list", CAP, "--location", "C5", "--json")
    assert [r["quantity"] for r in json.loads(out)] == [1]
    code, out, _ = cli(*base, "stock", "history", CAP, "--limit", "3", "--json")
    assert code == 0
    assert json.loads(out) == [m.to_dict() for m in movements(shop, CAP, limit=3)]
    assert [m["delta"] for m in json.loads(out)] == [1, -1, -2]

    code, out, _ = cli(*base, "xref", "add", CAP, TWIN, "--note", "verified", "--json")
    assert code == 0 and json.loads(out)["part_b"] == TWIN
    code, out, _ = cli(*base, "xref", "list", TWIN, "--json")
    assert [(r["part_a"], r["part_b"], r["note"]) for r in json.loads(out)] == \
        [(CAP, TWIN, "verified")]

    # tables
    code, out, _ = cli(*base, "stock", "list")
    assert code == 0 and "A1-07" in out and "14.50" in out
    code, out, _ = cli(*base, "stock", "history")
    assert code == 0 and "-2" in out and "delivery 7" in out
    code, out, _ = cli(*base, "xref", "list")
    assert code == 0 and "equivalent" in out and TWIN in out

    # errors: exit 2, one line on stderr, nothing on stdout, nothing changed
    before = _rows(shop)
    for args, code, words in CLI_ERRORS:
        got, out, err = cli(*base, *args)
        assert (got, out) == (code, ""), (args, err)
        assert err.startswith("error: ") and err.count("\n") == 1, err
        for w in words:
            assert w in err, (w, err)
        assert _rows(shop) == before


def test_cli_on_a_database_without_schema_exits_3(sqlite_url, cli):
    code, _, err = cli("--db", sqlite_url, "stock", "list")
    assert code == 3 and "partsmatch init" in err


# ------------------------------------------------------------------ concurrency
def test_take_waits_for_a_concurrent_writer_and_loses_nothing(shop, db_url):
    """Another connection holds an uncommitted take; ours waits, then sees its result."""
    add_stock(shop, CAP, "A1", 10)
    other = db.make_engine(db_url)
    written, result = threading.Event(), {}

    def hold() -> None:
        with other.begin() as conn:
            conn.execute(update(Stock).where(Stock.location == "A1", Stock.quantity >= 2)
                         .values(quantity=Stock.quantity - 2))
            conn.execute(insert(StockMovement).values(
                part_id=conn.scalar(select(Stock.part_id).where(Stock.location == "A1")),
                location="A1", delta=-2, quantity_after=8, note="holder"))
            written.set()
            time.sleep(0.5)
            result["committing"] = time.monotonic()

    t = threading.Thread(target=hold)
    t.start()
    assert written.wait(10)
    m = take_stock(shop, CAP, "A1", 1)
    done = time.monotonic()
    t.join()
    other.dispose()
    assert done > result["committing"]          # it waited for the other transaction
    assert m.quantity_after == 7                # 10 - 2 - 1: the other take is not lost
    assert _quantities(shop)[(CAP, "A1")] == 7
    assert sorted(x.quantity_after for x in movements(shop, CAP, limit=None)) == [7, 8, 10]


WORKER = r"""
import json, sys, time
from sqlalchemy.orm import Session
from partsmatch.catalog.db import make_engine
from partsmatch.catalog.queries import find_part
from partsmatch.catalog.stock import take_stock
from partsmatch.errors import StockError

url, name, location, count = sys.argv[1], sys.argv[2], sys.argv[3], int(sys.argv[4])
engine = make_engine(url)
with Session(engine) as session:   # look the part up once: the race is in the writes
    part = find_part(session, name)
print("ready", flush=True)
sys.stdin.readline()
start = time.monotonic()
after, short, other = [], 0, []
for _ in range(count):
    try:
        after.append(take_stock(engine, part, location, 1, note="race").quantity_after)
    except StockError:
        short += 1
    except BaseException as exc:
        other.append(f"{type(exc).__name__}: {exc}")
engine.dispose()
print(json.dumps({"after": after, "short": short, "other": other,
                  "seconds": time.monotonic() - start}), flush=True)
"""

START, WORKERS, TAKES = 150, 2, 100   # 200 takes of 1 from 150 pieces


def test_concurrent_takes_from_separate_processes(shop, db_url):
    """Several processes take 1 at a time from one stock line until it runs out."""
    add_stock(shop, CAP, "A1", START)
    env = dict(os.environ)
    # the children import the same partsmatch as this test
    env["PYTHONPATH"] = os.pathsep.join(
        [str(Path(partsmatch.__file__).resolve().parent.parent)]
        + ([env["PYTHONPATH"]] if env.get("PYTHONPATH") else []))
    procs = [subprocess.Popen([sys.executable, "-c", WORKER, db_url, CAP, "A1", str(TAKES)],
                              stdin=subprocess.PIPE, stdout=subprocess.PIPE,
                              stderr=subprocess.PIPE, text=True, env=env)
             for _ in range(WORKERS)]
    try:
        for p in procs:
            line = p.stdout.readline()
            assert line.strip() == "ready", p.stderr.read()
        for p in procs:   # start them together
            p.stdin.write("go\n")
            p.stdin.flush()
        results = []
        for p in procs:
            out, err = p.communicate(timeout=60)
            assert p.returncode == 0, err
            results.append(json.loads(out))
    finally:
        for p in procs:
            if p.poll() is None:
                p.kill()
                p.wait()

    assert [r["other"] for r in results] == [[]] * WORKERS   # every failure a clean StockError
    taken = [a for r in results for a in r["after"]]
    shorts = sum(r["short"] for r in results)
    final = _quantities(shop)[(CAP, "A1")]
    assert final >= 0
    assert len(taken) + final == START          # nothing lost, nothing invented
    assert final == 0                           # more takes were tried than there were pieces
    assert len(taken) + shorts == WORKERS * TAKES
    # each successful take saw its own quantity: 149, 148, ... 0, each exactly once
    assert sorted(taken) == list(range(START))
    race = [m for m in movements(shop, CAP, limit=None) if m.note == "race"]
    assert len(race) == len(taken)
    assert sorted(m.quantity_after for m in race) == list(range(START))
    assert all(m.delta == -1 for m in race)
    # the processes really overlapped: each got some of the pieces
    assert all(r["after"] for r in results), [(len(r["after"]), r["short"], r["seconds"])
                                              for r in results]
