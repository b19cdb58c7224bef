"""The piecewise-linear solver itself: linear circuits against their textbook phasor solutions,
the matrix exponential against SciPy's, and circuits that once broke the steady-state search."""

from __future__ import annotations

import math

import numpy as np
import pytest

from partsmatch.circuit.solver import Element, Netlist, expm
from partsmatch.circuit.spec import parse_circuit
from partsmatch.circuit.stress import analyze


def test_expm_matches_scipy():
    from scipy.linalg import expm as scipy_expm

    rng = np.random.default_rng(7)
    for scale in (1e-3, 1.0, 30.0, 1e6):  # the last one is as stiff as an inductor beside R_OFF
        a = rng.normal(size=(6, 6)) * scale
        a -= np.eye(6) * abs(a).sum()  # stable, like a circuit
        ref = scipy_expm(a * 1e-3)
        assert np.allclose(expm(a * 1e-3), ref, rtol=1e-10, atol=1e-12 * max(1, abs(ref).max()))


def test_rc_low_pass_phasor():
    # an RC low pass driven by a sine: |Vc| = Vpk / sqrt(1 + (w R C)^2), lagging by atan(w R C)
    # (phasor analysis; any circuits textbook)
    r, c, f, vpk = 1e3, 1e-6, 50.0, 10.0
    w = 2 * math.pi * f
    net = Netlist([Element("V", "VS", "s", "0", value=vpk), Element("R", "R1", "s", "o", value=r),
                   Element("C", "C1", "o", "0", value=c)], w, vscale=vpk)
    ss = net.periodic_steady_state()
    out = net.outputs(ss.run.segments)
    amp = vpk / math.sqrt(1 + (w * r * c) ** 2)
    assert float(np.abs(out["v(C1)"]).max()) == pytest.approx(amp, rel=1e-4)
    phase = math.atan(w * r * c)
    t = out["t"]
    expected = amp * np.sin(w * t - phase)
    assert np.max(np.abs(out["v(C1)"] - expected)) < 1e-6 * vpk
    assert ss.residual < 1e-9


def test_rl_current_phasor():
    # R L in series: |I| = Vpk / sqrt(R^2 + (w L)^2) (phasor analysis)
    r, ind, f, vpk = 10.0, 0.1, 60.0, 100.0
    w = 2 * math.pi * f
    net = Netlist([Element("V", "VS", "s", "0", value=vpk), Element("R", "R1", "s", "m", value=r),
                   Element("L", "L1", "m", "0", value=ind)], w, vscale=vpk)
    out = net.outputs(net.periodic_steady_state().run.segments)
    assert float(np.abs(out["i(L1)"]).max()) == pytest.approx(
        vpk / math.hypot(r, w * ind), rel=1e-4)


@pytest.mark.parametrize(
    "data",
    [
        # 1 F reservoirs at 1 Hz behind 1 H, tube never strikes: nearly defective state matrix
        {"topology": "full-wave-doubler",
         "source": {"voltage": "230 V", "frequency": "1 Hz", "inductance": "1 H"},
         "load": {"type": "threshold", "threshold": "10 kV", "dynamic_resistance": "1 ohm"},
         "parts": {"C1": {"capacitance": "1 F"}, "C2": {"capacitance": "1 F"},
                   "F1": {"rating": "10 A"}}},
        # ideal source into a multiplier with a constant-current load: several diodes switch
        # at one instant after switch-on
        {"topology": "multiplier", "stages": 3,
         "source": {"voltage": 4580, "frequency": 265},
         "load": {"type": "current", "current": 0.00118},
         "parts": {"C": {"capacitance": 1.47e-8},
                   "D": {"forward_voltage": 0.7, "resistance": 1.0}}},
        # a bridge at 10.8 kHz behind 0.217 H with a tube below Vpk: an inductor left in series
        # with off switches at every event
        {"topology": "bridge-rectifier",
         "source": {"voltage": 292, "frequency": 10.8e3, "resistance": 30.9, "inductance": 0.217},
         "load": {"type": "threshold", "threshold": 239.4, "dynamic_resistance": 1.075},
         "parts": {"C1": {"capacitance": 5.02e-9}}},
        # a multiplier with a threshold load just above the source peak and a small leakage L
        {"topology": "multiplier", "stages": 3,
         "source": {"voltage": 260, "frequency": 180, "resistance": 20.4, "inductance": 1.45e-5},
         "load": {"type": "threshold", "threshold": 275.9, "dynamic_resistance": 4.33},
         "parts": {"C": {"capacitance": 2.58e-9}}},
        # ten stages of small capacitors at 40 kHz: with the load open the charge climbs the
        # ladder slowly, and the search needed 185 simulated periods (more than a flat 150)
        {"topology": "multiplier", "stages": 10,
         "source": {"voltage": "3 kV", "frequency": "40 kHz", "resistance": "200 ohm",
                    "inductance": "0.5 mH"},
         "load": {"type": "resistor", "resistance": "50 Mohm"},
         "parts": {"C": {"capacitance": "470 pF"},
                   "D": {"forward_voltage": "14 V", "resistance": "40 ohm"}}},
    ],
    ids=["1F-1Hz-1H", "ideal-source-multiplier", "bridge-10kHz-0.2H", "multiplier-threshold",
         "multiplier-10-stages"],
)
def test_hard_circuits_reach_a_verified_steady_state(data):
    r = analyze(parse_circuit(data))
    for state in ("loaded", "no_load", "high_line_loaded", "high_line_no_load"):
        if state in r["solver"]:
            assert r["solver"][state]["residual"] <= 1e-5
    for slot in r["slots"].values():
        for key, value in slot.items():
            if isinstance(value, float):
                assert math.isfinite(value), key
    if data.get("stages") == 10:
        # no load: the output of an n-stage Cockcroft-Walton multiplier is 2 n Vpk (Kuffel,
        # Zaengl & Kuffel, High Voltage Engineering: Fundamentals); with a forward drop Vf in
        # each diode every one of the n smoothing capacitors holds 2 (Vpk - Vf), so here
        # 2 n (Vpk - Vf) = 20 x (4243 - 14) V = 84.57 kV
        ideal = 20 * (3000 * math.sqrt(2) - 14)
        assert r["by_state"]["no_load"]["load"]["v_mean"] == pytest.approx(ideal, rel=5e-3)


# ------------------------------------------------------------------ quadrature
def _grids():
    """Sample times as the solver makes them: a uniform run, then a shorter last interval
    (an event or the run's end), with even and odd counts, and the degenerate cases."""
    h = 1e-3
    yield np.arange(9) * h                                  # 8 uniform intervals
    yield np.arange(8) * h                                  # 7: one left over
    yield np.append(np.arange(6) * h, 5 * h + 0.37 * h)     # uniform, then a short one
    yield np.append(np.arange(5) * h, 4 * h + 1e-9 * h)     # a last interval of almost nothing
    yield np.array([0.0, 0.4 * h])                          # one interval
    yield np.array([0.0, h, 1.5 * h])                       # one uniform, one short
    yield np.array([2.0])                                   # one sample


def test_segment_weights_integrate_polynomials_exactly():
    # Simpson's rule is exact for cubics on each pair; the left-over interval's parabola for
    # quadratics (numerical analysis, e.g. Burden & Faires, Numerical Analysis, ch. 4)
    from partsmatch.circuit.solver import segment_weights

    for t in _grids():
        w = segment_weights(t)
        span = t[-1] - t[0]
        assert w.sum() == pytest.approx(span, rel=1e-12, abs=1e-18)
        for p in range(3 if len(t) > 2 else 2):
            exact = (t[-1] ** (p + 1) - t[0] ** (p + 1)) / (p + 1)
            assert w @ t ** p == pytest.approx(exact, rel=1e-9, abs=1e-18), (t, p)


def test_segment_weights_beat_the_trapezoid_on_a_pulse():
    # a half-sine pulse sampled 15 times, as a diode's conduction pulse in a multiplier:
    # the integral of sin over [0, pi] is 2 (calculus); the trapezoid misses it by
    # pi^2 / (12 n^2) = 0.4 % (its error term), the weights by under 1e-4
    from partsmatch.circuit.solver import segment_weights

    t = np.linspace(0.0, math.pi, 15)
    trap = float(np.sum(0.5 * (np.sin(t[1:]) + np.sin(t[:-1])) * np.diff(t)))
    assert abs(trap - 2.0) > 3e-3
    assert abs(segment_weights(t) @ np.sin(t) - 2.0) < 1e-4


def test_quadrature_weights_join_segments_by_their_gaps():
    from partsmatch.circuit.solver import Segment, quadrature_weights

    a = Segment(np.array([0.0, 1.0, 2.0]), np.zeros((1, 3)), (False,))
    b = Segment(np.array([2.5, 3.5, 4.5, 5.0]), np.zeros((1, 4)), (True,))
    w = quadrature_weights([a, b])
    assert w.sum() == pytest.approx(5.0)
    t = np.concatenate([a.t, b.t])
    # a linear waveform is integrated exactly across the gap too: 5^2 / 2
    assert w @ t == pytest.approx(12.5)
