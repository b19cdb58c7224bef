"""Fuse rules: one small pure function per rule, ``(original, candidate, stress, policy)``.

Replacement practice (MIL-PRF-23419 fuse selection steps; IEC 60127-1 for the characteristic
letters FF F M T TT): the same rated current and time-current class under the same standard
(an IEC 60127 "1 A" is not a UL 248-14 "1 A": the latter carries 100 % and opens at 135 %, the
former carries 150 % for an hour), a voltage rating at least the voltage the fuse must stand once
open, breaking capacity at least the original's, continuous current within the derated,
ambient-rerated rating, and a melting I^2t above the switch-on surge with margin.
"""

from __future__ import annotations

from partsmatch.catalog.records import PartRecord
from partsmatch.rules.context import SlotStress
from partsmatch.rules.findings import Finding, fq, mismatch, rated
from partsmatch.rules.policy import Policy

_REL = 1e-6


def rerated(rating: float, ambient: float, policy: Policy) -> float:
    """Rated current rerated for ambient above 25 degC (policy %/degC; MIL-STD-975 style)."""
    per = policy["fuse_rerate_per_degc"] / 100.0
    return rating * max(0.0, 1.0 - per * max(0.0, ambient - 25.0))


def current(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Same rated current: higher is a hard fail; lower warns with the nuisance margin."""
    basis = "replacement fuse has the same rated current (MIL-PRF-23419 selection; common practice)"
    i0, ic = orig.rated_current, cand.rated_current
    if ic is None:
        return Finding("fuse_current", "fail", i0, None, None,
                       "rated current of the candidate unknown", basis, "A")
    if i0 is None:
        return Finding("fuse_current", "warn", None, ic, None,
                       "rated current of the original unknown: cannot confirm the same rating",
                       basis, "A")
    if abs(ic - i0) <= _REL * i0:
        return Finding("fuse_current", "pass", i0, ic, None,
                       f"rated current {fq(ic, 'A')}, as the original", basis, "A")
    if ic > i0:
        return Finding("fuse_current", "fail", i0, ic, None,
                       f"rated current {fq(ic, 'A')} is higher than the original's "
                       f"{fq(i0, 'A')}: a higher rating is never a valid substitute", basis, "A")
    i_rms = st.continuous.get("i_rms") or 0.0
    r = rerated(ic, st.ambient, policy)
    margin = r / i_rms if i_rms else None
    nuisance = policy["nuisance_margin"]
    return Finding("fuse_current", "warn", i_rms, r, margin,
                   f"rated current {fq(ic, 'A')} is lower than the original's {fq(i0, 'A')}: "
                   f"rerated {fq(r, 'A')} against {fq(i_rms, 'A')} RMS, nuisance margin "
                   + (f"{margin:.2f}" if margin else "n/a")
                   + (f" (below the policy's {nuisance:g}: expect nuisance opening)"
                      if margin is not None and margin < nuisance else ""),
                   policy.entry("nuisance_margin").basis, "A")


def time_current_class(orig: PartRecord, cand: PartRecord, st: SlotStress,
                       policy: Policy) -> Finding:
    """Same time-current characteristic (IEC 60127-1 letters) and the same standard (hard)."""
    basis = "IEC 60127-1 time-current characteristics; UL 248-14 differs in kind"
    if orig.fuse_standard and cand.fuse_standard and orig.fuse_standard != cand.fuse_standard:
        return Finding("fuse_class", "fail", None, None, None,
                       f"standard {cand.fuse_standard} differs from the original's "
                       f"{orig.fuse_standard}: the same nominal current means another "
                       "time-current behaviour", basis)
    if orig.characteristic and cand.characteristic != orig.characteristic:
        return Finding("fuse_class", "fail", None, None, None,
                       f"characteristic {cand.characteristic or 'none'} differs from the "
                       f"original's {orig.characteristic}", basis)
    if (orig.fuse_standard and not cand.fuse_standard) or \
            (cand.characteristic and not orig.characteristic and not orig.fuse_standard):
        return Finding("fuse_class", "warn", None, None, None,
                       "cannot confirm the same time-current class (standard or letter unknown)",
                       basis)
    what = " ".join(x for x in (cand.fuse_standard, cand.characteristic) if x) or "not stated"
    return Finding("fuse_class", "pass", None, None, None, f"class {what}, as the original",
                   basis)


def voltage(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> list[Finding]:
    """Voltage rating against the voltage across the open fuse: AC rating against its RMS, a DC
    rating against its peak (trapped capacitor charge included)."""
    basis = "fuse voltage rating >= circuit voltage (MIL-PRF-23419 selection steps)"
    out = [rated("fuse_voltage_ac", stress=st.continuous.get("v_open_rms"), rating=cand.voltage,
                 original=orig.voltage, margin_fraction=1.0, unit="V",
                 what="RMS voltage across the open fuse vs its voltage rating", basis=basis)]
    if cand.voltage_dc_fuse is not None or orig.voltage_dc_fuse is not None:
        out.append(rated("fuse_voltage_dc", stress=st.continuous.get("v_open_peak"),
                         rating=cand.voltage_dc_fuse, original=orig.voltage_dc_fuse,
                         margin_fraction=1.0, unit="V",
                         what="peak voltage across the open fuse vs its DC rating", basis=basis))
    return out


def breaking(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Breaking capacity at least the original's."""
    basis = "breaking capacity >= the original's (MIL-PRF-23419 selection steps; IEC 60127-2 letters)"
    b0, bc = orig.breaking_capacity, cand.breaking_capacity
    if b0 is None:
        return Finding("fuse_breaking", "pass" if bc else "warn", None, bc, None,
                       f"breaking capacity {fq(bc, 'A')}; the original's unknown", basis, "A")
    if bc is None:
        return Finding("fuse_breaking", "warn", b0, None, None,
                       f"breaking capacity of the candidate unknown (original {fq(b0, 'A')})",
                       basis, "A")
    status = "pass" if bc >= b0 else "fail"
    return Finding("fuse_breaking", status, b0, bc, bc / b0,
                   f"breaking capacity {fq(bc, 'A')} vs the original's {fq(b0, 'A')}", basis, "A")


def continuous(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Continuous RMS current against the derated, ambient-rerated rating."""
    rating = rerated(cand.rated_current, st.ambient, policy) if cand.rated_current else None
    original = rerated(orig.rated_current, st.ambient, policy) if orig.rated_current else None
    return rated("fuse_continuous", stress=st.continuous.get("i_rms"), rating=rating,
                 original=original, margin_fraction=policy["fuse_derating"], unit="A",
                 what=f"RMS current vs the rating rerated for {st.ambient:g} °C",
                 basis=policy.entry("fuse_derating").basis)


def surge_i2t(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    """Melting I^2t against the switch-on surge I^2t, with margin."""
    m = policy["fuse_i2t_margin"]
    return rated("fuse_i2t", stress=st.transient.get("i2t_surge"), rating=cand.i2t,
                 original=orig.i2t, margin_fraction=1.0 / m, unit="A2s",
                 what="switch-on I²t vs melting I²t", basis=policy.entry("fuse_i2t_margin").basis,
                 essential=False)


def size(orig: PartRecord, cand: PartRecord, st: SlotStress, policy: Policy) -> Finding:
    return mismatch("fuse_format", "size / format", orig.size, cand.size,
                    "common practice, no source")


RULES = (current, time_current_class, voltage, breaking, continuous, surge_i2t, size)
