"""Resistor rules: a bleeder resistor fitted across a capacitor.

Discharge t = R C ln(V0 / Vsafe) (exponential discharge); dissipation V_rms^2 / R with twice that
as the power rating wanted (common practice, no source); voltage rating at least the peak.
"""

from __future__ import annotations

import math

from partsmatch.catalog.records import PartRecord
from partsmatch.rules.findings import Finding, fq
from partsmatch.rules.policy import Policy


def bleeder_findings(cand: PartRecord, *, capacitance: float, v_peak: float, v_rms: float,
                     policy: Policy) -> list[Finding]:
    """Can ``cand`` serve as the bleeder of a capacitor of ``capacitance`` F seeing ``v_peak`` V
    peak and ``v_rms`` V RMS (DC included)?"""
    basis_t = policy.entry("max_discharge_time").basis
    out: list[Finding] = []
    safe, t_max = policy["safe_voltage"], policy["max_discharge_time"]
    if cand.resistance is None:
        return [Finding("bleeder_resistance", "fail", None, None, None,
                        "resistance unknown", basis_t, "ohm")]
    t = cand.resistance * capacitance * math.log(max(v_peak, safe) / safe)
    out.append(Finding("bleeder_discharge", "pass" if t <= t_max else "fail", t, t_max,
                       t_max / t if t else None,
                       f"discharges {fq(v_peak, 'V')} to {fq(safe, 'V')} in {fq(t, 's')}",
                       basis_t, "s"))
    out.append(Finding("bleeder_voltage",
                       "pass" if cand.voltage_max and cand.voltage_max >= v_peak else "fail",
                       v_peak, cand.voltage_max,
                       cand.voltage_max / v_peak if cand.voltage_max else None,
                       f"voltage rating {fq(cand.voltage_max, 'V')} vs peak {fq(v_peak, 'V')}",
                       "common practice, no source", "V"))
    p = v_rms ** 2 / cand.resistance
    status = "fail" if not cand.power or cand.power < p else ("warn" if cand.power < 2 * p
                                                             else "pass")
    out.append(Finding("bleeder_power", status, p, cand.power, cand.power / p if cand.power and p
                       else None, f"dissipates {fq(p, 'W')} of {fq(cand.power, 'W')}",
                       "common practice, no source: power rating at least twice the dissipation",
                       "W"))
    return out
