"""Per-slot electrical stress in every operating state (DESIGN.md section 4, issue 3 items 4-5).

:func:`analyze` returns the ``partsmatch stress --json`` contract: SI floats throughout
(V, A, s, J, A^2 s, Hz), worst values over the states with the state that set each, the values of
each state alone under ``by_state``, the HV cautions, and the solver's figures under ``solver``.

States:

* ``loaded``: periodic steady state at the nominal source voltage with the load in place.
* ``no_load``: periodic steady state with the load open (a threshold load not conducting).
* ``switch_on``: the first :data:`SWITCH_ON_PERIODS` periods from discharged capacitors (and no
  inductor current) at the worst phase of the source, with a threshold load not conducting
  (a resistor or constant-current load stays in place: it is passive or draws only once the
  output is positive). The worst phase is the one of :data:`PHASES` (refined around the best)
  that gives the largest diode current in the first period. Only the keys a transient gives are
  filled (capacitor and diode voltages, load peak voltage, the surge figures); the others are
  ``None``: the rules hold switch-on voltages against the transient allowance and use its
  currents for surge and I^2t only.
* ``high_line``: ``loaded`` and ``no_load`` again at ``policy["high_line_factor"]`` times the
  source voltage; each value is the worse of the two.

Definitions: a capacitor's ``v_peak`` is its voltage of largest magnitude (signed), ``v_min`` its
most negative voltage and ``v_max`` its most positive (together they tell whether the voltage
reverses, whatever the slot's orientation), ``v_ac_rms`` the RMS of its voltage less the mean,
``energy_j`` = C v_peak^2 / 2 and ``discharge_s`` the time its bleeder alone takes from |v_peak| to
``policy["safe_voltage"]`` (``None`` without a bleeder). A diode's ``i_surge`` is its largest
switch-on current, ``i2t_surge`` the integral of i^2 summed over its pulses that start within the
first :data:`SURGE_PERIODS` periods and ``surge_s`` their summed width; ``frequency_hz`` is its
switching frequency (once per source period in all the supported
topologies). A fuse's ``i2t_cycle`` is the integral of i^2 over one steady period, its
``i2t_surge`` the same over the first period after switch-on, and ``v_open_peak``/``v_open_rms``
the voltage across it over :data:`FUSE_OPEN_PERIODS` periods after it opened at a zero of its
current in that state's steady state (its arc clears at a current zero; common practice, no
source), trapped capacitor charge included.
"""

from __future__ import annotations

import math
import time
from typing import Any

import numpy as np

from partsmatch.circuit.formulas import discharge_time, stored_energy
from partsmatch.circuit.solver import Netlist, SteadyState
from partsmatch.circuit.spec import CircuitSpec
from partsmatch.circuit.topologies import Wiring, build_netlist, ideal_dc
from partsmatch.circuit.worst import worse as _worse
from partsmatch.errors import SimulationError

#: The steady-state search starts with the capacitors at this fraction of their ideal no-load
#: voltage: just below the orbit, where the diodes conduct and the Newton step is well informed.
START_FRACTION = 0.9

STATES = ("loaded", "no_load", "switch_on", "high_line")
KEYS = {
    "capacitor": ("v_peak", "v_min", "v_max", "v_mean", "v_ac_rms", "i_rms", "energy_j",
                  "discharge_s"),
    "diode": ("v_reverse_peak", "i_avg", "i_peak", "i_rms", "i_surge", "i2t_surge", "surge_s",
              "frequency_hz"),
    "fuse": ("i_rms", "i_peak", "i2t_cycle", "i2t_surge", "v_open_peak", "v_open_rms"),
}
LOAD_KEYS = ("v_mean", "v_peak", "i_mean", "p_mean")
SOURCE_KEYS = ("i_rms",)

SWITCH_ON_PERIODS = 5
#: A diode's switch-on pulses that start within this many periods are summed into i2t_surge.
SURGE_PERIODS = 2
FUSE_OPEN_PERIODS = 3
PHASES = 8


# --- small measures over non-uniform samples ------------------------------------------------
def _integral(t: np.ndarray, y: np.ndarray) -> float:
    """Trapezoid integral (a window of a run, such as one switch-on pulse)."""
    return float(np.sum(0.5 * (y[1:] + y[:-1]) * np.diff(t)))


def _mean(w: np.ndarray, y: np.ndarray) -> float:
    """Mean of a waveform over a run, by the run's quadrature weights (``outputs()["w"]``)."""
    return float(w @ y) / float(w.sum())


def _rms(w: np.ndarray, y: np.ndarray) -> float:
    return math.sqrt(max(_mean(w, y * y), 0.0))


def _signed_peak(y: np.ndarray) -> float:
    return float(y[int(np.argmax(np.abs(y)))])


def _node(out: dict[str, np.ndarray], node: str) -> np.ndarray:
    return out[f"v({node})"] if node != "0" else np.zeros_like(out["t"])


def _load_vi(out: dict[str, np.ndarray], wiring: Wiring) -> tuple[np.ndarray, np.ndarray]:
    v = _node(out, wiring.load_nodes[0]) - _node(out, wiring.load_nodes[1])
    i = out[f"i({wiring.load_element})"] if wiring.load_element else np.zeros_like(v)
    return v, i


def _pulses(t: np.ndarray, i: np.ndarray, t_end: float) -> tuple[float, float, float]:
    """Forward pulses of a switch-on run: (largest peak, integral of i^2 summed over the pulses
    that start before ``t_end``, their summed width). The rules compare the sum with IFSM as one
    pulse of the summed width (the first cycles' pulses add up; issue text, from memory)."""
    peak = float(i.max()) if len(i) else 0.0
    if peak <= 0:
        return 0.0, 0.0, 0.0
    on = i > max(1e-6 * peak, 2e-9)
    i2t = width = 0.0
    k, n = 0, len(i)
    while k < n:
        if not on[k]:
            k += 1
            continue
        lo = k
        while k < n and on[k]:
            k += 1
        lo2, hi2 = max(lo - 1, 0), min(k, n - 1)  # the crossings bound the pulse
        if t[lo2] > t_end:
            break
        seg = slice(lo2, hi2 + 1)
        i2t += _integral(t[seg], np.clip(i[seg], 0, None) ** 2)
        width += float(t[hi2] - t[lo2])
    return peak, i2t, width


# --- measures of one state -------------------------------------------------------------------
def _empty(spec: CircuitSpec) -> dict[str, Any]:
    return {"slots": {s: {k: None for k in KEYS[p.role]} for s, p in spec.parts.items()},
            "load": {k: None for k in LOAD_KEYS}, "source": {k: None for k in SOURCE_KEYS}}


def _cap_energy(spec: CircuitSpec, slot: str, v_peak: float, safe: float
                ) -> tuple[float, float | None]:
    p = spec.parts[slot]
    energy = stored_energy(p.capacitance, v_peak)
    if not p.bleeder:
        return energy, None
    return energy, discharge_time(p.bleeder, p.capacitance, abs(v_peak), safe)


def _steady_measures(spec: CircuitSpec, net: Netlist, wiring: Wiring, ss: SteadyState,
                     safe: float) -> dict[str, Any]:
    out = net.outputs(ss.run.segments)
    w = out["w"]
    res = _empty(spec)
    f = spec.source.frequency
    for slot, p in spec.parts.items():
        el = wiring.slots[slot]
        v, i = out[f"v({el})"], out[f"i({el})"]
        d = res["slots"][slot]
        if p.role == "capacitor":
            vm = _mean(w, v)
            d.update(v_peak=_signed_peak(v), v_min=float(v.min()), v_max=float(v.max()),
                     v_mean=vm, v_ac_rms=_rms(w, v - vm), i_rms=_rms(w, i))
            d["energy_j"], d["discharge_s"] = _cap_energy(spec, slot, d["v_peak"], safe)
        elif p.role == "diode":
            d.update(v_reverse_peak=max(0.0, float(-v.min())), i_avg=_mean(w, i),
                     i_peak=float(i.max()), i_rms=_rms(w, i), frequency_hz=f)
        else:
            d.update(i_rms=_rms(w, i), i_peak=float(np.abs(i).max()),
                     i2t_cycle=float(w @ (i * i)))
    v, i = _load_vi(out, wiring)
    res["load"].update(v_mean=_mean(w, v), v_peak=_signed_peak(v), i_mean=_mean(w, i),
                       p_mean=_mean(w, v * i))
    res["source"]["i_rms"] = _rms(w, out[f"i({wiring.source})"])
    return res


def _fuse_open(spec: CircuitSpec, net: Netlist, wiring: Wiring, ss: SteadyState,
               voltage_factor: float, load: bool) -> tuple[float, float]:
    """Voltage across the fuse slot after it opens at a zero of its current."""
    open_net, open_wiring = build_netlist(spec, load=load, fuse_open=True,
                                          voltage_factor=voltage_factor)
    assert open_net.state_names == net.state_names
    row_i = len(net.nodes) + 2 * net.elem_index["F1"] + 1
    start: tuple[float, np.ndarray] | None = None
    for seg in ss.run.segments:
        i = net.mode(seg.mode).Y[row_i] @ seg.Z
        cross = np.nonzero((i[:-1] <= 0) & (i[1:] > 0) | (i[:-1] >= 0) & (i[1:] < 0))[0]
        if len(cross):
            c = int(cross[0]) + (1 if abs(i[cross[0] + 1]) < abs(i[cross[0]]) else 0)
            start = (float(seg.t[c]), seg.Z[:, c].copy())
            break
    if start is None:  # no current zero (no current at all): open at the start
        seg = ss.run.segments[0]
        start = (float(seg.t[0]), seg.Z[:, 0].copy())
    t0, z0 = start
    z0[len(net.caps):net.nx] = 0.0  # the arc clears at the current zero: no inductor current
    run = open_net.run(z0, t0, FUSE_OPEN_PERIODS * open_net.period)
    out = open_net.outputs(run.segments)
    v = out["v(F1)"]
    return float(np.abs(v).max()), _rms(out["w"], v)


def _worst_phase(spec: CircuitSpec, net: Netlist, wiring: Wiring) -> float:
    """The source phase (rad) at which switching on from discharged capacitors gives the
    largest first diode current: a coarse search over PHASES phases, refined three times."""
    diodes = [wiring.slots[s] for s in spec.slots("diode")]
    rows = [len(net.nodes) + 2 * net.elem_index[d] + 1 for d in diodes]

    def first_peak(phase: float) -> float:
        t0 = phase / net.omega
        z0 = np.concatenate([np.zeros(net.nx), net.u_at(t0)])
        run = net.run(z0, t0, net.period)
        best = 0.0
        for seg in run.segments:
            best = max(best, float((net.mode(seg.mode).Y[rows] @ seg.Z).max()))
        return best

    phases = [2 * math.pi * k / PHASES for k in range(PHASES)]
    peaks = [first_peak(p) for p in phases]
    k = int(np.argmax(peaks))
    best_phase, best_peak = phases[k], peaks[k]
    step = 2 * math.pi / PHASES
    for _ in range(3):  # refine around the best phase
        step /= 2
        for cand in (best_phase - step, best_phase + step):
            pk = first_peak(cand)
            if pk > best_peak:
                best_phase, best_peak = cand, pk
    return best_phase


def _switch_on(spec: CircuitSpec, safe: float) -> tuple[dict[str, Any], dict[str, Any]]:
    net, wiring = build_netlist(spec, load=spec.load.type != "threshold")
    best_phase = _worst_phase(spec, net, wiring)
    t0 = best_phase / net.omega
    z0 = np.concatenate([np.zeros(net.nx), net.u_at(t0)])
    run = net.run(z0, t0, SWITCH_ON_PERIODS * net.period)
    out = net.outputs(run.segments)
    t = out["t"]
    res = _empty(spec)
    first = t <= t0 + net.period * (1 + 1e-9)
    for slot, p in spec.parts.items():
        el = wiring.slots[slot]
        v, i = out[f"v({el})"], out[f"i({el})"]
        d = res["slots"][slot]
        if p.role == "capacitor":
            d.update(v_peak=_signed_peak(v), v_min=float(v.min()), v_max=float(v.max()))
            d["energy_j"], d["discharge_s"] = _cap_energy(spec, slot, d["v_peak"], safe)
        elif p.role == "diode":
            peak, i2t, width = _pulses(t, i, t0 + SURGE_PERIODS * net.period)
            d.update(v_reverse_peak=max(0.0, float(-v.min())), i_surge=peak, i2t_surge=i2t,
                     surge_s=width, frequency_hz=spec.source.frequency)
        else:
            d["i2t_surge"] = _integral(t[first], i[first] ** 2)
    v, _ = _load_vi(out, wiring)
    res["load"]["v_peak"] = _signed_peak(v)
    info = {"phase_deg": math.degrees(best_phase) % 360.0, "periods": SWITCH_ON_PERIODS,
            "events": run.events}
    return res, info


# --- worst case --------------------------------------------------------------------------------
def _combine(parts: list[tuple[str, dict[str, Any]]]) -> tuple[dict[str, Any], dict[str, Any]]:
    """Worst over states: (values, states) for a flat dict of keys."""
    values: dict[str, Any] = {}
    states: dict[str, Any] = {}
    for state, d in parts:
        for key, val in d.items():
            if key not in values or _worse(key, values[key], val):
                values[key] = val
                states[key] = state if val is not None else None
    return values, states


def _worst_of(spec: CircuitSpec, named: list[tuple[str, dict[str, Any]]], with_states: bool
              ) -> dict[str, Any]:
    out: dict[str, Any] = {"slots": {}, "load": {}, "source": {}}
    for slot, p in spec.parts.items():
        vals, states = _combine([(n, d["slots"][slot]) for n, d in named])
        out["slots"][slot] = {"role": p.role, **vals}
        if with_states:
            out["slots"][slot]["states"] = states
    for group in ("load", "source"):
        vals, states = _combine([(n, d[group]) for n, d in named])
        out[group] = dict(vals)
        if with_states:
            out[group]["states"] = states
    return out


def _start(spec: CircuitSpec, net: Netlist, voltage_factor: float) -> np.ndarray:
    dc = ideal_dc(spec, voltage_factor)
    x0 = np.zeros(net.nx)
    for k, c in enumerate(net.caps):
        x0[k] = START_FRACTION * dc.get(c.name, 0.0)
    return x0


def _solve(spec: CircuitSpec, net: Netlist, voltage_factor: float,
           x0: np.ndarray | None = None) -> tuple[SteadyState, dict[str, Any]]:
    t = time.perf_counter()
    if x0 is None:
        ss = net.periodic_steady_state(_start(spec, net, voltage_factor))
    else:
        try:  # a neighbouring orbit (the nominal one, scaled to high line) is usually closest
            ss = net.periodic_steady_state(x0)
        except SimulationError:
            ss = net.periodic_steady_state(_start(spec, net, voltage_factor))
    return ss, {"iterations": ss.iterations, "periods": ss.periods, "residual": ss.residual,
                "wall_s": time.perf_counter() - t, "events": ss.run.events}


def steady_state(spec: CircuitSpec, *, load: bool = True, voltage_factor: float = 1.0
                 ) -> tuple[Netlist, Wiring, SteadyState]:
    """One verified periodic steady state (the unit the bench times)."""
    net, wiring = build_netlist(spec, load=load, voltage_factor=voltage_factor)
    return net, wiring, net.periodic_steady_state(_start(spec, net, voltage_factor))


def cautions(spec: CircuitSpec, slots: dict[str, Any], policy) -> list[str]:
    """The HV cautions of a stress report (DESIGN.md section 3, helper rules: safety)."""
    from partsmatch.units import format_quantity as fq

    safe = policy["safe_voltage"]
    max_t = policy["max_discharge_time"] if "max_discharge_time" in policy else None
    out: list[str] = []
    total = 0.0
    stored: list[str] = []
    bled: list[str] = []
    unbled: list[str] = []
    for slot, d in slots.items():
        if d["role"] != "capacitor" or d["v_peak"] is None:
            continue
        p = spec.parts[slot]
        total += d["energy_j"]
        stored.append(f"{slot} {fq(d['energy_j'], 'J')} at {fq(abs(d['v_peak']), 'V')} "
                      f"({d['states']['v_peak']})")
        if p.bleeder:
            msg = (f"{slot}'s {fq(p.bleeder, 'ohm')} bleeder takes {fq(d['discharge_s'], 's')} "
                   f"to bring it to {fq(safe, 'V')}")
            if max_t is not None and d["discharge_s"] is not None and d["discharge_s"] > max_t:
                msg += f" (longer than the policy's {fq(max_t, 's')})"
            bled.append(msg)
        else:
            unbled.append(slot)
    if stored:
        out.append("Stored energy at the worst peak: " + "; ".join(stored)
                   + (f"; {fq(total, 'J')} in all." if len(stored) > 1 else "."))
    if bled:
        out.append("Discharge by bleeder, if intact: " + "; ".join(bled) + ".")
    if unbled:
        out.append(f"{', '.join(unbled)} {'has' if len(unbled) == 1 else 'have'} no bleeder: "
                   "a lethal charge can remain for hours or days after switch-off.")
    out += [
        "Discharge, short and measure before touching: short each capacitor's terminals with an "
        "insulated discharge tool and confirm zero volts with a meter rated for the voltage.",
        "Bleeder resistors fail open: never rely on a bleeder or on a computed discharge time.",
        "Dielectric absorption recharges a discharged capacitor: keep it shorted while working "
        "and short it again before touching.",
        "This tool does not replace the maker's data, local electrical codes or licensed "
        "practice.",
    ]
    return out


def analyze(spec: CircuitSpec, policy=None) -> dict[str, Any]:
    """The stress report of ``spec`` (the ``partsmatch stress --json`` contract)."""
    if policy is None:
        from partsmatch.rules.policy import load_policy

        policy = load_policy()
    t_start = time.perf_counter()
    safe = policy["safe_voltage"]
    factor = policy["high_line_factor"]
    has_fuse = "F1" in spec.parts
    no_load_differs = spec.load.type != "none"
    solver: dict[str, Any] = {}

    def steady(label: str, load: bool, vf: float, x0: np.ndarray | None = None
               ) -> tuple[dict[str, Any], SteadyState]:
        net, wiring = build_netlist(spec, load=load, voltage_factor=vf)
        ss, info = _solve(spec, net, vf, x0)
        res = _steady_measures(spec, net, wiring, ss, safe)
        if has_fuse:
            peak, rms = _fuse_open(spec, net, wiring, ss, vf, load)
            res["slots"]["F1"].update(v_open_peak=peak, v_open_rms=rms)
        solver[label] = info
        return res, ss

    loaded, ss_l = steady("loaded", True, 1.0)
    if no_load_differs:
        no_load, ss_n = steady("no_load", False, 1.0)
    else:
        no_load, ss_n = loaded, ss_l
    hl_l, _ = steady("high_line_loaded", True, factor, ss_l.x * factor)  # nominal orbit, scaled
    if no_load_differs:
        hl_n, _ = steady("high_line_no_load", False, factor, ss_n.x * factor)
        high_line = _worst_of(spec, [("a", hl_l), ("b", hl_n)], with_states=False)
    else:
        high_line = _worst_of(spec, [("a", hl_l)], with_states=False)
    for slot in high_line["slots"].values():
        slot.pop("role", None)
    t = time.perf_counter()
    switch_on, so_info = _switch_on(spec, safe)
    solver["switch_on"] = {**so_info, "wall_s": time.perf_counter() - t}

    by_state = {"loaded": loaded, "no_load": no_load, "switch_on": switch_on,
                "high_line": high_line}
    worst = _worst_of(spec, [(s, by_state[s]) for s in STATES], with_states=True)
    solver["wall_s"] = time.perf_counter() - t_start
    report: dict[str, Any] = {
        "circuit": spec.to_dict(),
        "slots": worst["slots"],
        "load": worst["load"],
        "source": worst["source"],
        "by_state": {s: {"slots": {k: {"role": spec.parts[k].role, **v}
                                   for k, v in by_state[s]["slots"].items()},
                         "load": dict(by_state[s]["load"]),
                         "source": dict(by_state[s]["source"])} for s in STATES},
        "cautions": [],
        "solver": solver,
    }
    report["cautions"] = cautions(spec, report["slots"], policy)
    if spec.load.type == "current":
        drawn = report["by_state"]["loaded"]["load"]["i_mean"]
        if drawn < 0.98 * spec.load.current:
            from partsmatch.units import format_quantity as fq

            report["cautions"].insert(0, (
                f"The supply cannot deliver the load's {fq(spec.load.current, 'A')}: the model's "
                f"output collapses and the load draws {fq(drawn, 'A')} (below its compliance "
                "voltage it is modelled as a resistor); the stress figures are for that state."))
    return report


def simulate_waveforms(spec: CircuitSpec, state: str = "loaded", periods: int = 2
                       ) -> dict[str, np.ndarray]:
    """Waveforms for a plot: ``t`` (s, from 0), ``v(source)`` (open-circuit source voltage),
    ``i(source)`` (current out of the source), ``v(<slot>)``/``i(<slot>)`` per slot with the
    conventions of :mod:`partsmatch.circuit.topologies`, ``v(load)``/``i(load)``, and
    ``v(node:<name>)`` per node. ``state``: ``loaded``, ``no_load``, ``high_line`` (loaded at the
    default policy's high-line voltage) or ``switch_on`` (from discharged capacitors at the worst
    phase)."""
    if state not in STATES:
        raise ValueError(f"state must be one of {STATES}")
    if state == "switch_on":
        net, wiring = build_netlist(spec, load=spec.load.type != "threshold")
        t0 = _worst_phase(spec, net, wiring) / net.omega
        z0 = np.concatenate([np.zeros(net.nx), net.u_at(t0)])
    else:
        vf = 1.0
        if state == "high_line":
            from partsmatch.rules.policy import load_policy

            vf = load_policy()["high_line_factor"]
        net, wiring, ss = steady_state(spec, load=state != "no_load", voltage_factor=vf)
        t0 = 0.0
        z0 = np.concatenate([ss.x, net.u_at(0.0)])
    run = net.run(z0, t0, periods * net.period)
    out = net.outputs(run.segments)
    t = out["t"]
    vs_el = net.elements[net.elem_index[wiring.source]]
    res: dict[str, np.ndarray] = {
        "t": t - t0,
        "v(source)": vs_el.value * np.sin(net.omega * t),
        "i(source)": -out[f"i({wiring.source})"],
    }
    for slot, el in wiring.slots.items():
        res[f"v({slot})"] = out[f"v({el})"]
        res[f"i({slot})"] = out[f"i({el})"]
    v, i = _load_vi(out, wiring)
    res["v(load)"], res["i(load)"] = v, i
    for n in net.nodes:
        res[f"v(node:{n})"] = out[f"v({n})"]
    return res


__all__ = ["analyze", "simulate_waveforms", "steady_state", "cautions", "STATES", "KEYS"]
