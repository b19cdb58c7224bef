"""Capacitor rules: one small pure function per rule, ``(original, candidate, stress, policy)``.

Sources of the limits are in the policy (``partsmatch policy show``); formulas:
rating peak of a VAC rating = sqrt(2) x VAC (peak of a sine); discharge t = R C ln(V0/Vsafe)
(exponential discharge, any circuits textbook); stored energy W = C V^2 / 2.
"""

from __future__ import annotations

import math

from partsmatch.catalog.records import PartRecord
from partsmatch.rules.context import SlotStress
from partsmatch.rules.findings import Finding, fq, mismatch, rated
from partsmatch.rules.policy import Policy

SQRT2 = math.sqrt(2.0)


def _peak_rating(p: PartRecord) -> float | None:
    """The rating's own peak: VDC for a DC rating, sqrt(2) x VAC for an AC rating."""
    peaks = [v for v in (p.voltage_dc, p.voltage_ac * SQRT2 if p.voltage_ac else None) if v]
    return max(peaks) if peaks else None


def _evidence_peak(orig: PartRecord, cand: PartRecord) -> float | None:
    """The original's peak rating as evidence for ``cand``: only over the kinds of rating (AC,
    DC) both parts state. A DC rating is no evidence for an AC one nor the reverse (DESIGN.md:
    VAC and VDC ratings are not interchangeable by number)."""
    peaks = []
    if orig.voltage_ac and cand.voltage_ac:
        peaks.append(orig.voltage_ac * SQRT2)
    if orig.voltage_dc and cand.voltage_dc:
        peaks.append(orig.voltage_dc)
    return max(peaks) if peaks else None


def _abs_peak(values: dict[str, float]) -> float | None:
    cands = [abs(values[k]) for k in ("v_peak", "v_min") if values.get(k) is not None]
    return max(cands) if cands else None


def capacitance(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Nominal capacitance inside the original's tolerance or the policy window (hard)."""
    basis = policy.entry("cap_window").basis
    c0 = orig.capacitance or (st.capacitance if st is not None else None)
    if cand.capacitance is None:
        return Finding("cap_capacitance", "fail", c0, None, None,
                       "capacitance: the candidate has no capacitance in the catalog", basis, "F")
    if c0 is None:
        return Finding("cap_capacitance", "warn", None, cand.capacitance, None,
                       "capacitance: the original's value is unknown", basis, "F")
    dev = (cand.capacitance / c0 - 1.0) * 100.0
    tol = (orig.tolerance_plus if dev > 0 else orig.tolerance_minus) or 0.0
    allowed = max(tol, policy["cap_window"])
    msg = (f"capacitance {fq(cand.capacitance, 'F')} is {dev:+.1f} % from the original "
           f"{fq(c0, 'F')} (allowed ±{allowed:g} %: the original's tolerance or the policy window)")
    status = "pass" if abs(dev) <= allowed + 1e-9 else "fail"
    return Finding("cap_capacitance", status, c0, cand.capacitance, None, msg, basis, "F")


def load_current(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Change of the mean load current with the candidate at its tolerance extremes."""
    basis = policy.entry("load_current_change").basis
    if st.load_change is None:
        return Finding("cap_load_current", "pass", None, None, None,
                       "load current: not re-simulated (no change of capacitance or bleeder)",
                       basis)
    pct = st.load_change * 100.0
    limit = policy["load_current_change"]
    status = "pass" if abs(pct) <= limit else "warn"
    return Finding("cap_load_current", status, abs(pct), limit, None,
                   f"mean load current changes by up to {pct:+.1f} % at the candidate's "
                   f"tolerance extremes (policy ±{limit:g} %)", basis, "%")


def other_slots(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Rise of the other slots' current stress (a larger capacitor raises diode and fuse currents)."""
    basis = policy.entry("stress_change").basis
    limit = policy["stress_change"] / 100.0
    worst = ("", "", 0.0)
    for slot, changes in st.other_changes.items():
        for key, frac in changes.items():
            if frac > worst[2]:
                worst = (slot, key, frac)
    if not worst[0]:
        return Finding("cap_other_slots", "pass", None, None, None,
                       "other slots: no current stress rises with the candidate", basis)
    status = "warn" if worst[2] > limit else "pass"
    return Finding("cap_other_slots", status, worst[2] * 100, limit * 100, None,
                   f"other slots: {worst[0]} {worst[1]} rises by {worst[2] * 100:.1f} % with "
                   f"the candidate (policy {limit * 100:g} %)", basis, "%")


def voltage_peak(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Applied peak against the rating's own peak (sqrt(2) x VAC, or VDC)."""
    return rated("cap_voltage_peak", stress=_abs_peak(st.continuous), rating=_peak_rating(cand),
                 original=_evidence_peak(orig, cand), margin_fraction=policy["cap_voltage_margin"],
                 unit="V", what="peak voltage vs the rating's peak",
                 basis=policy.entry("cap_voltage_margin").basis)


def voltage_transient(orig: PartRecord, cand: PartRecord, st: SlotStress,
                      policy: Policy) -> Finding:
    """Switch-on peak against the transient allowance times the rating's peak."""
    allowance = policy["transient_allowance"]
    rating = _peak_rating(cand)
    orig_rating = _evidence_peak(orig, cand)
    return rated("cap_voltage_switch_on", stress=_abs_peak(st.transient),
                 rating=rating * allowance if rating else None,
                 original=orig_rating * allowance if orig_rating else None,
                 margin_fraction=1.0, unit="V",
                 what=f"switch-on peak vs {allowance:g} x the rating's peak",
                 basis=policy.entry("transient_allowance").basis)


def voltage_ac(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """AC RMS component against a VAC rating at its rated frequency (110 % time-limited)."""
    basis = policy.entry("cap_vac_allowance").basis
    v_ac = st.continuous.get("v_ac_rms")
    if cand.voltage_ac is None:
        return Finding("cap_voltage_ac", "pass", v_ac, None, None,
                       "AC rating: none (a DC-rated part; see cap_dc_only)", basis, "V")
    rated_f = cand.rated_frequency or 60.0
    if st.frequency > 2.0 * rated_f:
        return Finding("cap_voltage_ac", "warn", v_ac, cand.voltage_ac, None,
                       f"the VAC rating {fq(cand.voltage_ac, 'V')} is stated at "
                       f"{fq(rated_f, 'Hz')} and says nothing at {fq(st.frequency, 'Hz')}: "
                       "rely on the peak and ripple-current ratings and the maker's data", basis,
                       "V")
    allowance = policy["cap_vac_allowance"]
    f = rated("cap_voltage_ac", stress=v_ac, rating=cand.voltage_ac * allowance,
              original=orig.voltage_ac * allowance if orig.voltage_ac else None,
              margin_fraction=1.0 / allowance, unit="V",
              what=f"AC RMS vs VAC x {allowance:g}", basis=basis)
    if f.status == "warn" and v_ac is not None and v_ac <= cand.voltage_ac * allowance:
        return Finding(f.rule, "warn", f.stress, cand.voltage_ac, cand.voltage_ac / v_ac,
                       f"AC RMS {fq(v_ac, 'V')} is above the VAC rating "
                       f"{fq(cand.voltage_ac, 'V')} (inside {allowance:g} x, which capacitor "
                       "standards allow only for limited hours a day)", basis, "V")
    if f.status == "pass":
        return Finding(f.rule, "pass", f.stress, cand.voltage_ac,
                       cand.voltage_ac / v_ac if v_ac else None,
                       f"AC RMS {fq(v_ac, 'V')} against VAC {fq(cand.voltage_ac, 'V')}", basis,
                       "V")
    # above the allowance (a warn on the original's evidence, or a fail): report against the VAC
    # rating itself like the other branches, so that rating and margin mean one thing
    return Finding(f.rule, f.status, f.stress, cand.voltage_ac,
                   cand.voltage_ac / v_ac if v_ac else None,
                   f"AC RMS {fq(v_ac, 'V')} is above {allowance:g} x the VAC rating "
                   f"{fq(cand.voltage_ac, 'V')}"
                   + (f" (original {fq(orig.voltage_ac, 'V')} AC: it worked here, so check the "
                      "circuit values before trusting the model)" if f.status == "warn"
                      else (f" (original {fq(orig.voltage_ac, 'V')} AC)" if orig.voltage_ac
                            else "")), basis, "V")


def dc_only(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """A DC-only part in a slot with a large AC component (hard), unless the original was too."""
    basis = policy.entry("dc_part_ac_fraction").basis
    if cand.voltage_ac is not None:
        return Finding("cap_dc_only", "pass", None, None, None, "AC-rated part", basis)
    if cand.voltage_dc is None:
        return Finding("cap_dc_only", "fail", None, None, None,
                       "the candidate has no voltage rating in the catalog", basis)
    v_ac = st.continuous.get("v_ac_rms") or 0.0
    limit = policy["dc_part_ac_fraction"] * cand.voltage_dc
    if v_ac <= limit:
        return Finding("cap_dc_only", "pass", v_ac, limit, limit / v_ac if v_ac else None,
                       f"DC-rated part; AC component {fq(v_ac, 'V')} is small", basis, "V")
    if orig.voltage_ac is None and orig.voltage_dc is not None:
        # what worked is evidence: the original was DC-rated in this AC service too
        as_good = cand.voltage_dc >= orig.voltage_dc
        return Finding("cap_dc_only", "pass" if as_good else "warn", v_ac, limit, limit / v_ac,
                       f"DC-rated part with {fq(v_ac, 'V')} AC RMS in the slot, as the original "
                       f"({fq(orig.voltage_dc, 'V')} DC)"
                       + ("" if as_good else ", but with a lower DC rating than the original's")
                       + ": the ripple-current and peak rules decide", basis, "V")
    return Finding("cap_dc_only", "fail", v_ac, limit, limit / v_ac,
                   f"DC-only rating {fq(cand.voltage_dc, 'V')} in a slot with "
                   f"{fq(v_ac, 'V')} AC RMS: a DC rating says nothing of AC service", basis, "V")


def polarity(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """A polarised part in a slot whose voltage reverses (hard fail).

    The voltage reverses when it goes beyond the policy limit on both sides (``v_max`` and
    ``v_min``, every state including switch-on). A slot whose voltage keeps one sign takes a
    polarised part fitted the right way round, whatever the sign in the circuit's orientation.
    """
    basis = policy.entry("polarity_reverse_limit").basis
    if not cand.polarized:
        return Finding("cap_polarity", "pass", None, None, None, "not polarised", basis)
    limit = policy["polarity_reverse_limit"]
    lows = [v for v in (st.continuous.get("v_min"), st.transient.get("v_min")) if v is not None]
    highs = [v for v in (st.continuous.get("v_max"), st.transient.get("v_max"))
             if v is not None]
    v_min = min(lows, default=0.0)
    v_max = max(highs, default=0.0)
    reverse = min(-v_min, v_max)  # how far the voltage goes against its main sign
    if reverse <= limit:
        sign = "+" if abs(v_max) >= abs(v_min) else "-"
        return Finding("cap_polarity", "pass", -reverse, -limit, None,
                       f"polarised; the slot voltage keeps one sign (fit with + to the slot's "
                       f"{'first' if sign == '+' else 'second'} terminal)", basis, "V")
    status = "warn" if orig.polarized else "fail"
    return Finding("cap_polarity", status, -reverse, -limit, None,
                   f"polarised part in a slot whose voltage reverses (from {fq(v_min, 'V')} to "
                   f"{fq(v_max, 'V')})" + (" (so was the original)" if orig.polarized else ""),
                   basis, "V")


def ripple(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """RMS current against the ripple-current rating."""
    i_rms = st.continuous.get("i_rms")
    essential = orig.ripple_current is not None or st.frequency > 1000.0
    f = rated("cap_ripple_current", stress=i_rms, rating=cand.ripple_current,
              original=orig.ripple_current, margin_fraction=policy["ripple_margin"], unit="A",
              what="RMS current vs ripple rating", basis=policy.entry("ripple_margin").basis,
              essential=False)
    if f.status == "warn" and cand.ripple_current is None and not essential:
        return Finding(f.rule, "pass", f.stress, None, None,
                       f"RMS current {fq(i_rms, 'A')}; no ripple rating stated (none needed at "
                       f"{fq(st.frequency, 'Hz')} where the original had none)", f.basis, "A")
    return f


def bleeder(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Internal bleeder (or the board's) discharges to the safe voltage in time; else say which
    external bleeder would, with its voltage and power stress."""
    basis = policy.entry("max_discharge_time").basis
    safe, t_max = policy["safe_voltage"], policy["max_discharge_time"]
    v0 = _abs_peak(st.continuous) or 0.0
    c = cand.capacitance or st.capacitance
    rs = [r for r in (cand.bleeder, st.external_bleeder) if r]
    if not c or v0 <= safe:
        return Finding("cap_bleeder", "pass", None, None, None,
                       f"peak {fq(v0, 'V')} is below the safe voltage {fq(safe, 'V')}", basis)
    ln = math.log(v0 / safe)
    if rs:
        r = 1.0 / sum(1.0 / x for x in rs)
        t = r * c * ln
        status = "pass" if t <= t_max else "warn"
        return Finding("cap_bleeder", status, t, t_max, t_max / t,
                       f"bleeder {fq(r, 'ohm')} discharges {fq(v0, 'V')} to {fq(safe, 'V')} in "
                       f"{fq(t, 's')} (t = R C ln(V0/Vsafe); policy {fq(t_max, 's')}); bleeders "
                       "fail open: short and measure before touching", basis, "s")
    r_need = t_max / (c * ln)
    v_mean = abs(st.continuous.get("v_mean") or 0.0)
    v_ac = st.continuous.get("v_ac_rms") or 0.0
    power = (v_mean ** 2 + v_ac ** 2) / r_need
    return Finding("cap_bleeder", "warn", None, t_max, None,
                   f"no bleeder: fit one of at most {fq(r_need, 'ohm')} rated for at least "
                   f"{fq(v0, 'V')} and {fq(2 * power, 'W')} (twice its {fq(power, 'W')}) to reach "
                   f"{fq(safe, 'V')} within {fq(t_max, 's')}", basis, "s")


def temperature(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Maximum temperature against the ambient plus the policy margin."""
    basis = policy.entry("temp_margin").basis
    if cand.temp_max is None:
        return Finding("cap_temperature", "pass" if orig.temp_max is None else "warn", st.ambient,
                       None, None, "maximum temperature not stated", basis, "degC")
    need = st.ambient + policy["temp_margin"]
    if cand.temp_max >= need:
        status = "pass"
    elif cand.temp_max >= st.ambient or (orig.temp_max is not None and
                                         cand.temp_max >= orig.temp_max):
        status = "warn"
    else:
        status = "fail"
    return Finding("cap_temperature", status, st.ambient, cand.temp_max, None,
                   f"rated to {cand.temp_max:g} °C at an ambient of {st.ambient:g} °C "
                   f"(policy: {policy['temp_margin']:g} °C above ambient)", basis, "degC")


def size(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    return mismatch("cap_size", "size / terminals", orig.size, cand.size,
                    "common practice, no source")


RULES = (capacitance, load_current, other_slots, voltage_peak, voltage_transient, voltage_ac,
         dc_only, polarity, ripple, bleeder, temperature, size)
