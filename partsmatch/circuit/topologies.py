"""Netlists of the supported topologies (a new topology is a netlist here, not new physics).

Common to all: the source is an ideal sine ``VS`` of peak sqrt(2) x ``voltage`` (RMS, open
circuit) from its return node to ``s0``, then the winding resistance ``RS`` (s0 -> s1), the
leakage inductance ``LS`` (s1 -> s2) and the fuse slot ``F1`` (s2 -> x, a short while intact,
its cold resistance if one is given; :data:`~partsmatch.circuit.solver.R_FUSE_OPEN` = 1e14 ohm
once open, so that the open fuse takes the whole voltage rather than sharing it with the 1e10 ohm
of the off diodes: the worst case, where in reality leakage and stray capacitance divide it). An
absent R, L or fuse merges its two nodes. ``x`` feeds the rectifier. Node ``0`` is ground.

Sign conventions (the stress JSON keeps them):

* a capacitor's voltage is V(from) - V(to) of the wiring below, read literally ("C1 from the
  source node to node N": V(x) - V(n)); so the clamp doubler's C1 and every multiplier capacitor
  carry a negative DC voltage, the others a positive one (magnitudes are what ratings meet; the
  sign shows reversal);
* a diode's current flows from anode to cathode; ``v_reverse_peak`` is the largest
  V(cathode) - V(anode);
* the load's voltage is V(out+) - V(out-), its current flows from out+ to out-.

Wiring (anode -> cathode for diodes; from -> to for capacitors):

* ``half-wave-rectifier``: return 0. D1 x -> out; C1 out -> 0; load out -> 0.
* ``half-wave-doubler`` (clamp, oven style): return 0. C1 x -> n; D1 0 -> n; load n -> 0
  (across D1), so n swings about 0..+2 Vpk.
* ``full-wave-doubler`` (Delon): return 0 = the capacitors' midpoint m. D1 x -> p; D2 q -> x;
  C1 p -> 0; C2 0 -> q; load p -> q.
* ``bridge-rectifier``: return node b (the source floats through the bridge; it reaches ground
  through the off-state resistance of the diodes and the node shunts only); ground 0 = the
  negative output. D1 x -> p; D2 b -> p; D3 0 -> x; D4 0 -> b; C1 p -> 0; load p -> 0.
* ``multiplier`` (Cockcroft-Walton, n stages): return 0; a0 = x, b0 = 0. For k = 1..n:
  C(2k-1) a_(k-1) -> a_k (oscillating column); C(2k) b_(k-1) -> b_k (smoothing column);
  D(2k-1) b_(k-1) -> a_k; D(2k) a_k -> b_k. Load b_n -> 0. No-load output 2 n Vpk.

Bleeders are resistors ``RB_<slot>`` across their capacitor.

Loads: ``resistor`` a resistor; ``threshold`` a switch that conducts when its voltage exceeds
``threshold``, i = max(0, (v - threshold) / dynamic_resistance), and is 1e10 ohm below it;
``current`` a constant-current sink that draws ``current`` above a compliance voltage of
:data:`COMPLIANCE` x the source peak and is the resistor compliance / current below it (so at
switch-on, from discharged capacitors, it draws in proportion to the output until that is up: an
electronic load cannot pull its current out of a discharged supply; and its current stays
continuous, which a switch-on at exactly 0 V would not be);
``none`` nothing (the bleeders and the diodes' off-state resistance remain).
"""

from __future__ import annotations

import math
from dataclasses import dataclass

from partsmatch.circuit.solver import R_FUSE_OPEN, Element, Netlist
from partsmatch.circuit.spec import CircuitSpec


def ideal_dc(spec: CircuitSpec, voltage_factor: float = 1.0) -> dict[str, float]:
    """Each capacitor's no-load DC voltage with ideal diodes and a stiff source (V), in the sign
    convention above: a start for the steady-state search, not a result."""
    vpk = spec.source.v_peak * voltage_factor
    out: dict[str, float] = {}
    for slot, p in spec.parts.items():
        if p.role != "capacitor":
            continue
        if spec.topology == "multiplier":
            out[slot] = -vpk if slot == "C1" else -2 * vpk
        elif spec.topology == "half-wave-doubler":
            out[slot] = -vpk
        else:
            out[slot] = vpk
    return out


#: Compliance voltage of a constant-current load, as a fraction of the source peak.
COMPLIANCE = 0.01


@dataclass(frozen=True)
class Wiring:
    """Where each slot sits in a netlist: element names and the output nodes."""

    slots: dict[str, str]  # slot -> element name (same as the slot)
    load_element: str | None  # element name of the load, None when absent
    load_nodes: tuple[str, str]  # (out+, out-)
    source: str  # element name of the sine source


def build_netlist(spec: CircuitSpec, *, load: bool = True, fuse_open: bool = False,
                  voltage_factor: float = 1.0) -> tuple[Netlist, Wiring]:
    """The netlist of ``spec`` in one operating condition.

    Args:
        load: False leaves the load out (the no-load and switch-on states).
        fuse_open: the fuse slot is an open circuit (R_FUSE_OPEN).
        voltage_factor: multiplies the source voltage (high line).
    """
    src = spec.source
    vpk = src.v_peak * voltage_factor
    els: list[Element] = []
    ret = "b" if spec.topology == "bridge-rectifier" else "0"
    els.append(Element("V", "VS", "s0", ret, value=vpk))
    node = "s0"
    if src.resistance > 0:
        els.append(Element("R", "RS", node, "s1", value=src.resistance))
        node = "s1"
    if src.inductance > 0:
        els.append(Element("L", "LS", node, "s2", value=src.inductance))
        node = "s2"
    slots: dict[str, str] = {}
    fuse = spec.parts.get("F1")
    if fuse is not None:
        if fuse_open:
            els.append(Element("R", "F1", node, "x", value=R_FUSE_OPEN))
        elif fuse.resistance:
            els.append(Element("R", "F1", node, "x", value=fuse.resistance))
        else:
            els.append(Element("V", "F1", node, "x", value=0.0))
        slots["F1"] = "F1"
        x = "x"
    else:
        x = node

    def cap(slot: str, a: str, b: str) -> None:
        p = spec.parts[slot]
        els.append(Element("C", slot, a, b, value=p.capacitance))
        if p.bleeder:
            els.append(Element("R", f"RB_{slot}", a, b, value=p.bleeder))
        slots[slot] = slot

    def diode(slot: str, anode: str, cathode: str) -> None:
        p = spec.parts[slot]
        els.append(Element("S", slot, anode, cathode, von=p.forward_voltage, ron=p.resistance))
        slots[slot] = slot

    topo = spec.topology
    if topo == "half-wave-rectifier":
        diode("D1", x, "out")
        cap("C1", "out", "0")
        out = ("out", "0")
    elif topo == "half-wave-doubler":
        cap("C1", x, "n")
        diode("D1", "0", "n")
        out = ("n", "0")
    elif topo == "full-wave-doubler":
        diode("D1", x, "p")
        diode("D2", "q", x)
        cap("C1", "p", "0")
        cap("C2", "0", "q")
        out = ("p", "q")
    elif topo == "bridge-rectifier":
        diode("D1", x, "p")
        diode("D2", "b", "p")
        diode("D3", "0", x)
        diode("D4", "0", "b")
        cap("C1", "p", "0")
        out = ("p", "0")
    elif topo == "multiplier":
        n = int(spec.stages or 0)
        for k in range(1, n + 1):
            a_prev = x if k == 1 else f"a{k - 1}"
            b_prev = "0" if k == 1 else f"b{k - 1}"
            cap(f"C{2 * k - 1}", a_prev, f"a{k}")
            cap(f"C{2 * k}", b_prev, f"b{k}")
            diode(f"D{2 * k - 1}", b_prev, f"a{k}")
            diode(f"D{2 * k}", f"a{k}", f"b{k}")
        out = (f"b{n}", "0")
    else:  # parse_circuit already refused it
        raise ValueError(f"unknown topology {topo!r}")
    # the order of slots follows the spec (capacitors, diodes, fuse)
    slots = {s: slots[s] for s in spec.parts if s in slots}

    load_el = None
    ld = spec.load
    if load and ld.type != "none":
        load_el = "LOAD"
        if ld.type == "resistor":
            els.append(Element("R", "LOAD", out[0], out[1], value=ld.resistance))
        elif ld.type == "threshold":
            els.append(Element("S", "LOAD", out[0], out[1], von=ld.threshold,
                               ron=ld.dynamic_resistance))
        elif ld.type == "current":
            vc = COMPLIANCE * vpk
            els.append(Element("S", "LOAD", out[0], out[1], von=vc, ion=ld.current,
                               roff=vc / ld.current))
    omega = 2 * math.pi * src.frequency
    net = Netlist(els, omega, vscale=vpk)
    return net, Wiring(slots=slots, load_element=load_el, load_nodes=out, source="VS")
