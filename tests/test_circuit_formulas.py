"""Closed forms (partsmatch.circuit.formulas) against published values, and the simulated stress
against the closed forms where they hold (light load, stiff source, near-ideal diodes).

Sources (see /work/shared/REFERENCES.md):
* KZK: Kuffel, Zaengl & Kuffel, *High Voltage Engineering: Fundamentals*, section 2.2.1
  (Cockcroft-Walton drop and ripple).
* Reservoir ripple I/(fC) and I/(2fC), peak of a sine, W = C V^2 / 2 and the exponential
  discharge t = R C ln(V0 / Vsafe): any circuits textbook (REFERENCES.md "Closed forms" and
  "Discharge of stored charge", confidence C).
"""

from __future__ import annotations

import math

import pytest

from partsmatch.circuit import formulas as F
from partsmatch.circuit.spec import parse_circuit
from partsmatch.circuit.stress import analyze, simulate_waveforms


# --- the formulas themselves --------------------------------------------------------------------
def test_vpk():
    # REFERENCES.md: 2000 V RMS -> clamp doubler PIV 2 Vpk = 5657 V
    assert 2 * F.vpk(2000.0) == pytest.approx(5657.0, abs=0.5)


def test_discharge_time_reference_example():
    # REFERENCES.md, discharge of stored charge: 10 Mohm, 1 uF, 2828 V -> 50 V: 40.4 s (conf. C)
    assert F.discharge_time(10e6, 1e-6, 2828.0, 50.0) == pytest.approx(40.4, abs=0.05)
    assert F.discharge_time(10e6, 1e-6, 40.0, 50.0) == 0.0


def test_stored_energy():
    # W = C V^2 / 2: 1 uF at 2828 V holds 4.0 J (REFERENCES.md, closed forms)
    assert F.stored_energy(1e-6, 2828.0) == pytest.approx(4.0, rel=1e-3)


def test_kzk_coefficients():
    # KZK: drop coefficient 2n^3/3 + n^2/2 - n/6 is 1, 7, 22 for n = 1, 2, 3 (arithmetic of the
    # published formula); ripple coefficient n(n+1)/2 is 1, 3, 6
    assert [F.multiplier_drop(1.0, 1.0, 1.0, n) for n in (1, 2, 3)] == pytest.approx([1, 7, 22])
    assert [F.multiplier_ripple(1.0, 1.0, 1.0, n) for n in (1, 2, 3)] == [1, 3, 6]
    # with I/(fC) = 1 mA / (20 kHz * 10 nF) = 5 V
    assert F.multiplier_drop(1e-3, 20e3, 10e-9, 3) == pytest.approx(110.0)
    half = F.half_wave_ripple(1.0, 50.0, 1e-3)
    assert F.bridge_ripple(1.0, 50.0, 1e-3) == pytest.approx(half / 2)


# --- simulation against the closed forms ------------------------------------------------------
def _loaded_ripple(topology: str, current: float, c: float, f: float = 50.0) -> float:
    spec = parse_circuit({
        "topology": topology,
        "source": {"voltage": "100 V", "frequency": f},
        "load": {"type": "current", "current": current},
        "parts": {"C1": {"capacitance": c},
                  **{d: {"forward_voltage": "0.7 V", "resistance": "0.05 ohm"}
                     for d in (("D1",) if topology == "half-wave-rectifier"
                               else ("D1", "D2", "D3", "D4"))}},
    })
    w = simulate_waveforms(spec, "loaded", periods=1)
    return float(w["v(C1)"].max() - w["v(C1)"].min())


def test_half_wave_ripple_light_load():
    # reservoir ripple dV ~ I/(fC) (textbook closed form): 0.1 A, 50 Hz, 2200 uF -> 0.909 V;
    # a light load (ripple about 0.6 % of Vpk), so within 10 %
    expected = F.half_wave_ripple(0.1, 50.0, 2200e-6)
    assert _loaded_ripple("half-wave-rectifier", 0.1, 2200e-6) == pytest.approx(expected, rel=0.10)


def test_bridge_ripple_light_load():
    # full-wave / bridge ripple dV ~ I/(2fC) (textbook closed form): 0.2 A, 50 Hz, 2200 uF
    expected = F.bridge_ripple(0.2, 50.0, 2200e-6)
    assert _loaded_ripple("bridge-rectifier", 0.2, 2200e-6) == pytest.approx(expected, rel=0.10)


@pytest.mark.parametrize("n", [1, 2, 3, 4, 5])
def test_multiplier_drop_and_ripple_kzk(n):
    # KZK (Kuffel, Zaengl & Kuffel, section 2.2.1): equal stage capacitance C, stiff source,
    # ideal diodes; drop of the output maximum below 2 n Vpk = I/(fC)(2n^3/3 + n^2/2 - n/6),
    # peak-to-peak ripple I/(fC) n(n+1)/2. Light load: 1 mA from 10 nF stages at 20 kHz.
    # (KZK's drop is read here as the fall of the output's maximum: from memory.)
    i, f, c, vrms = 1e-3, 20e3, 10e-9, 1000.0
    spec = parse_circuit({
        "topology": "multiplier", "stages": n,
        "source": {"voltage": vrms, "frequency": f},
        "load": {"type": "current", "current": i},
        "parts": {"C": {"capacitance": c}, "D": {"forward_voltage": 0, "resistance": "0.5 ohm"}},
    })
    w = simulate_waveforms(spec, "loaded", periods=1)
    v = w["v(load)"]
    no_load = F.multiplier_no_load(vrms, n)
    assert no_load - v.max() == pytest.approx(F.multiplier_drop(i, f, c, n), rel=0.10)
    assert v.max() - v.min() == pytest.approx(F.multiplier_ripple(i, f, c, n), rel=0.10)


def test_doubler_piv_no_load_is_two_vpk():
    # REFERENCES.md closed forms: clamp doubler at no load, C1 at Vpk and diode PIV 2 Vpk
    # (2000 V RMS -> 5657 V); no leakage inductance; within 2 %
    spec = parse_circuit({
        "topology": "half-wave-doubler",
        "source": {"voltage": "2000 V", "frequency": "60 Hz", "resistance": "50 ohm"},
        "load": {"type": "none"},
        "parts": {"C1": {"capacitance": "1 uF", "bleeder": "10 Mohm"},
                  "D1": {"forward_voltage": "10 V", "resistance": "30 ohm"}},
    })
    s = analyze(spec)["by_state"]["no_load"]["slots"]
    assert s["D1"]["v_reverse_peak"] == pytest.approx(5657.0, rel=0.02)
    assert abs(s["C1"]["v_mean"]) == pytest.approx(5657.0 / 2, rel=0.02)


@pytest.mark.parametrize(
    "topology, stages, factor",
    [  # no-load output (DESIGN.md primer; KZK for the multiplier): Vpk, Vpk, 2 Vpk, 2 n Vpk
        ("half-wave-rectifier", None, 1), ("bridge-rectifier", None, 1),
        ("full-wave-doubler", None, 2), ("multiplier", 2, 4),
    ],
)
def test_no_load_output(topology, stages, factor):
    data = {"topology": topology, "source": {"voltage": "1 kV", "frequency": "50 Hz"},
            "load": {"type": "none"},
            "parts": {"C": {"capacitance": "1 uF"}, "D": {"forward_voltage": 0}}}
    if topology == "multiplier":
        data["stages"] = stages
    else:
        data["parts"] = {"C1": {"capacitance": "1 uF"}, "C2": {"capacitance": "1 uF"}}
        if topology != "full-wave-doubler":
            del data["parts"]["C2"]
    spec = parse_circuit(data)
    w = simulate_waveforms(spec, "no_load", periods=1)
    assert float(w["v(load)"].mean()) == pytest.approx(factor * math.sqrt(2) * 1000, rel=0.01)
