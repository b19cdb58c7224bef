"""The catalog commands on real databases: init --demo, parts list/show, export reproduces the
demo file's values, error exits."""

from __future__ import annotations

import json

from partsmatch._resources import data_path
from partsmatch.catalog.io import read_csv_values


def test_init_demo_list_and_show(db_url, cli):
    code, out, err = cli("--db", db_url, "init", "--demo")
    assert code == 0, err
    code, out, _ = cli("--db", db_url, "parts", "list", "--json")
    parts = json.loads(out)
    assert len(parts) >= 150
    assert {p["kind"] for p in parts} == {"capacitor", "diode", "fuse", "resistor"}
    cap = next(p for p in parts if p["kind"] == "capacitor" and p["voltage_ac"])
    code, out, _ = cli("--db", db_url, "parts", "show", f"{cap['maker']}:{cap['part_number']}")
    assert code == 0
    assert "capacitance" in out and ("nF" in out or "µF" in out) and "kV" in out
    # a second init --demo on the same catalog is harmless
    code, out, err = cli("--db", db_url, "init", "--demo")
    assert code == 0, err


def test_demo_export_reproduces_the_demo_file(db_url, cli, tmp_path):
    assert cli("--db", db_url, "init", "--demo")[0] == 0
    code, out, _ = cli("--db", db_url, "parts", "export")
    assert code == 0
    exported = tmp_path / "export.csv"
    exported.write_text(out)

    def by_part(path):
        rows = {}
        for part, stock in read_csv_values(path):
            key = (part["maker"], part["part_number"])
            entry = rows.setdefault(key, [part, set()])
            assert entry[0] == part  # every row of a part carries the same ratings
            if stock:
                entry[1].add(stock)
        return rows

    assert by_part(exported) == by_part(data_path("demo_parts.csv"))


def test_errors_are_one_line_with_exit_codes(sqlite_url, cli, tmp_path):
    assert cli("--db", sqlite_url, "init")[0] == 0
    bad = tmp_path / "bad.csv"
    bad.write_text("part_number,maker,kind,capacitance\nX1,M,capacitor,12 parsecs\n")
    code, out, err = cli("--db", sqlite_url, "parts", "import", str(bad))
    assert code == 2
    assert err.strip().count("\n") == 0 and f"{bad}:2: column 'capacitance'" in err
    code, out, err = cli("--db", sqlite_url, "parts", "show", "NO-SUCH-PART")
    assert code == 2 and "NO-SUCH-PART" in err and "Traceback" not in err
    code, out, err = cli("--db", sqlite_url, "parts", "list", "--kind", "widget")
    assert code == 2
    code, out, err = cli("--db", "sqlite:////nonexistent-dir/\0/x.db", "parts", "list")
    assert code == 3 and "Traceback" not in err


def test_version(cli):
    code, out, _ = cli("--version")
    assert code == 0 and out.startswith("partsmatch ")


def test_usage_errors_exit_2(cli):
    code, _, err = cli("parts", "list", "--limit", "x")
    assert code == 2 and "--limit" in err and "Traceback" not in err
    code, _, err = cli("no-such-command")
    assert code == 2
