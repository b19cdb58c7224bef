"""Catalog at scale: import rate, database size, import memory, lookup and start-up times.

    python bench/catalog.py [--rows N] [--keep DIR]

Generates N invented parts (default 1,000,000; about 1.08 CSV rows per part, see
``bench/gen_catalog.py``) as a CSV in a temporary folder (or DIR, kept), then prints one table:

* import rate on SQLite (CSV data rows per second of ``import_csv``, run in a child process;
  a file this size is read and checked in a process of its own while the import writes), and
  the same import reading in one process (``--no-serial`` skips it), next to a plain
  ``sqlite3`` ``executemany`` of the same rows, parsed beforehand into tuples,
  into the same schema with the same pragmas and page cache (the reference: what the database
  itself costs, with no parsing, checking or look-ups);
* database size after the import (WAL checkpointed);
* peak memory of the import (``ru_maxrss`` of the importing process plus that of its parsing
  child: both peaks added, an upper bound);
* ``find`` median, in process and warm, for part-number and spec-style queries;
* whole-CLI ``partsmatch find QUERY`` and ``partsmatch --help`` wall times (median of a few),
  beside the floors under any command: ``python -c pass`` and ``python -c "import sqlalchemy"``.

Times are wall-clock; the import lines also give CPU time, since a busy machine stretches wall
time. Targets are those of the lookup issue (import >= 50,000 rows/s, memory <= 300 MB, find
<= 100 ms in process and <= 0.5 s as a command, --help <= 0.3 s).
"""

from __future__ import annotations

import argparse
import csv
import json
import os
import random
import shutil
import sqlite3
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

sys.path.insert(0, str(Path(__file__).resolve().parent))

import gen_catalog  # noqa: E402  (the generator next to this script)

TARGET_RATE = 50_000  # rows/s
TARGET_MEM_MB = 300
TARGET_FIND_S = 0.100
TARGET_CLI_FIND_S = 0.5
TARGET_HELP_S = 0.3

_CHILD = r"""
import json, resource, sys, time
from partsmatch.catalog import db
from partsmatch.catalog.io import import_csv
engine = db.make_engine(sys.argv[1])
w, c = time.perf_counter(), time.process_time()
report = import_csv(engine, sys.argv[2], parallel=sys.argv[3] == "parallel")
wall, cpu = time.perf_counter() - w, time.process_time() - c
engine.dispose()
# ru_maxrss in KiB on Linux: this process, and the largest child it waited for (the parsing one)
print(json.dumps({"rows": report.rows, "parts": report.parts_added, "stock": report.stock_rows,
                  "wall": wall, "cpu": cpu,
                  "rss_mb": resource.getrusage(resource.RUSAGE_SELF).ru_maxrss / 1024,
                  "child_rss_mb": resource.getrusage(resource.RUSAGE_CHILDREN).ru_maxrss / 1024}))
"""


def _fresh_db(path: Path) -> str:
    from partsmatch.catalog import db

    for suffix in ("", "-wal", "-shm"):
        Path(f"{path}{suffix}").unlink(missing_ok=True)
    url = f"sqlite:///{path}"
    engine = db.make_engine(url)
    db.init(engine)
    engine.dispose()
    return url


def _checkpointed_size(path: Path) -> int:
    con = sqlite3.connect(path)
    con.execute("PRAGMA wal_checkpoint(TRUNCATE)")
    con.close()
    return path.stat().st_size + (Path(f"{path}-wal").stat().st_size
                                  if Path(f"{path}-wal").exists() else 0)


def run_import(csv_path: Path, db_path: Path, mode: str = "parallel") -> dict:
    """The import in a child process (``mode``: "parallel" reading, or "serial" in one
    process); returns its figures. ``maxrss_mb`` adds the peak RSS of the importing process
    and of its parsing child (both peaks, as if they came at once: an upper bound)."""
    url = _fresh_db(db_path)
    proc = subprocess.run([sys.executable, "-c", _CHILD, url, str(csv_path), mode],
                          capture_output=True, text=True)
    if proc.returncode:
        sys.exit(f"import failed:\n{proc.stderr}")
    out = json.loads(proc.stdout.strip().splitlines()[-1])
    out["maxrss_mb"] = out["rss_mb"] + (out["child_rss_mb"] if mode == "parallel" else 0.0)
    out["size_mb"] = _checkpointed_size(db_path) / 1e6
    return out


def run_reference(csv_path: Path, db_path: Path, chunk: int = 100_000) -> dict:
    """Plain sqlite3 executemany of the same rows, parsed beforehand (parsing not timed)."""
    from partsmatch.catalog.io import PART_COLUMNS, SQLITE_CACHE_KIB, compile_row_parser

    _fresh_db(db_path)
    con = sqlite3.connect(db_path, isolation_level=None)
    # the pragmas every partsmatch connection uses (partsmatch.catalog.db), and the page cache
    # the import gives itself, so that both write through the same cache
    con.execute("PRAGMA foreign_keys = ON")
    con.execute("PRAGMA journal_mode = WAL")
    con.execute("PRAGMA synchronous = NORMAL")
    con.execute(f"PRAGMA cache_size = {-SQLITE_CACHE_KIB}")
    cols = ", ".join(PART_COLUMNS)
    sql_part = (f"INSERT INTO parts (id, {cols}, created_at) VALUES "
                f"({', '.join('?' * (len(PART_COLUMNS) + 2))})")
    sql_stock = ("INSERT INTO stock (part_id, location, quantity, unit_cost, updated_at) "
                 "VALUES (?, ?, ?, ?, ?)")
    sql_move = ("INSERT INTO stock_movements (part_id, location, delta, quantity_after, note, at) "
                "VALUES (?, ?, ?, ?, ?, ?)")
    now = "2026-01-01 00:00:00.000000"
    ids: dict[tuple[str, str], int] = {}
    wall = cpu = 0.0
    rows = 0
    fh = open(csv_path, newline="", encoding="utf-8")
    reader = csv.reader(fh)
    parse = compile_row_parser([h.strip().lower() for h in next(reader)])
    values = (parse(cells) for cells in reader)

    def timed(fn) -> None:
        nonlocal wall, cpu
        w, c = time.perf_counter(), time.process_time()
        fn()
        wall += time.perf_counter() - w
        cpu += time.process_time() - c

    timed(lambda: con.execute("BEGIN"))
    done = False
    while not done:
        parts, stock = [], {}
        for _ in range(chunk):
            try:
                part, st = next(values)
            except StopIteration:
                done = True
                break
            rows += 1
            key = (part[1], part[2])  # maker, part_number (PART_COLUMNS order)
            pid = ids.get(key)
            if pid is None:
                pid = ids[key] = len(ids) + 1
                parts.append((pid, *part, now))
            if st:
                cur = stock.setdefault((pid, st[0]), [0, st[2]])
                cur[0] += st[1]
        stock_rows = [(pid, loc, q, cost, now) for (pid, loc), (q, cost) in stock.items()]
        moves = [(pid, loc, q, q, "import", now) for (pid, loc), (q, _) in stock.items()]
        timed(lambda: (con.executemany(sql_part, parts), con.executemany(sql_stock, stock_rows),
                       con.executemany(sql_move, moves)))
    timed(lambda: con.execute("COMMIT"))
    con.close()
    fh.close()
    return {"rows": rows, "wall": wall, "cpu": cpu}


def _median_time(fn, runs: int) -> float:
    times = []
    for _ in range(runs):
        t = time.perf_counter()
        fn()
        times.append(time.perf_counter() - t)
    return statistics.median(times)


def _sample_part_numbers(db_path: Path, n: int, seed: int = 7) -> list[str]:
    con = sqlite3.connect(db_path)
    top = con.execute("SELECT max(id) FROM parts").fetchone()[0]
    rng = random.Random(seed)
    out = []
    for pid in rng.sample(range(1, top + 1), n):
        row = con.execute("SELECT part_number FROM parts WHERE id = ?", (pid,)).fetchone()
        if row:
            out.append(row[0])
    con.close()
    return out


def _worn(pn: str, rng: random.Random) -> str:
    """A part number as read off a worn print: lower case, a dash lost, 0 read as O."""
    s = pn.lower()
    if "-" in s and rng.random() < 0.5:
        s = s.replace("-", "", 1)
    if "0" in s and rng.random() < 0.5:
        s = s.replace("0", "o", 1)
    return s


SPEC_QUERIES = ("0.95uF 2100VAC", "12 kV 350 mA diode", "T 2A 250V", "105J 2kV",
                "10 Mohm 1 W", "HV fuse 0.75 A 5 kV", "1.1 uF 2500 VAC 5%", "fast diode 15kV 200ns")


def run_find(db_path: Path, runs: int = 5) -> dict:
    from sqlalchemy.orm import Session

    from partsmatch.catalog import db
    from partsmatch.catalog.search import find

    rng = random.Random(3)
    pns = _sample_part_numbers(db_path, 10)
    pn_queries = [p for p in pns[:5]] + [_worn(p, rng) for p in pns[5:]]
    engine = db.make_engine(f"sqlite:///{db_path}")
    out = {}
    with Session(engine) as session:
        for label, queries in (("part number", pn_queries), ("spec", SPEC_QUERIES)):
            times = []
            for q in queries:
                find(session, q, kind=None, in_stock=False, limit=20)  # warm
                times.append(_median_time(
                    lambda: find(session, q, kind=None, in_stock=False, limit=20), runs))
            out[label] = (statistics.median(times), max(times))
    engine.dispose()
    out["examples"] = pn_queries[:2] + pn_queries[5:7]
    return out


def _cli() -> list[str]:
    exe = shutil.which("partsmatch")
    return [exe] if exe else [sys.executable, "-c",
                              "import sys; from partsmatch.cli.main import entry; entry()"]


def run_cli(db_path: Path, query: str, runs: int = 5) -> dict:
    cli = _cli()
    url = f"sqlite:///{db_path}"

    def call(args: list[str]) -> subprocess.CompletedProcess:
        return subprocess.run(cli + args, capture_output=True, text=True)

    out = {}
    probe = call(["--db", url, "find", query])
    if probe.returncode == 0:
        out["find"] = _median_time(lambda: call(["--db", url, "find", query]), runs)
    else:
        out["find_error"] = (probe.stderr or probe.stdout).strip().splitlines()[-1:] or ["?"]
    call(["--help"])
    out["help"] = _median_time(lambda: call(["--help"]), runs)
    # the floors under any command: the interpreter, and the database layer every command
    # that reads the catalog imports (all queries go through SQLAlchemy)
    for label, code in (("python", "pass"), ("sqlalchemy", "import sqlalchemy")):
        out[label] = _median_time(lambda: subprocess.run([sys.executable, "-c", code],
                                                         capture_output=True), runs)
    return out


def _row(rows: list, what: str, value: str, target: str, ok: bool | None) -> None:
    rows.append((what, value, target, "n/a" if ok is None else ("pass" if ok else "MISS")))


def main(argv: list[str] | None = None) -> int:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--rows", type=int, default=1_000_000,
                    help="parts to generate (about 1.08 CSV rows each); default 1,000,000")
    ap.add_argument("--keep", metavar="DIR", help="write the CSV and databases here and keep them")
    ap.add_argument("--no-reference", action="store_true", help="skip the plain sqlite3 reference")
    ap.add_argument("--no-serial", action="store_true",
                    help="skip the import that reads the file in the importing process")
    args = ap.parse_args(argv)

    tmp = None
    if args.keep:
        folder = Path(args.keep)
        folder.mkdir(parents=True, exist_ok=True)
    else:
        tmp = tempfile.TemporaryDirectory(prefix="pm-bench-")
        folder = Path(tmp.name)
    try:
        csv_path = folder / "catalog.csv"
        t = time.perf_counter()
        n_rows = gen_catalog.write_catalog(csv_path, args.rows)
        print(f"generated {args.rows:,} parts, {n_rows:,} rows, "
              f"{csv_path.stat().st_size / 1e6:.0f} MB in {time.perf_counter() - t:.1f} s "
              f"({csv_path})", flush=True)

        imp = run_import(csv_path, folder / "catalog.db")
        print(f"import: {imp['rows']:,} rows in {imp['wall']:.1f} s wall, {imp['cpu']:.1f} s CPU",
              flush=True)
        one = None
        if not args.no_serial:
            one = run_import(csv_path, folder / "serial.db", "serial")
            print(f"import in one process: {one['rows']:,} rows in {one['wall']:.1f} s wall, "
                  f"{one['cpu']:.1f} s CPU", flush=True)
        ref = None
        if not args.no_reference:
            ref = run_reference(csv_path, folder / "reference.db")
            print(f"reference: {ref['rows']:,} rows in {ref['wall']:.1f} s wall, "
                  f"{ref['cpu']:.1f} s CPU", flush=True)
        found = run_find(folder / "catalog.db")
        cli = run_cli(folder / "catalog.db", "0.95uF 2100VAC")

        rows: list = []
        rate = imp["rows"] / imp["wall"]
        _row(rows, "import, SQLite (rows/s, wall)", f"{rate:,.0f}", f">= {TARGET_RATE:,}",
             rate >= TARGET_RATE)
        _row(rows, "import, SQLite (rows/s of the importing process's CPU time)",
             f"{imp['rows'] / imp['cpu']:,.0f}", f">= {TARGET_RATE:,}",
             imp["rows"] / imp["cpu"] >= TARGET_RATE)
        if one:
            _row(rows, "import reading in one process (rows/s, wall)",
                 f"{one['rows'] / one['wall']:,.0f}", "reference", None)
        if ref:
            _row(rows, "reference sqlite3 executemany (rows/s, wall)",
                 f"{ref['rows'] / ref['wall']:,.0f}", "reference", None)
            _row(rows, "reference sqlite3 executemany (rows/s of CPU)",
                 f"{ref['rows'] / ref['cpu']:,.0f}", "reference", None)
            _row(rows, "import / reference (wall)", f"{ref['wall'] / imp['wall']:.2f} x",
                 "reference", None)
        _row(rows, "database size (MB)", f"{imp['size_mb']:,.0f}", "-", None)
        _row(rows, "import peak memory (MB, ru_maxrss)", f"{imp['maxrss_mb']:,.0f}",
             f"<= {TARGET_MEM_MB}", imp["maxrss_mb"] <= TARGET_MEM_MB)
        for label in ("part number", "spec"):
            med, worst = found[label]
            _row(rows, f"find {label} median (ms; worst query {worst * 1000:.0f})",
                 f"{med * 1000:.1f}", f"<= {TARGET_FIND_S * 1000:.0f}", med <= TARGET_FIND_S)
        if "find" in cli:
            _row(rows, "partsmatch find (s, whole CLI)", f"{cli['find']:.2f}",
                 f"<= {TARGET_CLI_FIND_S}", cli["find"] <= TARGET_CLI_FIND_S)
        else:
            _row(rows, "partsmatch find (s, whole CLI)", f"n/a ({' '.join(cli['find_error'])})",
                 f"<= {TARGET_CLI_FIND_S}", None)
        _row(rows, "partsmatch --help (s)", f"{cli['help']:.2f}", f"<= {TARGET_HELP_S}",
             cli["help"] <= TARGET_HELP_S)
        _row(rows, "floor: python -c pass (s)", f"{cli['python']:.2f}", "reference", None)
        _row(rows, "floor: python -c 'import sqlalchemy' (s)", f"{cli['sqlalchemy']:.2f}",
             "reference", None)

        print()
        print(f"catalog bench: {args.rows:,} invented parts, {imp['rows']:,} CSV rows; "
              f"SQLite {sqlite3.sqlite_version}, Python {sys.version.split()[0]}, "
              f"{os.cpu_count()} CPUs, load average {os.getloadavg()[0]:.1f}")
        widths = [max(len(r[i]) for r in rows + [("what", "value", "target", "result")])
                  for i in range(4)]
        for r in [("what", "value", "target", "result")] + rows:
            print("  ".join(c.ljust(w) for c, w in zip(r, widths)).rstrip())
        print("part-number queries: 5 exact, 5 as read off a worn print (e.g. "
              + ", ".join(repr(q) for q in found["examples"][2:]) + "); spec queries: "
              + ", ".join(repr(q) for q in SPEC_QUERIES))
    finally:
        if tmp is not None:
            tmp.cleanup()
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
