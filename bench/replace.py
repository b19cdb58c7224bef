"""Benchmark of ``replace`` on a generated catalog (issue: substitution).

Builds a SQLite catalog of the invented demo data plus N generated parts (bench/gen_catalog.py,
invented makers and numbers), then times ``replace`` of the 60 Hz demo doubler's capacitor, diode
and fuse: in process (a new Substitution each run: the circuit is analysed every time) and as
the whole CLI command in a new process. Targets: <= 1 s in process, <= 2 s for the CLI (median).

Usage: python bench/replace.py [--parts 100000] [--runs 5] [--keep DIR]
"""

from __future__ import annotations

import argparse
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

HERE = Path(__file__).resolve().parent
sys.path.insert(0, str(HERE))

CIRCUIT = HERE.parent / "data" / "circuits" / "oven_doubler_60hz.toml"
CASES = (("C1", "BKM-21-0950-HB"), ("D1", "ORV-12K55S"), ("F1", "LKS-HV5-1000"))


def main() -> None:
    ap = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    ap.add_argument("--parts", type=int, default=100_000)
    ap.add_argument("--runs", type=int, default=5)
    ap.add_argument("--cli-runs", type=int, default=3)
    ap.add_argument("--keep", type=Path, default=None, help="keep the catalog in this folder")
    args = ap.parse_args()

    from sqlalchemy import func, select
    from sqlalchemy.orm import Session

    from gen_catalog import write_catalog
    from partsmatch.catalog import db
    from partsmatch.catalog.io import import_csv, load_demo
    from partsmatch.catalog.models import Part
    from partsmatch.catalog.queries import find_part
    from partsmatch.circuit.spec import load_circuit
    from partsmatch.rules.policy import load_policy
    from partsmatch.substitute import replace_part

    folder = args.keep or Path(tempfile.mkdtemp(prefix="pm-bench-replace-"))
    folder.mkdir(parents=True, exist_ok=True)
    url = f"sqlite:///{folder / 'replace.db'}"
    engine = db.make_engine(url)
    db.init(engine)
    with Session(engine) as s:
        have = s.scalar(select(func.count()).select_from(Part))
    if not have:
        csv_path = folder / "generated.csv"
        t = time.perf_counter()
        write_catalog(csv_path, args.parts, seed=7)
        load_demo(engine)
        import_csv(engine, csv_path)
        print(f"catalog: {args.parts:,} generated parts + demo data, built in "
              f"{time.perf_counter() - t:.1f} s")
    with Session(engine) as s:
        total = s.scalar(select(func.count()).select_from(Part))
    print(f"catalog at {url}: {total:,} parts\n")

    spec = load_circuit(CIRCUIT)
    policy = load_policy()
    rows = []
    for slot, pn in CASES:
        times, n = [], 0
        for _ in range(args.runs):
            with Session(engine) as s:
                original = find_part(s, pn)
                t = time.perf_counter()
                rep = replace_part(s, spec, original, slot=slot, policy=policy,
                                   include_rejected=True)
                times.append(time.perf_counter() - t)
                n = len(rep["candidates"])
        cli = []
        for _ in range(args.cli_runs):
            t = time.perf_counter()
            subprocess.run(["partsmatch", "--db", url, "replace", pn, "--circuit", str(CIRCUIT),
                            "--slot", slot, "--json"], check=True, stdout=subprocess.DEVNULL)
            cli.append(time.perf_counter() - t)
        rows.append((slot, pn, n, statistics.median(times), statistics.median(cli)))
    print(f"{'slot':<5} {'original':<16} {'judged':>7} {'in process':>11} {'CLI':>7}   targets")
    for slot, pn, n, tin, tcli in rows:
        ok = "ok" if tin <= 1.0 else "MISS"
        ok2 = "ok" if tcli <= 2.0 else "MISS"
        print(f"{slot:<5} {pn:<16} {n:>7} {tin:>10.2f}s {tcli:>6.2f}s   "
              f"<= 1 s {ok}, <= 2 s {ok2}")
    engine.dispose()


if __name__ == "__main__":
    main()
