"""The substitution commands through the CLI (in process, via the ``cli`` fixture).

replace (table, --json with the DESIGN.md section 4 verdict keys, --all, --in-stock,
--original-spec, --limit), check (exit codes 0/1, --strict), check --batch (--json, --csv, exit 1
on any reject, a bad file exits 2 with FILE:LINE), repairs add|list, policy show (--json: every
value has kind and source), the global --policy override (and an unknown key: exit 2), demo --json.

The demo catalog is loaded once into a SQLite file for the module; analyze() is memoised on the
circuit it is given so that each circuit is simulated once however many commands use it.
"""

from __future__ import annotations

import csv
import io
import json

import pytest

from partsmatch._resources import data_path

C60 = str(data_path("circuits", "oven_doubler_60hz.toml"))
C30K = str(data_path("circuits", "inverter_doubler_30khz.toml"))
BENCH = str(data_path("circuits", "bench_halfwave.toml"))


@pytest.fixture(scope="module", autouse=True)
def isolated(tmp_path_factory):
    """No user policy or catalog leaks in: data directory and database of the test's own."""
    home = tmp_path_factory.mktemp("xdg")
    with pytest.MonkeyPatch.context() as mp:
        mp.setenv("XDG_DATA_HOME", str(home))
        mp.delenv("PARTSMATCH_DB", raising=False)
        yield


@pytest.fixture(scope="module", autouse=True)
def memo_analyze():
    from partsmatch.circuit import stress as stress_mod

    real = stress_mod.analyze
    memo: dict[tuple, object] = {}

    def analyze(spec, policy, *a, **kw):
        key = (repr(spec), repr(sorted(policy.as_dict().items())), repr(a), repr(kw))
        if key not in memo:
            memo[key] = real(spec, policy, *a, **kw)
        return memo[key]

    with pytest.MonkeyPatch.context() as mp:
        mp.setattr(stress_mod, "analyze", analyze)
        yield


@pytest.fixture(scope="module")
def db_url(tmp_path_factory):
    from partsmatch.catalog import db
    from partsmatch.catalog.io import load_demo

    url = f"sqlite:///{tmp_path_factory.mktemp('clisub') / 'demo.db'}"
    eng = db.make_engine(url)
    db.init(eng)
    load_demo(eng)
    eng.dispose()
    return url


@pytest.fixture
def pm(cli, db_url):
    """``pm("replace", ...)`` runs ``partsmatch --db URL replace ...``."""
    def _run(*args, policy=None):
        pre = ["--db", db_url] + (["--policy", str(policy)] if policy else [])
        return cli(*pre, *args)
    return _run


def names(report):
    return [f"{c['maker']}:{c['part_number']}" for c in report["candidates"]]


# ---------------------------------------------------------------- replace
def test_replace_table(pm):
    code, out, err = pm("replace", "BKM-21-0950-HB", "--circuit", C60)
    assert code == 0, err
    first = next(line for line in out.splitlines() if line.strip().startswith("1."))
    assert "VH2100-95H-B10" in first and "CAUTION" in first
    assert "A1-02 (4)" in out and "F9-01 (2)" in out      # stock by location (demo README)
    assert "REJECT" not in out                             # rejected parts only with --all
    low = out.lower()
    # the HV cautions, once (issue 4; helper rules "Safety")
    for phrase in ("short", "bleeder", "dielectric absorption", "maker"):
        assert phrase in low, phrase
    assert low.count("dielectric absorption") == 1


def test_replace_json_follows_the_verdict_contract(pm):
    code, out, err = pm("replace", "Brakemoor:BKM-21-0950-HB", "--circuit", C60, "--json")
    assert code == 0, err
    rep = json.loads(out)
    # DESIGN.md section 4, "Verdicts"
    for key in ("slot", "circuit", "policy", "version", "original", "stress", "cautions",
                "candidates"):
        assert key in rep, key
    assert rep["slot"] == "C1"
    for key in ("v_peak", "v_min", "v_mean", "v_ac_rms", "i_rms", "energy_j", "discharge_s"):
        assert key in rep["stress"], key
    assert names(rep)[0] == "Varnholt:VH2100-95H-B10"
    for c in rep["candidates"]:
        for key in ("part_number", "maker", "verdict", "score", "in_stock", "locations",
                    "stress", "findings"):
            assert key in c, key
        assert c["verdict"] in ("accept", "caution")
        assert set(c["stress"]["slots"]) == {"C1", "D1", "F1"}
        for f in c["findings"]:
            assert set(f) >= {"rule", "status", "stress", "rating", "margin", "message", "basis"}
            assert f["status"] in ("pass", "warn", "fail")
            if f["margin"] is not None and f["stress"] and f["rating"] and f["unit"] in ("V", "A"):
                # margin = rating / stress where the rating must exceed the stress
                assert f["margin"] == pytest.approx(f["rating"] / abs(f["stress"]), rel=1e-6)
    twin = rep["candidates"][0]
    assert twin["in_stock"] == 6
    assert {(x["location"], x["quantity"]) for x in twin["locations"]} == {("A1-02", 4),
                                                                           ("F9-01", 2)}


def test_replace_all_lists_rejects_with_reasons(pm):
    code, out, _ = pm("replace", "BKM-21-0950-HB", "--circuit", C60, "--all", "--limit", "0",
                      "--json")
    assert code == 0
    rep = json.loads(out)
    by = {c["part_number"]: c for c in rep["candidates"]}
    for pn, rule in (("TSL-03KD-U95H", "cap_dc_only"), ("TSL-06KD-U95H", "cap_dc_only"),
                     ("PMK-E450-1U0", "cap_polarity")):
        assert by[pn]["verdict"] == "reject"
        assert any(f["rule"] == rule and f["status"] == "fail" for f in by[pn]["findings"])
    verdicts = [c["verdict"] for c in rep["candidates"]]
    assert verdicts.index("reject") > max(i for i, v in enumerate(verdicts) if v != "reject")
    code, out, _ = pm("replace", "BKM-21-0950-HB", "--circuit", C60, "--all", "--limit", "0")
    assert "REJECT" in out and "cap_dc_only" in out


def test_replace_in_stock_and_limit(pm):
    _, out, _ = pm("replace", "BKM-21-0950-HB", "--circuit", C60, "--limit", "0", "--json")
    every = json.loads(out)
    assert "Brakemoor:BKM-25-0950-HB" in names(every)          # out of stock (demo README)
    code, out, _ = pm("replace", "BKM-21-0950-HB", "--circuit", C60, "--in-stock", "--limit",
                      "0", "--json")
    assert code == 0
    stocked = json.loads(out)
    assert stocked["candidates"] and all(c["in_stock"] > 0 for c in stocked["candidates"])
    assert "Brakemoor:BKM-25-0950-HB" not in names(stocked)
    code, out, _ = pm("replace", "BKM-21-0950-HB", "--circuit", C60, "--limit", "2", "--json")
    assert names(json.loads(out)) == names(every)[:2]


def test_replace_original_spec(pm):
    code, out, err = pm("replace", "--original-spec", "0.95uF 2100VAC 3%", "--circuit", C60,
                        "--json")
    assert code == 0, err
    rep = json.loads(out)
    assert rep["slot"] == "C1"
    assert rep["original"]["capacitance"] == pytest.approx(0.95e-6)
    assert rep["original"]["voltage_ac"] == pytest.approx(2100.0)
    assert names(rep)[0] == "Varnholt:VH2100-95H-B10"


def test_replace_fuse_marking_original(pm):
    code, out, err = pm("replace", "--original-spec", "T2AL250V", "--circuit", BENCH, "--json")
    assert code == 0, err
    rep = json.loads(out)
    assert rep["slot"] == "F1"
    assert all(c["ratings"]["rated_current"] <= 2.0 + 1e-9
               for c in rep["candidates"])   # a higher rating is never offered


@pytest.mark.parametrize("args, needle", [
    (("NO-SUCH-PART", "--circuit", C60), "NO-SUCH-PART"),
    (("BKM-21-0950-HB", "--circuit", C60, "--slot", "C9"), "C9"),
    (("BKM-21-0950-HB", "--circuit", C60, "--slot", "D1"), "D1"),
    (("--original-spec", "hello", "--circuit", C60), "hello"),
    (("BKM-21-0950-HB", "--circuit", "/nonexistent/c.toml"), "c.toml"),
])
def test_replace_bad_input_exit_2(pm, args, needle):
    code, out, err = pm("replace", *args)
    assert code == 2
    lines = [x for x in err.splitlines() if x.strip()]
    assert len(lines) == 1 and needle in lines[0] and "Traceback" not in err


# ---------------------------------------------------------------- check
CHECKS = [
    ("ORV-12K55S", "QX12550S", C60, "accept"),
    ("BKM-21-0950-HB", "VH2100-95H-B10", C60, "caution"),
    ("BKM-21-0950-HB", "TSL-06KD-U95H", C60, "reject"),
    ("LKS-HV5-1000", "LKS-HV5-1250", C60, "reject"),
    ("QX10500F", "ORV-10K50S", C30K, "reject"),
]


@pytest.mark.parametrize("orig, cand, circuit, verdict", CHECKS)
def test_check_verdicts(pm, orig, cand, circuit, verdict):
    c, out, err = pm("check", orig, cand, "--circuit", circuit, "--json")
    rep = json.loads(out)
    assert rep["verdict"] == verdict and rep["candidates"][0]["verdict"] == verdict
    c, out, _ = pm("check", orig, cand, "--circuit", circuit)
    assert f"verdict: {verdict.upper()}" in out
    if verdict != "reject":
        assert c == 0     # DESIGN.md 4: accept, or caution without --strict, exit 0
    if verdict == "accept":
        c, _, _ = pm("check", orig, cand, "--circuit", circuit, "--strict")
        assert c == 0


@pytest.mark.parametrize("orig, cand, circuit, verdict", CHECKS[1:])
def test_check_exit_1_on_reject_and_strict_caution(pm, orig, cand, circuit, verdict):
    args = ("check", orig, cand, "--circuit", circuit)
    if verdict == "reject":
        assert pm(*args, "--json")[0] == 1
    assert pm(*args, "--strict")[0] == 1


def test_check_x_x_is_not_a_reject(pm):
    for part in ("BKM-21-0950-HB", "ORV-12K55S", "LKS-HV5-1000"):
        code, out, _ = pm("check", part, part, "--circuit", C60, "--json")
        assert code == 0 and json.loads(out)["verdict"] != "reject"


def test_check_shows_every_finding(pm):
    code, out, _ = pm("check", "ORV-12K55S", "QX12550S", "--circuit", C60)
    assert code == 0
    for rule in ("diode_vrrm", "diode_vrrm_switch_on", "diode_if_avg", "diode_surge",
                 "diode_trr"):
        assert rule in out


# ---------------------------------------------------------------- check --batch
def write_csv(path, rows, header=("original", "candidate", "slot")):
    with open(path, "w", newline="") as fh:
        w = csv.writer(fh)
        w.writerow(header)
        w.writerows(rows)
    return path


PROPOSALS = [
    ("ORV-12K55S", "QX12550S", "D1"),
    ("BKM-21-0950-HB", "TSL-03KD-U95H", "C1"),
    ("LKS-HV5-1000", "Feldhorn:FHV-5K-1A0-40", ""),
]


def test_batch_json_and_csv(pm, tmp_path):
    f = write_csv(tmp_path / "proposals.csv", PROPOSALS)
    code, out, err = pm("check", "--batch", f, "--circuit", C60, "--json")
    assert code in (0, 1), err
    rows = json.loads(out)
    assert [r["verdict"] for r in rows] == ["accept", "reject", "caution"]
    assert [r["slot"] for r in rows] == ["D1", "C1", "F1"]
    assert [r["line"] for r in rows] == [2, 3, 4]
    assert "cap_dc_only" in rows[1]["reasons"]
    code, out, _ = pm("check", "--batch", f, "--circuit", C60, "--csv")
    got = list(csv.DictReader(io.StringIO(out)))
    assert [r["verdict"] for r in got] == ["accept", "reject", "caution"]
    assert set(got[0]) == {"original", "candidate", "slot", "verdict", "reasons"}
    code, out, _ = pm("check", "--batch", f, "--circuit", C60)
    assert "REJECT" in out and "CAUTION" in out


def test_batch_exit_1_if_any_reject(pm, tmp_path):
    f = write_csv(tmp_path / "proposals.csv", PROPOSALS)
    for fmt in ("--json", "--csv", None):
        code, _, _ = pm("check", "--batch", f, "--circuit", C60, *([fmt] if fmt else []))
        assert code == 1


def test_batch_without_rejects_exits_0(pm, tmp_path):
    f = write_csv(tmp_path / "ok.csv", [("ORV-12K55S", "QX12550S", "D1"),
                                        ("LKS-HV5-1000", "FHV-5K-1A0-40", "F1")])
    code, out, err = pm("check", "--batch", f, "--circuit", C60, "--json")
    assert code == 0, err
    assert [r["verdict"] for r in json.loads(out)] == ["accept", "caution"]


def test_batch_strict_exits_1_on_caution(pm, tmp_path):
    f = write_csv(tmp_path / "ok.csv", [("ORV-12K55S", "QX12550S", "D1"),
                                        ("LKS-HV5-1000", "FHV-5K-1A0-40", "F1")])
    code, _, _ = pm("check", "--batch", f, "--circuit", C60, "--json", "--strict")
    assert code == 1


@pytest.mark.parametrize("content, line", [
    ("original,candidate\nORV-12K55S,QX12550S\nORV-12K55S,NO-SUCH-DIODE\n", 3),
    ("original,candidate\nORV-12K55S,QX12550S\n,QX12550S\n", 3),
    ("original,proposal\nORV-12K55S,QX12550S\n", 1),
    ("original,candidate,price\nORV-12K55S,QX12550S,3\n", 1),
    ("original,candidate,slot\nORV-12K55S,QX12550S,Z9\n", 2),
])
def test_bad_batch_file_exit_2_with_file_and_line(pm, tmp_path, content, line):
    f = tmp_path / "bad.csv"
    f.write_text(content)
    code, out, err = pm("check", "--batch", f, "--circuit", C60, "--json")
    assert code == 2
    lines = [x for x in err.splitlines() if x.strip()]
    assert len(lines) == 1 and f"{f}:{line}" in lines[0], err
    assert "Traceback" not in err


def test_batch_missing_file_exit_2(pm, tmp_path):
    code, _, err = pm("check", "--batch", tmp_path / "none.csv", "--circuit", C60)
    assert code == 2 and "none.csv" in err


# ---------------------------------------------------------------- repairs
def test_repairs_add_and_list(pm):
    code, out, err = pm("repairs", "add", "BKM-21-0950-HB", "VH2100-95H-B10", "--circuit", C60,
                        "--note", "job 4711", "--json")
    assert code == 0, err
    rec = json.loads(out)
    assert rec["verdict"] == "caution" and rec["slot"] == "C1"
    code, out, _ = pm("repairs", "add", "ORV-12K55S", "QX12550S", "--circuit", C60)
    assert code == 0 and "recorded repair" in out
    code, out, _ = pm("repairs", "list", "--json")
    rows = json.loads(out)
    assert [r["substitute"] for r in rows[:2]] == ["Quillon:QX12550S", "Varnholt:VH2100-95H-B10"]
    code, out, _ = pm("repairs", "list", "--part", "VH2100-95H-B10", "--json")
    rows = json.loads(out)
    assert len(rows) == 1 and rows[0]["note"] == "job 4711"
    assert rows[0]["original"] == "Brakemoor:BKM-21-0950-HB"
    code, out, _ = pm("repairs", "list", "--circuit", "countertop")
    assert code == 0 and "VH2100-95H-B10" in out and "QX12550S" in out
    code, out, _ = pm("repairs", "list", "--circuit", "no such circuit", "--json")
    assert json.loads(out) == []


# ---------------------------------------------------------------- policy
def test_policy_show_json_every_value_has_kind_and_source(pm):
    code, out, err = pm("policy", "show", "--json")
    assert code == 0, err
    pol = json.loads(out)
    assert pol["values"]
    for name, v in pol["values"].items():
        assert v["kind"] in ("hard", "margin", "setting"), name
        assert isinstance(v["source"], str) and v["source"].strip(), name
        assert isinstance(v["value"], (int, float)), name
    # hard limits (DESIGN.md section 4): capacitance window, trr fraction, polarity
    for name in ("cap_window", "trr_fraction", "polarity_reverse_limit"):
        assert pol["values"][name]["kind"] == "hard"
    code, out, _ = pm("policy", "show")
    assert code == 0 and "cap_window" in out and "hard" in out


def test_policy_override_changes_value_source_and_verdict(pm, tmp_path):
    # default diode_if_margin 0.80: the 30 kHz twin (0.384 A mean at high line against 0.5 A)
    # is accepted; a stricter shop margin of 0.70 (0.35 A) makes it a caution
    code, out, _ = pm("check", "QX10500F", "ORV-10K50F", "--circuit", C30K, "--json")
    assert code == 0 and json.loads(out)["verdict"] == "accept"
    shop = tmp_path / "shop.toml"
    shop.write_text('diode_if_margin = 0.70\n[cap_window]\nvalue = "3 %"\n'
                    'source = "our bench notes"\n')
    code, out, err = pm("policy", "show", "--json", policy=shop)
    assert code == 0, err
    vals = json.loads(out)["values"]
    assert vals["diode_if_margin"]["value"] == 0.70
    assert vals["diode_if_margin"]["origin"] == str(shop)
    assert "shop.toml" in vals["diode_if_margin"]["source"]
    assert vals["cap_window"]["value"] == 3.0 and vals["cap_window"]["source"] == "our bench notes"
    assert vals["cap_window"]["kind"] == "hard"           # a shop changes values, not kinds
    code, out, _ = pm("check", "QX10500F", "ORV-10K50F", "--circuit", C30K, "--json",
                      policy=shop)
    assert code == 0 and json.loads(out)["verdict"] == "caution"  # 0.384 A > 0.70 x 0.5 A
    assert "shop.toml" in json.loads(out)["policy"]
    code, _, _ = pm("check", "QX10500F", "ORV-10K50F", "--circuit", C30K, "--strict",
                    policy=shop)
    assert code == 1


@pytest.mark.parametrize("content, needle", [
    ("no_such_limit = 1.0\n", "no_such_limit"),
    ("cap_window = \"5 V\"\n", "cap_window"),
    ("diode_if_margin = [1, 2]\n", "diode_if_margin"),
    ("this is not toml\n", "shop.toml"),
])
def test_policy_bad_file_exit_2(pm, tmp_path, content, needle):
    shop = tmp_path / "shop.toml"
    shop.write_text(content)
    code, out, err = pm("policy", "show", policy=shop)
    assert code == 2
    lines = [x for x in err.splitlines() if x.strip()]
    assert len(lines) == 1 and needle in lines[0] and "Traceback" not in err


# ---------------------------------------------------------------- demo
def test_demo_json(cli):
    code, out, err = cli("demo", "--json")
    assert code == 0, err
    d = json.loads(out)
    assert set(d) >= {"circuit", "stress", "replace", "traps"}
    rep = d["replace"]
    assert rep["slot"] == "C1"
    assert rep["candidates"][0]["part_number"] == "VH2100-95H-B10"
    assert all(c["verdict"] != "reject" for c in rep["candidates"])
    assert d["traps"] and all(t["verdict"] == "reject" for t in d["traps"])
    assert rep["cautions"]


def test_demo_text_never_touches_the_users_catalog(cli, tmp_path, monkeypatch):
    db_file = tmp_path / "mine.db"
    monkeypatch.setenv("PARTSMATCH_DB", f"sqlite:///{db_file}")
    code, out, err = cli("demo")
    assert code == 0, err
    assert not db_file.exists()
    assert "VH2100-95H-B10" in out and "REJECT" in out and "HIGH VOLTAGE" in out


# ---------------------------------------------------------------- shop cross-references
def test_replace_shows_the_shops_cross_references(pm):
    # issue 4: `replace` shows the shop's recorded cross-references for the original
    code, _, err = pm("xref", "add", "Orvane:ORV-12K55S", "Quillon:QX12550S", "--note",
                      "bench-tested 2026")
    assert code == 0, err
    code, out, _ = pm("replace", "ORV-12K55S", "--circuit", C60, "--json")
    x = json.loads(out)["crossrefs"]
    assert len(x) == 1 and x[0]["part"] == "Quillon:QX12550S"
    assert x[0]["note"] == "bench-tested 2026"
    code, out, _ = pm("replace", "ORV-12K55S", "--circuit", C60)
    assert "bench-tested 2026" in out


def test_policy_missing_file_exit_2(pm, tmp_path):
    code, _, err = pm("policy", "show", policy=tmp_path / "none.toml")
    assert code == 2 and "none.toml" in err and "Traceback" not in err


def test_shop_policy_in_the_data_directory_is_used(pm, tmp_path, monkeypatch):
    """A policy.toml in the user's data directory overrides the defaults, and --policy
    overrides it (partsmatch.rules.policy.load_policy order)."""
    from partsmatch.catalog.db import user_data_dir

    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path / "xdg"))
    d = user_data_dir()
    d.mkdir(parents=True)
    (d / "policy.toml").write_text("safe_voltage = \"30 V\"\nambient = \"35 degC\"\n")
    code, out, err = pm("policy", "show", "--json")
    assert code == 0, err
    vals = json.loads(out)["values"]
    assert vals["safe_voltage"]["value"] == 30.0 and vals["ambient"]["value"] == 35.0
    assert vals["safe_voltage"]["origin"] == str(d / "policy.toml")
    shop = tmp_path / "bench.toml"
    shop.write_text("safe_voltage = 40\n")
    vals = json.loads(pm("policy", "show", "--json", policy=shop)[1])["values"]
    assert vals["safe_voltage"]["value"] == 40.0 and vals["ambient"]["value"] == 35.0
