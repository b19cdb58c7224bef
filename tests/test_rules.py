"""Each rule function on a hand-built SlotStress and hand-built parts.

Every expected value names its source beside it: a REFERENCES.md row (standard or handbook, with
`from memory` where the row is from memory), a closed form, or `common practice, no source`.
The policy is the default one (data/policy.toml); its values are checked against their sources
first, so that a change of a default shows up here as well as in the rules.
"""

from __future__ import annotations

import math

import pytest

from partsmatch.catalog.records import PartRecord
from partsmatch.rules import capacitor, diode, fuse, resistor
from partsmatch.rules.context import SlotStress, slot_stress, worst_over
from partsmatch.rules.engine import evaluate
from partsmatch.rules.findings import Finding, mismatch, rated, verdict_of
from partsmatch.rules.policy import load_policy

SQRT2 = math.sqrt(2.0)


@pytest.fixture(scope="module")
def policy():
    return load_policy()


def cap(**kw) -> PartRecord:
    base = dict(kind="capacitor", maker="Testmaker", part_number="C-TEST", capacitance=0.95e-6,
                tolerance_minus=3.0, tolerance_plus=3.0, voltage_ac=2100.0, bleeder=10e6)
    base.update(kw)
    return PartRecord(**base)


def dio(**kw) -> PartRecord:
    base = dict(kind="diode", maker="Testmaker", part_number="D-TEST", vrrm=12e3, if_avg=0.55,
                ifsm=30.0, vf=10.0)
    base.update(kw)
    return PartRecord(**base)


def fus(**kw) -> PartRecord:
    base = dict(kind="fuse", maker="Testmaker", part_number="F-TEST", rated_current=1.0,
                voltage=5000.0, fuse_standard="HV", breaking_capacity=None)
    base.update(kw)
    return PartRecord(**base)


def stress(role: str, cont: dict | None = None, trans: dict | None = None, *,
           frequency: float = 60.0, ambient: float = 25.0, **kw) -> SlotStress:
    cont = cont or {}
    return SlotStress(slot={"capacitor": "C1", "diode": "D1", "fuse": "F1"}[role], role=role,
                      frequency=frequency, ambient=ambient, continuous=cont,
                      transient=trans or {}, states={k: "no_load" for k in cont}, **kw)


# ---------------------------------------------------------------- policy defaults vs sources
@pytest.mark.parametrize("name, value, kind", [
    ("diode_vr_margin", 0.70, "margin"),        # NASA EEE-INST-002, 0.70 of VRRM (from memory)
    ("diode_surge_margin", 0.50, "margin"),     # NASA EEE-INST-002, 0.50 of IFSM (from memory)
    ("temp_margin", 10.0, "margin"),            # NASA EEE-INST-002 film: rated max - 10 degC
    ("fuse_rerate_per_degc", 0.5, "setting"),   # MIL-STD-975 / EEE-INST-002, 0.5 %/degC (C2)
    ("cap_vac_allowance", 1.10, "margin"),      # IEC 60831-1 style 110 % (from memory)
    ("high_line_factor", 1.10, "setting"),      # mains tolerance +10 % (IEC 60038, secondary)
    ("safe_voltage", 50.0, "setting"),          # near 60 V DC of IEC 60204-1 cl. 6.2.4 (C2)
    ("cap_window", 5.0, "hard"),                # common practice, no source
    ("trr_fraction", 0.02, "hard"),             # common practice, no source ("a few percent")
    ("dc_part_ac_fraction", 0.10, "hard"),      # common practice, no source
    ("polarity_reverse_limit", 1.5, "hard"),    # from memory: electrolytics take 1-1.5 V reverse
])
def test_policy_defaults_match_their_sources(policy, name, value, kind):
    e = policy.entry(name)
    assert math.isclose(e.value, value, rel_tol=1e-9)
    assert e.kind == kind
    assert e.source and name in e.basis


def test_every_policy_value_has_kind_and_source(policy):
    for v in policy:
        assert v.kind in ("hard", "margin", "setting"), v.name
        assert v.source.strip(), v.name


# ---------------------------------------------------------------- the evidence rule
# rated(): pass up to margin_fraction x rating; warn inside the margin; above the rating warn if
# the candidate is at least as good as the original, fail if it is worse or the original unknown.
# The numbers are plain ratios (DESIGN.md section 3, "What worked is evidence").
@pytest.mark.parametrize("stress_v, rating, original, status", [
    (5.0, 10.0, 10.0, "pass"),
    (7.0, 10.0, 10.0, "pass"),      # exactly margin_fraction x rating: still pass
    (7.01, 10.0, 10.0, "warn"),     # inside the policy margin
    (10.0, 10.0, 10.0, "warn"),     # at the rating itself
    (10.0, 10.0, 20.0, "warn"),     # at the rating, candidate worse: not above it, still warn
    (11.0, 10.0, 10.0, "warn"),     # above the rating, candidate as good as the original
    (11.0, 12.0, 10.0, "warn"),     # ... or better than the original
    (11.0, 10.0, 10.5, "fail"),     # above the rating and worse than the original
    (11.0, 10.0, None, "fail"),     # above the rating, original unknown: stress decides
    (-11.0, 10.0, 10.5, "fail"),    # a signed stress is taken by magnitude
])
def test_rated_evidence_rule(stress_v, rating, original, status):
    f = rated("r", stress=stress_v, rating=rating, original=original, margin_fraction=0.7,
              unit="V", what="x", basis="b")
    assert f.status == status
    assert math.isclose(f.margin, rating / abs(stress_v))   # DESIGN.md: margin = rating / stress


def test_rated_missing_values():
    f = rated("r", stress=None, rating=10.0, original=None, margin_fraction=1.0, unit="V",
              what="x", basis="b")
    assert f.status == "pass" and f.margin is None
    essential = rated("r", stress=5.0, rating=None, original=10.0, margin_fraction=1.0,
                      unit="V", what="x", basis="b")
    assert essential.status == "fail"
    optional = rated("r", stress=5.0, rating=None, original=10.0, margin_fraction=1.0, unit="V",
                     what="x", basis="b", essential=False)
    assert optional.status == "warn"


@pytest.mark.parametrize("statuses, verdict", [
    ([], "accept"), (["pass"], "accept"), (["pass", "warn"], "caution"),
    (["warn", "fail", "pass"], "reject"), (["fail"], "reject"),
])
def test_verdict_of(statuses, verdict):   # DESIGN.md section 4 verdict contract
    fs = [Finding("r", s, None, None, None, "", "") for s in statuses]
    assert verdict_of(fs) == verdict


def test_mismatch_names_both():   # common practice, no source: a size difference is a warning
    f = mismatch("size", "size", "oval 38x60 mm", "round 45x70 mm", "b")
    assert f.status == "warn" and "oval 38x60 mm" in f.message and "round 45x70 mm" in f.message
    assert mismatch("size", "size", "Oval 38x60 mm", "oval 38x60 mm ", "b").status == "pass"
    assert mismatch("size", "size", "oval", None, "b").status == "warn"


# ---------------------------------------------------------------- capacitor
# IEC 60062 H = 3 %; policy window 5 % (common practice, no source): allowed = max(tol, 5 %).
@pytest.mark.parametrize("c_new, tol_orig, status", [
    (0.95e-6, 3.0, "pass"),
    (0.91e-6, 3.0, "pass"),        # -4.2 %
    (0.9975e-6, 3.0, "pass"),      # +5.0 % exactly: boundary is inside
    (1.0e-6, 3.0, "fail"),         # +5.26 %
    (0.80e-6, 3.0, "fail"),        # -15.8 %, the demo trap BKM-21-0800-HB
    (1.05e-6, 3.0, "fail"),        # +10.5 %, the demo trap VH2100-105H-B10
    (1.045e-6, 10.0, "pass"),      # +10 % inside an original's K (10 %) tolerance
    (1.05e-6, 10.0, "fail"),       # +10.5 % outside it
])
def test_capacitance_window(policy, c_new, tol_orig, status):
    o = cap(tolerance_minus=tol_orig, tolerance_plus=tol_orig)
    f = capacitor.capacitance(o, cap(capacitance=c_new), stress("capacitor"), policy)
    assert f.status == status
    assert policy.entry("cap_window").kind == "hard"


def test_capacitance_missing(policy):
    f = capacitor.capacitance(cap(), cap(capacitance=None), stress("capacitor"), policy)
    assert f.status == "fail"
    # the original unknown in the catalog: the slot's modelled capacitance stands in
    f = capacitor.capacitance(cap(capacitance=None, tolerance_minus=None, tolerance_plus=None),
                              cap(capacitance=1.0e-6), stress("capacitor", capacitance=0.95e-6),
                              policy)
    assert f.status == "fail"   # +5.26 % against the slot's 0.95 uF, outside the 5 % window


# Vpk = sqrt(2) Vrms (closed form): a 2100 VAC rating has a 2969.8 V peak.
@pytest.mark.parametrize("v_peak, c_kw, o_kw, status", [
    (2900.0, {}, {}, "pass"),
    (2100 * SQRT2 - 0.5, {}, {}, "pass"),                  # just under sqrt(2) x 2100 V
    (4400.0, {}, {}, "warn"),                              # above, but the same as the original
    (4400.0, {"voltage_ac": 2500.0}, {}, "warn"),          # above, better than the original
    (4400.0, {"voltage_ac": 1900.0}, {}, "fail"),          # above, worse than the original
    # a 3 kV DC-only part against a 2100 VAC original: the DC figure is no evidence on an AC
    # rating (DESIGN.md: VAC and VDC not interchangeable by number), so the stress decides
    (4400.0, {"voltage_ac": None, "voltage_dc": 3000.0}, {}, "fail"),
    (4400.0, {"voltage_ac": None, "voltage_dc": 6000.0}, {}, "pass"),
    # both DC-rated: like with like
    (4400.0, {"voltage_ac": None, "voltage_dc": 4000.0},
     {"voltage_ac": None, "voltage_dc": 4000.0}, "warn"),
    (4400.0, {"voltage_ac": None, "voltage_dc": 3000.0},
     {"voltage_ac": None, "voltage_dc": 4000.0}, "fail"),
])
def test_capacitor_peak_voltage(policy, v_peak, c_kw, o_kw, status):
    st = stress("capacitor", {"v_peak": v_peak, "v_min": -150.0})
    f = capacitor.voltage_peak(cap(**o_kw), cap(**c_kw), st, policy)
    assert f.status == status
    expect = c_kw.get("voltage_dc") or (c_kw.get("voltage_ac", 2100.0) * SQRT2)
    assert math.isclose(f.rating, expect, rel_tol=1e-9)


def test_capacitor_peak_uses_most_negative_too(policy):
    # a slot that swings further negative than positive: |v_min| is the peak (DESIGN.md 4)
    st = stress("capacitor", {"v_peak": 1000.0, "v_min": -3500.0})
    f = capacitor.voltage_peak(cap(), cap(voltage_ac=1900.0), st, policy)
    assert f.stress == 3500.0 and f.status == "fail"


@pytest.mark.parametrize("v_sw, c_kw, status", [
    # transient allowance 1.2 (common practice, no source) x sqrt(2) x 2100 V = 3563.8 V
    (3500.0, {}, "pass"),
    (3563.0, {}, "pass"),
    (5280.0, {}, "warn"),                                 # same as the original: evidence
    (5280.0, {"voltage_ac": None, "voltage_dc": 3000.0}, "fail"),   # 5.28 kV > 1.2 x 3 kV
    (5280.0, {"voltage_ac": None, "voltage_dc": 6000.0}, "pass"),   # 5.28 kV < 7.2 kV
])
def test_capacitor_switch_on_voltage(policy, v_sw, c_kw, status):
    st = stress("capacitor", {"v_peak": 2000.0}, {"v_peak": v_sw})
    assert capacitor.voltage_transient(cap(), cap(**c_kw), st, policy).status == status


@pytest.mark.parametrize("v_ac, c_vac, o_vac, freq, status", [
    (2000.0, 2100.0, 2100.0, 60.0, "pass"),
    (2100.0, 2100.0, 2100.0, 60.0, "pass"),    # at the VAC rating itself
    (2200.0, 2100.0, 2100.0, 60.0, "warn"),    # inside 1.1 x VAC: IEC 60831-1 style, limited hours
    (2310.0, 2100.0, 2100.0, 60.0, "warn"),    # 1.1 x 2100 V exactly (from memory)
    (2400.0, 2100.0, 2100.0, 60.0, "warn"),    # above 1.1 x, same as the original: evidence
    (2400.0, 2100.0, 2300.0, 60.0, "fail"),    # above 1.1 x, worse than the original
    (1000.0, 2100.0, 2100.0, 30e3, "warn"),    # a 60 Hz VAC figure says nothing at 30 kHz
])
def test_capacitor_ac_rms(policy, v_ac, c_vac, o_vac, freq, status):
    st = stress("capacitor", {"v_ac_rms": v_ac}, frequency=freq)
    f = capacitor.voltage_ac(cap(voltage_ac=o_vac), cap(voltage_ac=c_vac), st, policy)
    assert f.status == status
    # rating is the VAC rating itself in every branch; margin = rating / stress (DESIGN.md 4)
    assert f.rating == c_vac
    if freq < 1000:
        assert math.isclose(f.margin, c_vac / v_ac)


@pytest.mark.parametrize("v_ac, c_vdc, o_kw, status", [
    # dc_part_ac_fraction 0.10 (hard; common practice, no source): 6 kV DC -> 600 V AC
    (2000.0, 6000.0, {}, "fail"),     # the 6 kV DC trap in the 60 Hz oven (2.0 kV RMS of AC)
    (599.0, 6000.0, {}, "pass"),
    (601.0, 6000.0, {}, "fail"),
    (2000.0, 6000.0, {"voltage_ac": None, "voltage_dc": 6000.0}, "pass"),   # original DC too
    (2000.0, 5000.0, {"voltage_ac": None, "voltage_dc": 6000.0}, "warn"),   # ... lower DC rating
])
def test_capacitor_dc_only(policy, v_ac, c_vdc, o_kw, status):
    st = stress("capacitor", {"v_ac_rms": v_ac})
    f = capacitor.dc_only(cap(**o_kw), cap(voltage_ac=None, voltage_dc=c_vdc), st, policy)
    assert f.status == status
    assert capacitor.dc_only(cap(), cap(voltage_ac=None, voltage_dc=None), st,
                             policy).status == "fail"   # no voltage rating at all


@pytest.mark.parametrize("v_min_cont, v_max_cont, v_min_trans, orig_pol, status", [
    (-500.0, 4400.0, None, False, "fail"),   # a 60 Hz oven C1 swinging about -0.5..+4.4 kV
    (-1.5, 1000.0, None, False, "pass"),     # at the 1.5 V limit (from memory)
    (-1.6, 1000.0, None, False, "fail"),
    (10.0, 300.0, -20.0, False, "fail"),     # the switch-on transient reverses it
    (-500.0, 4400.0, None, True, "warn"),    # the original was polarised too
    (-2600.0, -1800.0, None, False, "pass"),  # one sign only (the 30 kHz C1): fit it reversed
    (-4430.0, 150.0, None, False, "fail"),   # mostly negative but crosses zero by 150 V
])
def test_capacitor_polarity(policy, v_min_cont, v_max_cont, v_min_trans, orig_pol, status):
    # reversal: the voltage goes beyond the polarity limit on both sides (common practice,
    # no source: a polarised part takes one sign only, fitted either way round)
    trans = {"v_min": v_min_trans, "v_max": 0.0} if v_min_trans is not None else {}
    st = stress("capacitor", {"v_min": v_min_cont, "v_max": v_max_cont}, trans)
    f = capacitor.polarity(cap(polarized=orig_pol), cap(polarized=True), st, policy)
    assert f.status == status
    assert capacitor.polarity(cap(), cap(polarized=False), st, policy).status == "pass"


@pytest.mark.parametrize("i_rms, c_rip, o_rip, freq, status", [
    (1.2, 0.6, 2.0, 30e3, "fail"),     # demo trap TSL-06KS-10NJ: 1.2 A RMS at 30 kHz vs 0.6 A
    (1.2, 2.0, 2.0, 30e3, "pass"),
    (2.5, 2.0, 2.0, 30e3, "warn"),     # above the rating, as good as the original: evidence
    (2.5, 1.5, 2.0, 30e3, "fail"),
    (0.9, None, None, 60.0, "pass"),   # none stated where the original had none, at 60 Hz
    (1.2, None, 2.0, 30e3, "warn"),    # the original had one; the candidate states none
])
def test_capacitor_ripple(policy, i_rms, c_rip, o_rip, freq, status):
    st = stress("capacitor", {"i_rms": i_rms}, frequency=freq)
    f = capacitor.ripple(cap(ripple_current=o_rip), cap(ripple_current=c_rip), st, policy)
    assert f.status == status


# t = R C ln(V0/Vsafe) (exponential discharge, any circuits textbook; REFERENCES.md):
# 10 Mohm, 1 uF, 2828 V -> 50 V: 40.4 s. Policy: 50 V safe, 60 s (common practice, no source).
@pytest.mark.parametrize("own, external, t_expect, status", [
    (10e6, None, 40.4, "pass"),
    (None, 10e6, 40.4, "pass"),          # the board's bleeder stays when the part has none
    (10e6, 10e6, 20.2, "pass"),          # in parallel: 5 Mohm
    (20e6, None, 80.7, "warn"),          # 2 x 40.35 s > 60 s
])
def test_capacitor_bleeder_discharge_time(policy, own, external, t_expect, status):
    st = stress("capacitor", {"v_peak": 2828.0}, external_bleeder=external)
    f = capacitor.bleeder(cap(), cap(capacitance=1e-6, bleeder=own), st, policy)
    assert f.status == status
    assert math.isclose(f.stress, t_expect, rel_tol=2e-3)
    assert "short" in f.message   # bleeders fail open: the caution is in the finding


def test_capacitor_without_bleeder_gets_the_resistor_it_needs(policy):
    st = stress("capacitor", {"v_peak": 2828.0, "v_mean": 1414.0, "v_ac_rms": 1000.0})
    f = capacitor.bleeder(cap(), cap(capacitance=1e-6, bleeder=None), st, policy)
    assert f.status == "warn"
    # R = t / (C ln(V0/Vsafe)) = 60 / (1e-6 x ln(2828/50)) = 14.87 Mohm (same closed form)
    assert "14.9 MΩ" in f.message
    # its dissipation (1414^2 + 1000^2) / 14.87e6 = 0.2017 W; asks for twice that, 0.403 W
    assert "202 mW" in f.message and "403 mW" in f.message


@pytest.mark.parametrize("temp_max, orig_temp, status", [
    # ambient 45 degC; NASA EEE-INST-002: rated maximum at least 10 degC above it
    (85.0, 85.0, "pass"),
    (55.0, 85.0, "pass"),        # exactly ambient + 10
    (50.0, 85.0, "warn"),        # above ambient, inside the margin
    (40.0, 85.0, "fail"),        # below the ambient, worse than the original
    (40.0, 40.0, "warn"),        # below the ambient, like the original: evidence
    (None, None, "pass"),
    (None, 85.0, "warn"),
])
def test_capacitor_temperature(policy, temp_max, orig_temp, status):
    st = stress("capacitor", ambient=45.0)
    f = capacitor.temperature(cap(temp_max=orig_temp), cap(temp_max=temp_max), st, policy)
    assert f.status == status


@pytest.mark.parametrize("change, status", [
    (None, "pass"), (0.04, "pass"), (-0.05, "pass"), (0.068, "warn"), (-0.092, "warn"),
])   # policy load_current_change 5 % (common practice, no source)
def test_capacitor_load_current_change(policy, change, status):
    st = stress("capacitor", load_change=change)
    assert capacitor.load_current(cap(), cap(), st, policy).status == status


@pytest.mark.parametrize("changes, status", [
    ({}, "pass"), ({"D1": {"i_avg": 0.05}}, "pass"), ({"D1": {"i_avg": 0.10}}, "pass"),
    ({"D1": {"i_avg": 0.05}, "F1": {"i_rms": 0.12}}, "warn"),
])   # policy stress_change 10 % (common practice, no source)
def test_capacitor_other_slots(policy, changes, status):
    st = stress("capacitor", other_changes=changes)
    assert capacitor.other_slots(cap(), cap(), st, policy).status == status


# ---------------------------------------------------------------- diode
# Clamp doubler no-load PIV = 2 Vpk = 2 sqrt(2) x 2100 V = 5939.7 V (closed form, REFERENCES.md)
PIV_60HZ = 2 * SQRT2 * 2100.0


@pytest.mark.parametrize("v_rev, c_vrrm, o_vrrm, status", [
    (PIV_60HZ, 12e3, 12e3, "pass"),       # 0.495 of VRRM, inside NASA's 0.70 (from memory)
    (8400.0, 12e3, 12e3, "pass"),         # exactly 0.70 x 12 kV
    (8500.0, 12e3, 12e3, "warn"),         # above 0.70 x VRRM
    (PIV_60HZ, 5e3, 12e3, "fail"),        # the 5 kV trap: below the no-load peak
    (PIV_60HZ * 1.1, 6e3, 12e3, "fail"),  # the 6 kV trap at +10 % line (6.53 kV)
    (13e3, 12e3, 12e3, "warn"),           # above VRRM but as good as the original: evidence
    (PIV_60HZ, None, 12e3, "fail"),       # no VRRM in the catalog
])
def test_diode_vrrm(policy, v_rev, c_vrrm, o_vrrm, status):
    st = stress("diode", {"v_reverse_peak": v_rev})
    f = diode.vrrm(dio(vrrm=o_vrrm), dio(vrrm=c_vrrm), st, policy)
    assert f.status == status
    assert "no load" in f.message   # the state that set the stress is named


@pytest.mark.parametrize("v_sw, c_vrrm, status", [
    (8200.0, 6e3, "fail"),      # switch-on ring 8.2 kV > 1.2 x 6 kV (common practice, no source)
    (7200.0, 6e3, "pass"),      # exactly 1.2 x 6 kV
    (8200.0, 12e3, "pass"),
])
def test_diode_switch_on_reverse(policy, v_sw, c_vrrm, status):
    st = stress("diode", {"v_reverse_peak": 5000.0}, {"v_reverse_peak": v_sw})
    assert diode.vrrm_switch_on(dio(), dio(vrrm=c_vrrm), st, policy).status == status


@pytest.mark.parametrize("i_avg, c_if, o_if, status", [
    # diode_if_margin 0.80 (common practice, no source; NASA 0.50 and NAVSEA 0.60 are stricter)
    (0.30, 0.55, 0.55, "pass"),
    (0.44, 0.55, 0.55, "pass"),     # exactly 0.8 x 0.55 A
    (0.50, 0.55, 0.55, "warn"),
    (0.60, 0.55, 0.55, "warn"),     # above IF(AV), as good as the original
    (0.40, 0.35, 0.55, "fail"),     # above a lower IF(AV)
    (0.30, None, 0.55, "fail"),
])
def test_diode_forward_current(policy, i_avg, c_if, o_if, status):
    st = stress("diode", {"i_avg": i_avg})
    assert diode.forward_current(dio(if_avg=o_if), dio(if_avg=c_if), st, policy).status == status


def test_ifsm_scaling_keeps_i2_sqrt_t():
    # I^2 sqrt(t) constant (REFERENCES.md, from memory): a pulse a quarter as wide may carry
    # 4^(1/4) = 1.4142 x IFSM; twice as wide, 2^(-1/4) = 0.8409 x IFSM
    assert math.isclose(diode.allowed_surge(30.0, 8.3e-3 / 4, 8.3e-3), 30.0 * SQRT2)
    assert math.isclose(diode.allowed_surge(30.0, 16.6e-3, 8.3e-3), 30.0 * 2 ** -0.25)
    for w in (1e-4, 1e-3, 5e-3, 8.3e-3, 0.02):
        i = diode.allowed_surge(30.0, w, 8.3e-3)
        assert math.isclose(i * i * math.sqrt(w), 900.0 * math.sqrt(8.3e-3))


def test_half_sine_equivalent_peak():
    # I^2 t of a half-sine of peak Ipk and width t = Ipk^2 t / 2 (integral of sin^2)
    assert math.isclose(diode.equivalent_peak(20.0 ** 2 * 8.3e-3 / 2, 8.3e-3), 20.0)


@pytest.mark.parametrize("i_pk, width, c_ifsm, o_ifsm, status", [
    # IFSM 30 A at 8.3 ms (policy ifsm_half_period), surge margin 0.50 (NASA, from memory)
    (15.0, 8.3e-3, 30.0, 30.0, "pass"),          # 0.50 x 30 A exactly
    (16.0, 8.3e-3, 30.0, 30.0, "warn"),
    (21.2, 8.3e-3 / 4, 30.0, 30.0, "pass"),      # 0.5 x 42.43 A allowed for a quarter width
    (22.0, 8.3e-3 / 4, 30.0, 30.0, "warn"),
    (35.0, 8.3e-3, 30.0, 30.0, "warn"),          # above IFSM, as good as the original
    (35.0, 8.3e-3, 20.0, 30.0, "fail"),          # above a lower IFSM
    (10.0, 8.3e-3, None, 30.0, "warn"),          # no IFSM in the catalog: not essential
])
def test_diode_surge(policy, i_pk, width, c_ifsm, o_ifsm, status):
    i2t = i_pk ** 2 * width / 2.0
    st = stress("diode", {"i_avg": 0.3}, {"i2t_surge": i2t, "surge_s": width})
    f = diode.surge(dio(ifsm=o_ifsm), dio(ifsm=c_ifsm), st, policy)
    assert f.status == status
    assert math.isclose(f.stress, i_pk, rel_tol=1e-9)


@pytest.mark.parametrize("trr, o_trr, freq, status", [
    # trr_fraction 0.02 (hard; common practice, no source); 30 kHz: 33.3 us period, 667 ns limit
    (3e-6, 100e-9, 30e3, "fail"),     # demo trap ORV-10K50S: 9 % of the period
    (500e-9, 100e-9, 30e3, "pass"),   # QX16500F: 1.5 % of the period
    (666e-9, 100e-9, 30e3, "pass"),   # just under 0.02 / 30 kHz = 666.7 ns
    (700e-9, 100e-9, 30e3, "fail"),
    (3e-6, 3e-6, 30e3, "warn"),       # no slower than the original
    (None, 100e-9, 30e3, "fail"),     # not stated where the original's was
    (None, None, 30e3, "warn"),
    (None, None, 60.0, "pass"),       # at 60 Hz any rectifier recovers (common practice)
    (3e-6, None, 60.0, "pass"),       # 3 us is 0.02 % of 16.7 ms
])
def test_diode_trr(policy, trr, o_trr, freq, status):
    st = stress("diode", {"i_peak": 2.0, "v_reverse_peak": 4300.0}, frequency=freq)
    f = diode.recovery(dio(trr=o_trr), dio(trr=trr), st, policy)
    assert f.status == status


def test_diode_recovery_loss_triangle_model(policy):
    # Qrr ~ IF trr / 2 = 2 A x 100 ns / 2 = 0.1 uC; P ~ Qrr V_R f = 0.1 uC x 4.3 kV x 30 kHz
    # = 12.9 W (Erickson & Maksimovic triangle model, REFERENCES.md)
    st = stress("diode", {"i_peak": 2.0, "v_reverse_peak": 4300.0}, frequency=30e3)
    f = diode.recovery(dio(trr=100e-9), dio(trr=100e-9), st, policy)
    assert "0.1 µC" in f.message and "12.9 W" in f.message


# ---------------------------------------------------------------- fuse
def test_fuse_rerating():
    # 0.5 %/degC above 25 degC (MIL-STD-975 / EEE-INST-002, secondary source): 45 degC -> 90 %
    pol = load_policy()
    assert math.isclose(fuse.rerated(1.0, 45.0, pol), 0.90)
    assert math.isclose(fuse.rerated(2.0, 20.0, pol), 2.0)


@pytest.mark.parametrize("c_i, status", [
    (1.0, "pass"),
    (1.25, "fail"),     # higher is never a valid substitute (MIL-PRF-23419 steps; DESIGN.md)
    (1.0000001, "pass"),
    (1.01, "fail"),
    (0.8, "warn"),      # lower: nuisance margin
    (None, "fail"),
])
def test_fuse_rated_current(policy, c_i, status):
    st = stress("fuse", {"i_rms": 0.8}, ambient=45.0)
    f = fuse.current(fus(), fus(rated_current=c_i), st, policy)
    assert f.status == status


def test_fuse_lower_current_nuisance_margin(policy):
    # 0.8 A rerated at 45 degC: 0.72 A (0.5 %/degC); 0.72 / 0.94 A RMS = 0.766 < 1.25
    st = stress("fuse", {"i_rms": 0.94}, ambient=45.0)
    f = fuse.current(fus(), fus(rated_current=0.8), st, policy)
    assert math.isclose(f.margin, 0.72 / 0.94, rel_tol=1e-9)
    assert "nuisance" in f.message


@pytest.mark.parametrize("o_kw, c_kw, status", [
    # IEC 60127-1 letters FF F M T TT; UL 248-14 differs in kind (REFERENCES.md fuses)
    ({"fuse_standard": "IEC 60127", "characteristic": "T"},
     {"fuse_standard": "IEC 60127", "characteristic": "T"}, "pass"),
    ({"fuse_standard": "IEC 60127", "characteristic": "T"},
     {"fuse_standard": "IEC 60127", "characteristic": "F"}, "fail"),
    ({"fuse_standard": "IEC 60127", "characteristic": "T"},
     {"fuse_standard": "IEC 60127", "characteristic": "TT"}, "fail"),
    ({"fuse_standard": "IEC 60127", "characteristic": "T"},
     {"fuse_standard": "UL 248-14", "characteristic": None}, "fail"),
    ({"fuse_standard": "HV"}, {"fuse_standard": "UL 248-14"}, "fail"),
    ({"fuse_standard": "HV"}, {"fuse_standard": "IEC 60127", "characteristic": "F"}, "fail"),
    ({"fuse_standard": "HV"}, {"fuse_standard": "HV"}, "pass"),
    ({"fuse_standard": "HV"}, {"fuse_standard": None}, "warn"),
])
def test_fuse_class_and_standard(policy, o_kw, c_kw, status):
    f = fuse.time_current_class(fus(**o_kw), fus(**c_kw), stress("fuse"), policy)
    assert f.status == status


@pytest.mark.parametrize("v_rms, v_pk, c_kw, status_ac, status_dc", [
    # a mains fuse must stand 2.2 kV RMS / 3.8 kV peak once open (demo README, 60 Hz high line)
    (2200.0, 3800.0, {"voltage": 250.0}, "fail", None),
    (2200.0, 3800.0, {"voltage": 5000.0}, "pass", None),
    (2200.0, 3800.0, {"voltage": 3000.0}, "pass", None),          # 3 kV RMS > 2.2 kV RMS
    (2200.0, 3800.0, {"voltage": 5000.0, "voltage_dc_fuse": 3000.0}, "pass", "fail"),
    (2200.0, 3800.0, {"voltage": 5000.0, "voltage_dc_fuse": 5000.0}, "pass", "pass"),
])
def test_fuse_voltage(policy, v_rms, v_pk, c_kw, status_ac, status_dc):
    st = stress("fuse", {"v_open_rms": v_rms, "v_open_peak": v_pk})
    out = fuse.voltage(fus(), fus(**c_kw), st, policy)
    assert out[0].rule == "fuse_voltage_ac" and out[0].status == status_ac
    if status_dc is None:
        assert len(out) == 1
    else:
        assert out[1].rule == "fuse_voltage_dc" and out[1].status == status_dc


@pytest.mark.parametrize("b0, bc, status", [
    # IEC 60127-2 letters: L 35 A (or 10 In), E 150 A, H 1500 A (secondary source)
    (1500.0, 35.0, "fail"), (35.0, 1500.0, "pass"), (150.0, 150.0, "pass"), (35.0, None, "warn"),
])
def test_fuse_breaking_capacity(policy, b0, bc, status):
    f = fuse.breaking(fus(breaking_capacity=b0), fus(breaking_capacity=bc), stress("fuse"),
                      policy)
    assert f.status == status


@pytest.mark.parametrize("i_rms, c_i, ambient, status", [
    # fuse_derating 0.75 of the ambient-rerated rating (common practice, no source)
    (0.75, 1.0, 25.0, "pass"),
    (0.76, 1.0, 25.0, "warn"),
    (0.675, 1.0, 45.0, "pass"),    # 0.75 x 0.90 A
    (0.94, 1.0, 45.0, "warn"),     # above the rerated 0.9 A, same as the original: evidence
    (0.94, 0.8, 45.0, "fail"),     # above a lower rerated 0.72 A
])
def test_fuse_continuous(policy, i_rms, c_i, ambient, status):
    st = stress("fuse", {"i_rms": i_rms}, ambient=ambient)
    assert fuse.continuous(fus(), fus(rated_current=c_i), st, policy).status == status


@pytest.mark.parametrize("surge, c_i2t, o_i2t, status", [
    # fuse_i2t_margin 2 (common practice, no source)
    (1.1, 2.2, 10.0, "pass"),     # exactly half the melting I2t
    (1.4, 2.2, 10.0, "warn"),     # demo README: F 2 A (2.2 A2s) against a 1.4 A2s surge
    (3.0, 2.2, 10.0, "fail"),     # the surge would melt it; worse than the original
    (3.0, 2.2, 2.2, "warn"),      # ... as good as the original: evidence
    (1.0, None, 10.0, "warn"),    # no I2t in the catalog: not essential
])
def test_fuse_i2t(policy, surge, c_i2t, o_i2t, status):
    st = stress("fuse", {"i_rms": 0.5}, {"i2t_surge": surge})
    assert fuse.surge_i2t(fus(i2t=o_i2t), fus(i2t=c_i2t), st, policy).status == status


# ---------------------------------------------------------------- bleeder resistor
@pytest.mark.parametrize("r, vmax, power, statuses", [
    # 10 Mohm, 1 uF, 2828 V -> 50 V in 40.4 s (REFERENCES.md); P = V_rms^2 / R;
    # power rating at least twice the dissipation (common practice, no source)
    (10e6, 5000.0, 1.0, ("pass", "pass", "pass")),     # 0.4 W into 1 W
    (10e6, 2000.0, 0.5, ("pass", "fail", "warn")),     # 2 kV < 2828 V; 0.4 W into 0.5 W
    (20e6, 5000.0, 0.3, ("fail", "pass", "warn")),     # 80.7 s > 60 s; 0.2 W into 0.3 W
    (5e6, 5000.0, 0.5, ("pass", "pass", "fail")),      # 0.8 W into 0.5 W
])
def test_bleeder_resistor(policy, r, vmax, power, statuses):
    part = PartRecord(kind="resistor", maker="T", part_number="R", resistance=r,
                      voltage_max=vmax, power=power)
    out = {f.rule: f for f in resistor.bleeder_findings(part, capacitance=1e-6, v_peak=2828.0,
                                                        v_rms=2000.0, policy=policy)}
    t = out["bleeder_discharge"]
    assert math.isclose(t.stress, 40.35 * r / 10e6, rel_tol=2e-3)
    assert (t.status, out["bleeder_voltage"].status, out["bleeder_power"].status) == statuses


# ---------------------------------------------------------------- engine and context
def test_wrong_kind_rejected(policy):
    verdict, fs = evaluate(cap(), dio(), stress("capacitor"), policy)
    assert verdict == "reject" and fs[0].rule == "kind"


def test_evaluate_runs_every_rule_of_the_kind(policy):
    st = stress("fuse", {"i_rms": 0.5, "v_open_rms": 2200.0, "v_open_peak": 3100.0},
                {"i2t_surge": 0.5})
    part = fus(i2t=5.0, breaking_capacity=1500.0)
    verdict, fs = evaluate(part, part, st, policy)
    rules = {f.rule for f in fs}
    assert {"fuse_current", "fuse_class", "fuse_voltage_ac", "fuse_breaking", "fuse_continuous",
            "fuse_i2t", "fuse_format"} <= rules
    assert verdict == "accept"


def test_slot_stress_split_continuous_and_transient():
    # DESIGN.md 4: continuous = worst over loaded / no_load / high_line; switch_on is transient
    result = {
        "slots": {"D1": {"role": "diode"}},
        "by_state": {
            "loaded": {"slots": {"D1": {"v_reverse_peak": 4190.0, "i_avg": 0.26}},
                       "load": {"i_mean": 0.26}},
            "no_load": {"slots": {"D1": {"v_reverse_peak": 5900.0, "i_avg": 0.0}}},
            "high_line": {"slots": {"D1": {"v_reverse_peak": 6500.0, "i_avg": 0.30}}},
            "switch_on": {"slots": {"D1": {"v_reverse_peak": 8200.0, "i2t_surge": 3.0}}},
        },
    }
    st = slot_stress(result, "D1", frequency=60.0, ambient=45.0)
    assert st.continuous["v_reverse_peak"] == 6500.0 and st.states["v_reverse_peak"] == "high_line"
    assert st.continuous["i_avg"] == 0.30
    assert st.transient == {"v_reverse_peak": 8200.0, "i2t_surge": 3.0}
    assert st.load_mean_current == 0.26
    vals, _ = worst_over({"a": {"slots": {"C1": {"v_min": -5.0}}},
                          "b": {"slots": {"C1": {"v_min": -50.0}}}}, "slots", "C1", ("a", "b"))
    assert vals["v_min"] == -50.0   # v_min: the most negative
