"""Property tests of the rules engine over generated parts and stresses (hypothesis).

The ORACLE is written here, from DESIGN.md and the policy's numbers, not from the engine's own
functions: for each rating a candidate must hold against a stress, the test computes the pair
(stress, rating) directly. Properties (issue 4, acceptance):

1. no accepted or cautioned candidate has a stress above a rating where it is worse than the
   original ("what worked is evidence": only where it is at least as good may it pass above);
2. raising a candidate's voltage or current rating never worsens its verdict (a fuse's rated
   current excepted: that is property 3);
3. a fuse of higher rated current than the original is never accepted nor cautioned;
4. evaluate(X, X) is never a reject (``check X X``), for any stress.
"""

from __future__ import annotations

import dataclasses
import math

from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from partsmatch.catalog.records import PartRecord
from partsmatch.rules.context import SlotStress
from partsmatch.rules.engine import evaluate
from partsmatch.rules.policy import load_policy

POLICY = load_policy()
SQRT2 = math.sqrt(2.0)
RANK = {"accept": 0, "caution": 1, "reject": 2}
SETTINGS = settings(derandomize=True, max_examples=120, deadline=None,
                    suppress_health_check=[HealthCheck.too_slow])

# the policy values the oracle needs, read by name (the oracle's comparisons are its own)
VAC_ALLOW = POLICY["cap_vac_allowance"]        # 1.10, IEC 60831-1 style (from memory)
TRANSIENT = POLICY["transient_allowance"]      # 1.2, common practice, no source
T_HALF = POLICY["ifsm_half_period"]            # 8.3 ms IFSM half-sine (from memory)
RERATE = POLICY["fuse_rerate_per_degc"] / 100  # 0.5 %/degC above 25 degC (MIL-STD-975, C2)


def pos(lo, hi):
    return st.floats(min_value=lo, max_value=hi, allow_nan=False, allow_infinity=False)


# ---------------------------------------------------------------- generated parts
@st.composite
def capacitors(draw, ac: bool | None = None):
    ac = draw(st.booleans()) if ac is None else ac
    tol = draw(st.sampled_from([1.0, 2.0, 3.0, 5.0, 10.0, 20.0]))
    return PartRecord(
        kind="capacitor", maker="Gen", part_number=f"C{draw(st.integers(0, 10**6))}",
        capacitance=draw(pos(1e-9, 1e-3)), tolerance_minus=tol, tolerance_plus=tol,
        voltage_ac=draw(pos(100.0, 5000.0)) if ac else None,
        voltage_dc=None if ac else draw(pos(10.0, 20000.0)),
        rated_frequency=draw(st.sampled_from([50.0, 60.0])) if ac else None,
        ripple_current=draw(st.one_of(st.none(), pos(0.01, 10.0))),
        polarized=draw(st.booleans()) if not ac else False,
        temp_max=draw(pos(60.0, 130.0)), bleeder=draw(st.one_of(st.none(), pos(1e5, 1e8))))


@st.composite
def diodes(draw):
    return PartRecord(
        kind="diode", maker="Gen", part_number=f"D{draw(st.integers(0, 10**6))}",
        vrrm=draw(pos(50.0, 30000.0)), if_avg=draw(pos(0.05, 10.0)), ifsm=draw(pos(1.0, 300.0)),
        trr=draw(st.one_of(st.none(), pos(20e-9, 5e-6))), vf=draw(pos(0.7, 20.0)))


@st.composite
def fuses(draw):
    std = draw(st.sampled_from(["IEC 60127", "UL 248-14", "HV"]))
    return PartRecord(
        kind="fuse", maker="Gen", part_number=f"F{draw(st.integers(0, 10**6))}",
        rated_current=draw(st.sampled_from([0.5, 0.8, 1.0, 1.25, 2.0, 2.5, 3.15])),
        voltage=draw(pos(125.0, 10000.0)),
        voltage_dc_fuse=draw(st.one_of(st.none(), pos(50.0, 10000.0))),
        breaking_capacity=draw(st.one_of(st.none(), st.sampled_from([35.0, 150.0, 1500.0]))),
        characteristic=draw(st.sampled_from(["FF", "F", "M", "T", "TT"]))
        if std == "IEC 60127" else None,
        fuse_standard=std, i2t=draw(st.one_of(st.none(), pos(0.01, 100.0))))


def near(draw, part: PartRecord, fields: tuple[str, ...]) -> PartRecord:
    """A candidate like ``part`` with some ratings scaled (worse or better)."""
    changes = {}
    for f in fields:
        v = getattr(part, f)
        if v is not None and draw(st.booleans()):
            changes[f] = v * draw(st.sampled_from([0.5, 0.8, 0.95, 1.0, 1.05, 1.5, 3.0]))
    return dataclasses.replace(part, part_number=part.part_number + "-X", **changes)


# ---------------------------------------------------------------- generated stress
@st.composite
def cap_stress(draw, capacitance=None):
    def block():
        v_peak = draw(pos(0.0, 30000.0))
        return {"v_peak": v_peak, "v_min": -draw(pos(0.0, v_peak + 1.0)),
                "v_mean": draw(pos(0.0, v_peak + 1.0)), "v_ac_rms": draw(pos(0.0, 10000.0)),
                "i_rms": draw(pos(0.0, 20.0))}
    return SlotStress(slot="C1", role="capacitor",
                      frequency=draw(st.sampled_from([50.0, 60.0, 20e3, 30e3])),
                      ambient=draw(pos(20.0, 70.0)), continuous=block(), transient=block(),
                      states={}, capacitance=capacitance,
                      load_change=draw(st.one_of(st.none(), pos(-0.3, 0.3))))


@st.composite
def diode_stress(draw):
    return SlotStress(
        slot="D1", role="diode", frequency=draw(st.sampled_from([50.0, 60.0, 20e3, 30e3])),
        ambient=draw(pos(20.0, 70.0)),
        continuous={"v_reverse_peak": draw(pos(0.0, 40000.0)), "i_avg": draw(pos(0.0, 15.0)),
                    "i_peak": draw(pos(0.0, 100.0)), "i_rms": draw(pos(0.0, 20.0))},
        transient={"v_reverse_peak": draw(pos(0.0, 50000.0)),
                   "i2t_surge": draw(pos(1e-4, 100.0)), "surge_s": draw(pos(1e-4, 0.05))},
        states={})


@st.composite
def fuse_stress(draw):
    v_rms = draw(pos(0.0, 8000.0))
    return SlotStress(
        slot="F1", role="fuse", frequency=draw(st.sampled_from([50.0, 60.0])),
        ambient=draw(pos(20.0, 70.0)),
        continuous={"i_rms": draw(pos(0.0, 5.0)), "v_open_rms": v_rms,
                    "v_open_peak": v_rms * draw(pos(1.0, 2.0))},
        transient={"i2t_surge": draw(pos(0.0, 50.0))}, states={})


# ---------------------------------------------------------------- the oracle
def cap_peak(p: PartRecord) -> float:
    return max(x for x in (p.voltage_dc, (p.voltage_ac or 0.0) * SQRT2) if x is not None)


def oracle_pairs(role: str, o: PartRecord, c: PartRecord, s: SlotStress):
    """(what, stress, candidate rating, original rating) for each rating against its stress,
    computed here from DESIGN.md and REFERENCES.md (not with the engine's functions)."""
    k, t = s.continuous, s.transient
    if role == "capacitor":
        peak = max(abs(k["v_peak"]), abs(k["v_min"]))
        peak_sw = max(abs(t["v_peak"]), abs(t["v_min"]))
        yield "peak", peak, cap_peak(c), cap_peak(o)                  # Vpk = sqrt(2) Vrms
        yield "switch-on", peak_sw, TRANSIENT * cap_peak(c), TRANSIENT * cap_peak(o)
        if c.voltage_ac and o.voltage_ac and s.frequency <= 2 * (c.rated_frequency or 60.0):
            yield "vac", k["v_ac_rms"], VAC_ALLOW * c.voltage_ac, VAC_ALLOW * o.voltage_ac
        if c.ripple_current and o.ripple_current:
            yield "ripple", k["i_rms"], c.ripple_current, o.ripple_current
    elif role == "diode":
        yield "vrrm", k["v_reverse_peak"], c.vrrm, o.vrrm
        yield "vrrm switch-on", t["v_reverse_peak"], TRANSIENT * c.vrrm, TRANSIENT * o.vrrm
        yield "if(av)", k["i_avg"], c.if_avg, o.if_avg
        # IFSM at 8.3 ms scaled by I^2 sqrt(t) = const (from memory); the surge as the peak of a
        # half-sine of the same I^2 t (I^2 t = Ipk^2 t / 2)
        w = t["surge_s"]
        i_eq = math.sqrt(2.0 * t["i2t_surge"] / w)
        scale = (T_HALF / w) ** 0.25
        yield "ifsm", i_eq, c.ifsm * scale, o.ifsm * scale
    else:
        derate = max(0.0, 1.0 - RERATE * max(0.0, s.ambient - 25.0))
        yield "current", k["i_rms"], c.rated_current * derate, o.rated_current * derate
        yield "voltage", k["v_open_rms"], c.voltage, o.voltage
        if c.voltage_dc_fuse and o.voltage_dc_fuse:
            yield "voltage dc", k["v_open_peak"], c.voltage_dc_fuse, o.voltage_dc_fuse
        if c.i2t and o.i2t:
            yield "i2t", t["i2t_surge"], c.i2t, o.i2t


def assert_no_unsafe_pass(role, o, c, s):
    verdict, findings = evaluate(o, c, s, POLICY)
    if verdict == "reject":
        return
    for what, stress, rating, original in oracle_pairs(role, o, c, s):
        above = stress > rating * (1 + 1e-9)
        worse = rating < original * (1 - 1e-9)
        assert not (above and worse), (
            f"{verdict} although {what}: stress {stress:g} > rating {rating:g} and worse than "
            f"the original's {original:g}; findings "
            f"{[(f.rule, f.status) for f in findings if f.status != 'pass']}")


# ---------------------------------------------------------------- 1. no unsafe pass
@SETTINGS
@given(data=st.data())
def test_capacitor_worse_and_overstressed_is_rejected(data):
    ac = data.draw(st.booleans())
    o = data.draw(capacitors(ac=ac))
    c = near(data.draw, o, ("voltage_ac", "voltage_dc", "ripple_current", "capacitance"))
    s = data.draw(cap_stress(capacitance=o.capacitance))
    assert_no_unsafe_pass("capacitor", o, c, s)


@SETTINGS
@given(data=st.data())
def test_capacitor_kinds_mixed_no_evidence_across_ac_and_dc(data):
    """An AC-rated original and a DC-only candidate (or the reverse) share no rating: the DC
    figure is no evidence for the AC one (DESIGN.md 3), so any peak above the candidate's own
    rating rejects it."""
    o = data.draw(capacitors(ac=True))
    c = dataclasses.replace(data.draw(capacitors(ac=False)), capacitance=o.capacitance,
                            polarized=False)
    s = data.draw(cap_stress(capacitance=o.capacitance))
    # keep the AC component small (<= 0.1 x VDC, the policy's DC-part limit) so that only the
    # peak rule can stop the part: the case where a DC figure could pass as AC evidence
    cont = dict(s.continuous, v_ac_rms=data.draw(pos(0.0, 0.1 * c.voltage_dc)))
    s = dataclasses.replace(s, continuous=cont)
    verdict, _ = evaluate(o, c, s, POLICY)
    peak = max(abs(s.continuous["v_peak"]), abs(s.continuous["v_min"]))
    if peak > c.voltage_dc * (1 + 1e-9):
        assert verdict == "reject"


@SETTINGS
@given(data=st.data())
def test_diode_worse_and_overstressed_is_rejected(data):
    o = data.draw(diodes())
    c = near(data.draw, o, ("vrrm", "if_avg", "ifsm"))
    assert_no_unsafe_pass("diode", o, c, data.draw(diode_stress()))


@SETTINGS
@given(data=st.data())
def test_fuse_worse_and_overstressed_is_rejected(data):
    o = data.draw(fuses())
    c = near(data.draw, o, ("voltage", "voltage_dc_fuse", "i2t", "rated_current"))
    assert_no_unsafe_pass("fuse", o, c, data.draw(fuse_stress()))


# ---------------------------------------------------------------- 2. monotone in ratings
RAISE = {
    "capacitor": ("voltage_ac", "voltage_dc", "ripple_current"),
    "diode": ("vrrm", "if_avg", "ifsm"),
    "fuse": ("voltage", "voltage_dc_fuse", "breaking_capacity", "i2t"),
}


def raised(draw, part: PartRecord, role: str) -> PartRecord:
    changes = {}
    for f in RAISE[role]:
        v = getattr(part, f)
        if v is not None and draw(st.booleans()):
            changes[f] = v * draw(st.sampled_from([1.0, 1.01, 1.2, 2.0, 10.0]))
    return dataclasses.replace(part, **changes)


@settings(SETTINGS, max_examples=300)
@given(data=st.data(), role=st.sampled_from(["capacitor", "diode", "fuse"]))
def test_raising_a_rating_never_worsens_the_verdict(data, role):
    gen = {"capacitor": capacitors, "diode": diodes, "fuse": fuses}[role]
    o = data.draw(gen())
    # a candidate like the original (so that its verdict is often not already a reject), or
    # one drawn on its own
    c = near(data.draw, o, RAISE[role]) if data.draw(st.booleans()) else data.draw(gen())
    if role == "capacitor":
        s = data.draw(cap_stress(capacitance=o.capacitance))
        c = dataclasses.replace(c, capacitance=o.capacitance)
    else:
        s = data.draw(diode_stress() if role == "diode" else fuse_stress())
    v1, _ = evaluate(o, c, s, POLICY)
    v2, f2 = evaluate(o, raised(data.draw, c, role), s, POLICY)
    assert RANK[v2] <= RANK[v1], (v1, v2, [(f.rule, f.status) for f in f2 if f.status != "pass"])


# ---------------------------------------------------------------- 3. fuse current higher
@SETTINGS
@given(o=fuses(), s=fuse_stress(), factor=pos(1.0001, 4.0), data=st.data())
def test_higher_rated_fuse_is_never_accepted(o, s, factor, data):
    # a higher rating is never a valid substitute (MIL-PRF-23419 selection; DESIGN.md 3), even
    # with every other rating better
    c = dataclasses.replace(raised(data.draw, o, "fuse"), rated_current=o.rated_current * factor)
    verdict, findings = evaluate(o, c, s, POLICY)
    assert verdict == "reject"
    assert any(f.rule == "fuse_current" and f.status == "fail" for f in findings)


# ---------------------------------------------------------------- 4. check X X
@SETTINGS
@given(data=st.data(), role=st.sampled_from(["capacitor", "diode", "fuse"]))
def test_a_part_against_itself_is_never_rejected(data, role):
    if role == "capacitor":
        x = data.draw(capacitors())
        s = data.draw(cap_stress(capacitance=x.capacitance))
    elif role == "diode":
        x, s = data.draw(diodes()), data.draw(diode_stress())
    else:
        x, s = data.draw(fuses()), data.draw(fuse_stress())
    verdict, findings = evaluate(x, x, s, POLICY)
    assert verdict != "reject", [(f.rule, f.message) for f in findings if f.status == "fail"]
