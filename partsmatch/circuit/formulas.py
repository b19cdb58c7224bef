"""Closed forms: fast first estimates and cross-checks of the simulated stress.

All arguments and results are SI floats (V, A, Hz, F, ohm, s, J). These hold for light loads,
stiff sources and ideal diodes; the solver (:mod:`partsmatch.circuit.solver`) does not use them.

References:
    Kuffel, E., Zaengl, W. S. and Kuffel, J., *High Voltage Engineering: Fundamentals*,
    2nd ed., Newnes, 2000, section 2.2.1 (cascade circuits): multiplier regulation drop and ripple.
    The peak of a sine, the reservoir-capacitor ripple and the exponential discharge are in any
    circuits textbook (e.g. Horowitz and Hill, *The Art of Electronics*, 3rd ed., section 9.5).
"""

from __future__ import annotations

import math


def vpk(v_rms: float) -> float:
    """Peak of a sine of RMS ``v_rms``: sqrt(2) Vrms."""
    return math.sqrt(2.0) * v_rms


def half_wave_ripple(i_load: float, frequency: float, capacitance: float) -> float:
    """Peak-to-peak ripple of a half-wave rectifier's reservoir: dV ~ I / (f C)
    (the capacitor alone carries the load for about one period)."""
    return i_load / (frequency * capacitance)


def bridge_ripple(i_load: float, frequency: float, capacitance: float) -> float:
    """Peak-to-peak ripple of a full-wave (bridge) rectifier's reservoir: dV ~ I / (2 f C)."""
    return i_load / (2.0 * frequency * capacitance)


def multiplier_no_load(v_rms: float, stages: int) -> float:
    """No-load output of an n-stage Cockcroft-Walton multiplier: 2 n Vpk (Kuffel et al.)."""
    return 2.0 * stages * vpk(v_rms)


def multiplier_drop(i_load: float, frequency: float, capacitance: float, stages: int) -> float:
    """Regulation drop of an n-stage Cockcroft-Walton multiplier with equal stage capacitance C:
    dV = I / (f C) (2 n^3 / 3 + n^2 / 2 - n / 6) (Kuffel, Zaengl and Kuffel, section 2.2.1):
    the fall of the output's maximum below 2 n Vpk."""
    n = stages
    return i_load / (frequency * capacitance) * (2 * n ** 3 / 3 + n ** 2 / 2 - n / 6)


def multiplier_ripple(i_load: float, frequency: float, capacitance: float, stages: int) -> float:
    """Peak-to-peak output ripple of an n-stage Cockcroft-Walton multiplier:
    2 dV = I / (f C) n (n + 1) / 2 (Kuffel, Zaengl and Kuffel, section 2.2.1)."""
    n = stages
    return i_load / (frequency * capacitance) * n * (n + 1) / 2


def stored_energy(capacitance: float, voltage: float) -> float:
    """Energy in a charged capacitor: W = C V^2 / 2 (J)."""
    return 0.5 * capacitance * voltage ** 2


def discharge_time(resistance: float, capacitance: float, v0: float, v_safe: float) -> float:
    """Time for a resistor R to discharge C from V0 to V_safe: t = R C ln(V0 / V_safe)
    (exponential discharge); 0 when V0 is already at or below V_safe."""
    if v0 <= v_safe:
        return 0.0
    return resistance * capacitance * math.log(v0 / v_safe)
