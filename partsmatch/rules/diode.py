"""Diode rules: one small pure function per rule, ``(original, candidate, stress, policy)``.

Surge: IFSM is rated for one half-sine of a 50/60 Hz half-period (8.3 ms or 10 ms). A pulse of
another width t is compared like with like by keeping I^2 sqrt(t) constant (from memory; more
conservative than constant I^2 t): I_allowed = IFSM (t_half / t)^(1/4). The switch-on pulses of
the first cycles are summed through their I^2 t, and the sum is turned into the peak of one
half-sine of the same width and I^2 t (I^2 t of a half-sine = I_pk^2 t / 2).
Recovery loss (triangle model, Erickson & Maksimovic, *Fundamentals of Power Electronics*):
Qrr ~ I_F trr / 2, P ~ Qrr V_R f.
"""

from __future__ import annotations

import math

from partsmatch.catalog.records import PartRecord
from partsmatch.rules.context import SlotStress
from partsmatch.rules.findings import Finding, fq, mismatch, rated
from partsmatch.rules.policy import Policy


def vrrm(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """VRRM against the peak reverse voltage of every steady state (no load, high line included)."""
    state = st.states.get("v_reverse_peak", "")
    return rated("diode_vrrm", stress=st.continuous.get("v_reverse_peak"), rating=cand.vrrm,
                 original=orig.vrrm, margin_fraction=policy["diode_vr_margin"], unit="V",
                 what=f"peak reverse voltage ({state.replace('_', ' ')}) vs VRRM",
                 basis=policy.entry("diode_vr_margin").basis)


def vrrm_switch_on(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Switch-on reverse voltage against the transient allowance times VRRM."""
    a = policy["transient_allowance"]
    return rated("diode_vrrm_switch_on", stress=st.transient.get("v_reverse_peak"),
                 rating=cand.vrrm * a if cand.vrrm else None,
                 original=orig.vrrm * a if orig.vrrm else None, margin_fraction=1.0, unit="V",
                 what=f"switch-on reverse voltage vs {a:g} x VRRM",
                 basis=policy.entry("transient_allowance").basis)


def forward_current(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """IF(AV) against the mean forward current."""
    return rated("diode_if_avg", stress=st.continuous.get("i_avg"), rating=cand.if_avg,
                 original=orig.if_avg, margin_fraction=policy["diode_if_margin"], unit="A",
                 what="mean forward current vs IF(AV)", basis=policy.entry("diode_if_margin").basis)


def allowed_surge(ifsm: float, width: float, t_half: float) -> float:
    """Peak current allowed for a half-sine pulse of ``width`` s, from IFSM rated at ``t_half``
    s, keeping I^2 sqrt(t) constant (from memory)."""
    return ifsm * (t_half / width) ** 0.25


def equivalent_peak(i2t: float, width: float) -> float:
    """Peak of one half-sine of ``width`` s with the same I^2 t (I^2 t = I_pk^2 width / 2)."""
    return math.sqrt(2.0 * i2t / width)


def surge(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Switch-on surge (pulses of the first cycles summed) against the width-scaled IFSM."""
    basis = policy.entry("diode_surge_margin").basis
    i2t, width = st.transient.get("i2t_surge"), st.transient.get("surge_s")
    t_half = policy["ifsm_half_period"]
    if not i2t or not width:
        return Finding("diode_surge", "pass", None, cand.ifsm, None, "no switch-on surge", basis,
                       "A")
    i_eq = equivalent_peak(i2t, width)
    f = rated("diode_surge", stress=i_eq,
              rating=allowed_surge(cand.ifsm, width, t_half) if cand.ifsm else None,
              original=allowed_surge(orig.ifsm, width, t_half) if orig.ifsm else None,
              margin_fraction=policy["diode_surge_margin"], unit="A",
              what=f"switch-on surge ({fq(i2t, 'A2s')} over {fq(width, 's')}, as a half-sine "
                   f"peak) vs IFSM scaled to that width", basis=basis, essential=False)
    return f


def recovery(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """trr against the policy fraction of the period (hard), with a recovery-loss estimate."""
    basis = policy.entry("trr_fraction").basis
    period = 1.0 / st.frequency
    limit = policy["trr_fraction"] * period
    if cand.trr is None:
        if limit >= 20e-6:  # mains frequencies: any standard-recovery part recovers in time
            return Finding("diode_trr", "pass", None, limit, None,
                           f"trr not stated; at {fq(st.frequency, 'Hz')} any rectifier recovers "
                           "in time", basis, "s")
        status = "warn" if orig.trr is None else "fail"
        return Finding("diode_trr", status, None, limit, None,
                       f"trr not stated; at {fq(st.frequency, 'Hz')} it must be at most "
                       f"{fq(limit, 's')}", basis, "s")
    i_f = st.continuous.get("i_peak") or 0.0
    v_r = st.continuous.get("v_reverse_peak") or 0.0
    qrr = i_f * cand.trr / 2.0
    loss = qrr * v_r * st.frequency
    detail = f"; recovery loss about {fq(loss, 'W')} (Qrr ~ IF trr / 2 = {qrr * 1e6:.3g} µC)"
    if cand.trr <= limit:
        return Finding("diode_trr", "pass", cand.trr, limit, limit / cand.trr,
                       f"trr {fq(cand.trr, 's')} within {policy['trr_fraction']:g} of the "
                       f"{fq(period, 's')} period{detail}", basis, "s")
    as_good = orig.trr is not None and cand.trr <= orig.trr
    return Finding("diode_trr", "warn" if as_good else "fail", cand.trr, limit, limit / cand.trr,
                   f"trr {fq(cand.trr, 's')} exceeds {policy['trr_fraction']:g} of the "
                   f"{fq(period, 's')} period ({fq(limit, 's')}){detail}"
                   + ("; no slower than the original" if as_good else ""), basis, "s")


def size(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    return mismatch("diode_size", "size / terminals", orig.size, cand.size,
                    "common practice, no source")


RULES = (vrrm, vrrm_switch_on, forward_current, surge, recovery, size)
