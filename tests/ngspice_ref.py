"""ngspice as the independent circuit reference for partsmatch's circuit engine.

The netlists here are written from the agreed wiring text of each topology (see
``tests/reference/README.md``), never from ``partsmatch/circuit/topologies.py``, so that a wiring
mistake cannot pass on both sides. One call, :func:`simulate`, takes a circuit in the shape of the
TOML circuit contract (DESIGN.md section 4; values as bare SI floats or unit text) and returns the
periodic steady state of the loaded or no-load state as per-slot stress values with the same keys
as ``partsmatch.circuit.stress.analyze(...)["by_state"][state]``.

How the steady state is found (ngspice-39, batch mode):

1. A *settle* run of ``settle_periods`` periods with a coarse maximum step (T/1000), starting from
   capacitor voltages of the closed forms (``uic`` with element ``IC=``; slightly below the closed
   form so that the first conduction tops the capacitors up instead of leaving an overcharge that a
   10 Mohm bleeder would take seconds to remove). Its final state (capacitor voltages, inductor
   current) seeds the next run.
2. A *measure* run of three periods with a fine maximum step (T/``steps_per_period``). Measures
   are computed by trapezoidal integration over ngspice's raw time points for periods 2 and 3; the
   run counts as settled when every measure of period 3 equals period 2 within ``settle_tol``
   (relative to the measure's own size, with the floors of :func:`_floor`; mean currents and
   power to ten times that; voltage levels and mean currents only: the peak and RMS of a narrow current pulse and a small ripple's RMS vary with the time step's sampling). If not, settle again from the end
   state, up to ``max_rounds`` times; the last comparison is reported in ``RefResult.drift``.

Part models (as the engine describes them):

Solver options: ``method=gear reltol=1e-4 abstol=1e-9`` first. With the default abstol (1 pA)
ngspice-39 stalled on no-load multipliers and on the no-load doubler with leakage inductance; 1 nA is
far below every current these tests compare.

* diode: ``i = max(0, (v - Vf)/Rs)``. Emulated as a 0 V sense source, a DC source of
  ``Vf - V_KNEE`` (the knee of the junction below), a junction diode ``dref`` (IS=1e-12, N=0.1,
  no junction capacitance, no transit time: no reverse recovery) and a resistor ``Rs``. With N=0.1
  the junction drop is N*Vt*ln(I/IS) = 0.047 V at 1 uA ... 0.077 V at 10 A, so the knee is placed
  within +-0.02 V of ``Vf`` over nine decades of current (N=1 would spread it over 0.45 V).
* threshold load ``i = max(0, (v - Vth)/Rd)``: the same chain with ``Vth`` and ``Rd``.
* constant-current load: an ideal current source; resistor load: a resistor.
* capacitor: ideal, with its bleeder resistor across it; ``i_rms`` is the current of the
  capacitance itself (the bleeder's current is not included; the terminal current is reported as
  ``i_rms_terminal``).
* fuse F1: a 0 V source in series with the winding (an intact fuse is a short).

``rshunt`` (a resistor from every node to ground) is always on: without it ngspice-39 stalls (no
"timestep too small", just no progress) on the clamp doubler with leakage inductance from a
``uic`` start, and stops with "timestep too small" at rshunt=1e16 (NGSPICE.md). Some circuits
still stall with one option set and run with another (the 30 kHz doubler stalls with gear at
rshunt=1e10 and runs with trap, or with gear at 1e9; trap rings after a diode turns off into
the winding inductance, its half-wave rectifier's reverse voltage changing 8 % from period to
period, so it comes second), so :data:`OPTION_LADDER` is tried in order,
a stall being a run over :data:`RUN_TIMEOUT_S`; ``RefResult.options`` names the set that ran. The
effect of rshunt on the stresses is measured in the tests (a run at 1e9 against 1e10: the
stresses move linearly in 1/rshunt, so the 1e10 effect is a ninth of that difference).
"""

from __future__ import annotations

import math
import os
import re
import shutil
import subprocess
import tempfile
from dataclasses import dataclass, field
from functools import lru_cache

import numpy as np

NGSPICE = os.environ.get("NGSPICE", "ngspice")
#: One ngspice run that takes longer than this has stalled (a good run takes 0.1-10 s here);
#: the first option set gets the shorter time, so that a stall costs little; both grow by
#: 0.1 ms per maximum time step of the run.
RUN_TIMEOUT_S = 30
FIRST_TIMEOUT_S = 12

#: Solver option sets, tried in this order when ngspice stalls or stops on a time step (see the
#: module docstring). Every set has reltol=1e-4; the first that runs is reported.
OPTION_LADDER = (
    "method=gear reltol=1e-4 abstol=1e-9 rshunt=1e10",
    "method=trap reltol=1e-4 abstol=1e-9 rshunt=1e10",
    "method=gear reltol=1e-4 abstol=1e-9 rshunt=1e9",
    "method=trap reltol=1e-4 abstol=1e-9 rshunt=1e9",
)

#: Junction model of the diode emulation: sharp knee, no capacitance, no recovery.
DIODE_MODEL = ".model dref D(IS=1e-12 N=0.1 RS=0 CJO=0 TT=0)"
#: Junction drop of ``dref`` at about 10 mA: 0.1 * 0.025865 * ln(1e-2 / 1e-12) = 0.0596 V.
V_KNEE = 0.06

TOPOLOGIES = ("half-wave-rectifier", "half-wave-doubler", "full-wave-doubler",
              "bridge-rectifier", "multiplier")

CAP_KEYS = ("v_peak", "v_min", "v_mean", "v_ac_rms", "i_rms")
DIODE_KEYS = ("v_reverse_peak", "i_avg", "i_peak", "i_rms")
FUSE_KEYS = ("i_rms", "i_peak")
LOAD_KEYS = ("v_mean", "v_peak", "i_mean", "p_mean")
SOURCE_KEYS = ("i_rms",)
VOLTAGE_KEYS = {"v_peak", "v_min", "v_mean", "v_ac_rms", "v_reverse_peak"}


class NgspiceError(RuntimeError):
    """ngspice is missing, failed, or did not reach a periodic steady state."""


@lru_cache(maxsize=1)
def ngspice_version() -> str:
    """``"ngspice-39"`` (the first ``ngspice-NN`` word of ``ngspice -v``); raises if missing."""
    exe = shutil.which(NGSPICE)
    if exe is None:
        raise NgspiceError(f"ngspice executable '{NGSPICE}' not found on PATH")
    out = subprocess.run([exe, "-v"], capture_output=True, text=True, timeout=30)
    m = re.search(r"ngspice-\S+", out.stdout + out.stderr)
    return m.group(0) if m else (out.stdout.strip().splitlines() or ["ngspice (unknown version)"])[0]


def have_ngspice() -> bool:
    return shutil.which(NGSPICE) is not None


# --------------------------------------------------------------------------------------------
# circuit description (independent of partsmatch.circuit.spec)

def _si(value, unit: str) -> float:
    """A bare number is SI already; text goes through partsmatch.units (the shared parser)."""
    if isinstance(value, (int, float)):
        return float(value)
    from partsmatch.units import parse_quantity
    return float(parse_quantity(value, unit))


@dataclass
class Ref:
    topology: str
    stages: int
    vrms: float
    freq: float
    r_src: float
    l_src: float
    load: dict            # {"type": ..., "r"|"i"|"vth","rd": ...}
    caps: dict            # name -> (capacitance, bleeder or None)
    diodes: dict          # name -> (vf, rs)
    fuse: bool

    @property
    def vpk(self) -> float:
        return math.sqrt(2.0) * self.vrms

    @property
    def period(self) -> float:
        return 1.0 / self.freq


def slot_names(topology: str, stages: int = 1) -> tuple[list[str], list[str]]:
    n = {"half-wave-rectifier": 1, "half-wave-doubler": 1, "full-wave-doubler": 2,
         "bridge-rectifier": 1}.get(topology)
    if topology == "multiplier":
        return [f"C{k}" for k in range(1, 2 * stages + 1)], [f"D{k}" for k in range(1, 2 * stages + 1)]
    if n is None:
        raise ValueError(f"unknown topology {topology!r}")
    caps = [f"C{k}" for k in range(1, n + 1)]
    diodes = [f"D{k}" for k in range(1, (4 if topology == "bridge-rectifier" else n) + 1)]
    return caps, diodes


def from_data(data: dict) -> Ref:
    """Read a circuit dict shaped like the TOML contract (DESIGN.md section 4)."""
    topo = data["topology"]
    stages = int(data.get("stages", 1))
    src = data["source"]
    load = dict(data.get("load", {"type": "none"}))
    lt = load.get("type", "none")
    ld: dict = {"type": lt}
    if lt == "resistor":
        ld["r"] = _si(load["resistance"], "ohm")
    elif lt == "current":
        ld["i"] = _si(load["current"], "A")
    elif lt == "threshold":
        ld["vth"] = _si(load["threshold"], "V")
        ld["rd"] = _si(load["dynamic_resistance"], "ohm")
    elif lt != "none":
        raise ValueError(f"unknown load type {lt!r}")
    parts = data.get("parts", {})
    cnames, dnames = slot_names(topo, stages)
    caps, diodes = {}, {}
    for c in cnames:
        p = parts[c]
        b = p.get("bleeder")
        caps[c] = (_si(p["capacitance"], "F"), None if b is None else _si(b, "ohm"))
    for d in dnames:
        p = parts.get(d, {})
        diodes[d] = (_si(p.get("forward_voltage", 0.0), "V"), _si(p.get("resistance", 0.0), "ohm"))
    return Ref(topo, stages, _si(src["voltage"], "V"), _si(src["frequency"], "Hz"),
               _si(src.get("resistance", 0.0), "ohm"), _si(src.get("inductance", 0.0), "H"),
               ld, caps, diodes, "F1" in parts)


# --------------------------------------------------------------------------------------------
# netlists, written from the agreed wiring text

@dataclass
class Wiring:
    src_plus: str          # node the winding's sine drives (after R, L, fuse)
    src_minus: str         # node the sine is referred to
    caps: dict             # name -> (n+, n-)
    diodes: dict           # name -> (anode, cathode)
    load: tuple            # (n+, n-)


def wiring(ref: Ref) -> Wiring:
    t = ref.topology
    if t == "half-wave-rectifier":
        # D1 anode at source node, cathode at OUT; C1 OUT->ground; load OUT->ground.
        return Wiring("s", "0", {"C1": ("out", "0")}, {"D1": ("s", "out")}, ("out", "0"))
    if t == "half-wave-doubler":
        # C1 source node -> N; D1 anode ground, cathode N; load N -> ground.
        return Wiring("s", "0", {"C1": ("s", "n")}, {"D1": ("0", "n")}, ("n", "0"))
    if t == "full-wave-doubler":
        # source M(ground) -> A; D1 A->P; D2 Q->A; C1 P->M; C2 M->Q; load P->Q.
        return Wiring("a", "0", {"C1": ("p", "0"), "C2": ("0", "q")},
                      {"D1": ("a", "p"), "D2": ("q", "a")}, ("p", "q"))
    if t == "bridge-rectifier":
        # source between A and B; D1 A->P, D2 B->P, D3 N->A, D4 N->B; C1 P->N; load P->N; N=ground.
        return Wiring("a", "b", {"C1": ("p", "0")},
                      {"D1": ("a", "p"), "D2": ("b", "p"), "D3": ("0", "a"), "D4": ("0", "b")},
                      ("p", "0"))
    if t == "multiplier":
        n = ref.stages
        caps, diodes = {}, {}
        # C1 S0->A1, C3 A1->A2, ...; C2 ground->B1, C4 B1->B2, ...
        a_prev, b_prev = "s", "0"
        for k in range(1, n + 1):
            caps[f"C{2 * k - 1}"] = (a_prev, f"a{k}")
            caps[f"C{2 * k}"] = (b_prev, f"b{k}")
            a_prev, b_prev = f"a{k}", f"b{k}"
        # D1 ground->A1, D2 A1->B1, D3 B1->A2, D4 A2->B2, ...
        chain = ["0"]
        for k in range(1, n + 1):
            chain += [f"a{k}", f"b{k}"]
        for j in range(1, 2 * n + 1):
            diodes[f"D{j}"] = (chain[j - 1], chain[j])
        return Wiring("s", "0", caps, diodes, (f"b{n}", "0"))
    raise ValueError(f"unknown topology {t!r}")


def closed_form_ic(ref: Ref, no_load: bool) -> dict[str, float]:
    """Starting capacitor voltages (signed, n+ minus n-) from the closed forms, a little low.

    Peak rectification: every capacitor of these topologies charges to about Vpk (the multiplier's
    C1 and the clamp's C1 to Vpk, the others to 2 Vpk), less the diode drops; a start 0.5 %
    below that is topped up by the first conduction. Loads lower the level; the settle run
    takes care of the rest.
    """
    vpk = ref.vpk
    vf = max((d[0] for d in ref.diodes.values()), default=0.0)
    e = 0.995 * max(vpk - vf, 0.0)
    t = ref.topology
    if t == "half-wave-rectifier":
        return {"C1": e}
    if t == "half-wave-doubler":
        return {"C1": -e}                       # n+ = source node, n- = N (N sits above)
    if t == "full-wave-doubler":
        return {"C1": e, "C2": e}
    if t == "bridge-rectifier":
        return {"C1": 0.995 * max(vpk - 2 * vf, 0.0)}
    ic = {}
    for k in range(1, ref.stages + 1):
        ic[f"C{2 * k - 1}"] = -(e if k == 1 else 2 * e)   # A-column: n+ below n-
        ic[f"C{2 * k}"] = -2 * e                            # B-column: n+ below n-
    return ic


def netlist(ref: Ref, *, no_load: bool, tstop: float, tstart: float, tmax: float,
            cap_ic: dict[str, float], il_ic: float, options: str,
            outfile: str) -> tuple[str, list[str]]:
    """Netlist text and the list of vectors written to ``outfile`` (after ``time``)."""
    w = wiring(ref)
    lines = [f"* partsmatch reference: {ref.topology} ({'no load' if no_load else 'loaded'})"]
    vecs: list[str] = []
    # source: sine from src_minus through fuse sense, R, L to src_plus
    lines.append(f"vsrc x1 {w.src_minus} dc 0 sin(0 {ref.vpk!r} {ref.freq!r} 0 0 0)")
    lines.append("vf1 x1 x2 dc 0")            # F1 (an intact fuse) / source current sense
    node = "x2"
    if ref.r_src > 0:
        lines.append(f"rw {node} x3 {ref.r_src!r}")
        node = "x3"
    if ref.l_src > 0:
        lines.append(f"lw {node} x4 {ref.l_src!r} ic={il_ic!r}")
        node = "x4"
    lines.append(f"vlink {node} {w.src_plus} dc 0")
    vecs += ["i(vf1)"]
    for name, (np_, nn) in w.caps.items():
        c, bleed = ref.caps[name]
        lo = name.lower()
        lines.append(f"vi{lo} {np_} k{lo} dc 0")
        lines.append(f"{lo} k{lo} {nn} {c!r} ic={cap_ic.get(name, 0.0)!r}")
        if bleed:
            lines.append(f"rb{lo} {np_} {nn} {bleed!r}")
        vecs += [f"i(vi{lo})"]
    for name, (an, ka) in w.diodes.items():
        vf, rs = ref.diodes[name]
        lo = name.lower()
        lines.append(f"vi{lo} {an} j{lo}a dc 0")
        lines.append(f"vo{lo} j{lo}a j{lo}b dc {vf - V_KNEE!r}")
        if rs > 0:
            lines.append(f"d{lo} j{lo}b j{lo}c dref")
            lines.append(f"rs{lo} j{lo}c {ka} {rs!r}")
        else:
            lines.append(f"d{lo} j{lo}b {ka} dref")
        vecs += [f"i(vi{lo})"]
    lp, ln = w.load
    ld = ref.load
    if not no_load and ld["type"] != "none":
        lines.append(f"viload {lp} jla dc 0")
        if ld["type"] == "resistor":
            lines.append(f"rload jla {ln} {ld['r']!r}")
        elif ld["type"] == "current":
            lines.append(f"iload jla {ln} dc {ld['i']!r}")
        elif ld["type"] == "threshold":
            lines.append(f"voload jla jlb dc {ld['vth'] - V_KNEE!r}")
            lines.append("dload jlb jlc dref")
            lines.append(f"rdload jlc {ln} {ld['rd']!r}")
        vecs += ["i(viload)"]
    nodes = sorted({n for pair in list(w.caps.values()) + list(w.diodes.values()) + [w.load]
                    for n in pair if n != "0"} | {w.src_plus, w.src_minus} - {"0"})
    vecs += [f"v({n})" for n in nodes]
    lines.append(DIODE_MODEL)
    lines.append(".options " + options)
    tstep = tmax
    lines.append(f".tran {tstep!r} {tstop!r} {tstart!r} {tmax!r} uic")
    lines += [".control", "set wr_singlescale", "set wr_vecnames", "option numdgt=12", "run",
              f"wrdata {outfile} " + " ".join(vecs), "quit", ".endc", ".end"]
    return "\n".join(lines) + "\n", vecs


def _run(text: str, workdir: str, name: str, timeout: float = RUN_TIMEOUT_S) -> None:
    path = os.path.join(workdir, name + ".cir")
    with open(path, "w") as fh:
        fh.write(text)
    try:
        p = subprocess.run([NGSPICE, "-b", path], capture_output=True, text=True, cwd=workdir,
                           timeout=timeout)
    except subprocess.TimeoutExpired:
        raise NgspiceError(f"ngspice stalled on {name} (> {timeout} s)") from None
    log = p.stdout + p.stderr
    if p.returncode != 0 or "timestep too small" in log or "simulation(s) aborted" in log:
        raise NgspiceError(f"ngspice failed on {name}: " + " | ".join(
            ln for ln in log.splitlines() if re.search(r"(?i)error|too small|abort", ln))[:800])


def _read(outfile: str) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    with open(outfile) as fh:
        header = fh.readline().split()
    data = np.loadtxt(outfile, skiprows=1, ndmin=2)
    cols = {h.lower(): data[:, j] for j, h in enumerate(header)}
    t = cols.pop("time")
    # drop repeated time points (breakpoints), keep the last value
    keep = np.concatenate([np.diff(t) > 0, [True]])
    return t[keep], {k: v[keep] for k, v in cols.items()}


# --------------------------------------------------------------------------------------------
# measures

def _window(t, y, t0, t1):
    """Samples of y on [t0, t1] with interpolated end points."""
    m = (t > t0) & (t < t1)
    tt = np.concatenate([[t0], t[m], [t1]])
    yy = np.concatenate([[np.interp(t0, t, y)], y[m], [np.interp(t1, t, y)]])
    return tt, yy


def _mean(tt, yy):
    return float(np.trapezoid(yy, tt) / (tt[-1] - tt[0])) if hasattr(np, "trapezoid") else \
        float(np.trapz(yy, tt) / (tt[-1] - tt[0]))


def _rms(tt, yy):
    return math.sqrt(max(_mean(tt, yy * yy), 0.0))


def _signed_peak(y):
    hi, lo = float(np.max(y)), float(np.min(y))
    return hi if abs(hi) >= abs(lo) else lo


def measures(ref: Ref, t, cols, t0, t1, no_load: bool) -> dict:
    """Per-slot stress over [t0, t1] with the keys of the engine's by_state[state]."""
    w = wiring(ref)

    def v(n):
        return np.zeros_like(t) if n == "0" else cols[f"v({n})"]

    slots: dict[str, dict] = {}
    for name, (np_, nn) in w.caps.items():
        lo = name.lower()
        tt, vc = _window(t, v(np_) - v(nn), t0, t1)
        _, ic = _window(t, cols[f"i(vi{lo})"], t0, t1)
        c, bleed = ref.caps[name]
        ib = vc / bleed if bleed else 0.0 * vc
        vm = _mean(tt, vc)
        slots[name] = {"role": "capacitor", "v_peak": _signed_peak(vc), "v_min": float(np.min(vc)),
                       "v_mean": vm, "v_ac_rms": _rms(tt, vc - vm), "i_rms": _rms(tt, ic - ib),
                       "i_rms_terminal": _rms(tt, ic)}
    for name, (an, ka) in w.diodes.items():
        lo = name.lower()
        tt, vr = _window(t, v(ka) - v(an), t0, t1)
        _, idd = _window(t, cols[f"i(vi{lo})"], t0, t1)
        slots[name] = {"role": "diode", "v_reverse_peak": float(np.max(vr)),
                       "i_avg": _mean(tt, idd), "i_peak": float(np.max(idd)), "i_rms": _rms(tt, idd)}
    tt, isrc = _window(t, cols["i(vf1)"], t0, t1)
    if ref.fuse:
        slots["F1"] = {"role": "fuse", "i_rms": _rms(tt, isrc),
                       "i_peak": float(np.max(np.abs(isrc)))}
    lp, ln = w.load
    _, vl = _window(t, v(lp) - v(ln), t0, t1)
    if "i(viload)" in cols:
        _, il = _window(t, cols["i(viload)"], t0, t1)
    else:
        il = 0.0 * vl
    load = {"v_mean": _mean(tt, vl), "v_peak": _signed_peak(vl), "i_mean": _mean(tt, il),
            "p_mean": _mean(tt, vl * il)}
    return {"slots": slots, "load": load, "source": {"i_rms": _rms(tt, isrc)}}


def current_scale(ref: Ref) -> float:
    """Charging-current scale of the circuit, Vpk * 2 pi f * C_max (A)."""
    return ref.vpk * 2 * math.pi * ref.freq * max(c for c, _ in ref.caps.values())


def current_floor(ref: Ref, no_load: bool) -> float:
    """Smallest current (A) a comparison or settle check treats as meaningful.

    ngspice's charge tolerance (reltol 1e-4 of C * V on each capacitor) spread over a period is
    about 1e-4 / (2 pi) of :func:`current_scale`; a current below about 1e-4 of that scale is
    resolved by neither simulator, so that is the floor when loaded. With no load the currents
    are what the bleeders draw: the floor is the larger of that and 5 % of Vpk / (smallest
    bleeder). With no bleeder either there is no DC path and the currents are the simulators'
    residue (ngspice's come from rshunt, whose 10 Gohm with a multiplier's stage capacitance
    settles over tens of seconds, and from its charge tolerance): 1e-2 of the scale.
    """
    scale = current_scale(ref)
    if not no_load and ref.load["type"] != "none":
        return 1e-4 * scale
    bleeders = [b for _, b in ref.caps.values() if b]
    if bleeders:
        return max(0.05 * ref.vpk / min(bleeders), 1e-4 * scale)
    return 1e-2 * scale


def _floor(ref: Ref, key: str, no_load: bool) -> float:
    """Floor of the relative settle check: volts 1e-3 Vpk, amps :func:`current_floor`."""
    if key in VOLTAGE_KEYS or key.startswith("v_"):
        return 1e-3 * ref.vpk
    if key.startswith("p_"):
        return 1e-3 * ref.vpk * current_scale(ref)
    return current_floor(ref, no_load)


def _drift(ref: Ref, a: dict, b: dict, no_load: bool) -> tuple[float, str]:
    """Largest relative change of any measure between two periods, and which one."""
    worst, where = 0.0, ""
    for sec in ("slots", "load", "source"):
        ga, gb = a[sec], b[sec]
        items = ga.items() if sec == "slots" else [(None, ga)]
        for slot, vals in items:
            other = gb[slot] if slot else gb
            for k, x in vals.items():
                if k == "role" or k in ("i_peak", "i_rms", "i_rms_terminal", "v_ac_rms"):
                    # the peak and RMS of a narrow pulse (and a small ripple's RMS) differ from
                    # period to period by the time step's sampling, not by settling: the
                    # voltage levels and the mean currents (charge balance) decide
                    continue
                y = other[k]
                den = max(abs(x), abs(y), _floor(ref, k, no_load))
                if not k.startswith("v_"):
                    # mean currents carry the integration's charge error (reltol 1e-4 of C V
                    # per step): held to ten times the voltages' settle tolerance
                    den *= 10.0
                if abs(x - y) / den > worst:
                    worst, where = abs(x - y) / den, f"{slot or sec}.{k}"
    return worst, where


# --------------------------------------------------------------------------------------------
# the runner

@dataclass
class RefResult:
    state: str
    values: dict                      # {"slots": ..., "load": ..., "source": ...}
    previous: dict                    # the same for the period before
    drift: float                      # largest relative change between the two periods
    rounds: int
    options: str                      # the ngspice option set that ran
    version: str
    wall_s: float
    netlist: str = ""
    waveforms: dict = field(default_factory=dict)
    failures: list = field(default_factory=list)   # option sets that stalled or failed first

    def get(self, slot: str, key: str) -> float:
        if slot in ("load", "source"):
            return self.values[slot][key]
        return self.values["slots"][slot][key]


def simulate(data: dict | Ref, *, no_load: bool = False, settle_periods: int = 40,
             steps_per_period: int = 4000, settle_steps_per_period: int = 1000,
             settle_tol: float = 2e-3, max_rounds: int = 8,
             options: tuple[str, ...] = OPTION_LADDER, ic: dict[str, float] | None = None,
             keep_waveforms: bool = False) -> RefResult:
    """Periodic steady state of ``data`` (loaded, or ``no_load=True``) computed by ngspice."""
    import time as _time

    ref = data if isinstance(data, Ref) else from_data(data)
    version = ngspice_version()
    T = ref.period
    cap_ic = dict(ic) if ic is not None else closed_form_ic(ref, no_load)
    il = 0.0
    w = wiring(ref)
    start = _time.perf_counter()
    with tempfile.TemporaryDirectory(prefix="pm-ngspice-") as tmp:
        def go(kind, n_periods, tmax, tstart, opts):
            out = os.path.join(tmp, f"{kind}.dat")
            text, _ = netlist(ref, no_load=no_load, tstop=n_periods * T, tstart=tstart,
                              tmax=tmax, cap_ic=cap_ic, il_ic=il, options=opts, outfile=out)
            first = opts == options[0]
            steps = (n_periods * T - 0.0) / tmax
            _run(text, tmp, kind, (FIRST_TIMEOUT_S if first else RUN_TIMEOUT_S) + 1e-4 * steps)
            t, cols = _read(out)
            return text, t, cols

        def end_state(t, cols):
            def v(n):
                return 0.0 if n == "0" else float(cols[f"v({n})"][-1])
            caps = {name: v(a) - v(b) for name, (a, b) in w.caps.items()}
            return caps, float(cols["i(vf1)"][-1])

        ladder = list(options)
        failures: list[str] = []

        def attempt(kind, n_periods, tmax, tstart):
            # the option set that ran last is kept for the following runs
            while ladder:
                try:
                    return go(kind, n_periods, tmax, tstart, ladder[0])
                except NgspiceError as exc:
                    failures.append(f"[{ladder[0]}] {exc}")
                    ladder.pop(0)
            raise NgspiceError("every option set failed: " + "; ".join(failures))

        drift, drift_at, rounds, text = math.inf, "", 0, ""
        prev = cur = None
        t = cols = None
        n_settle = settle_periods
        while rounds < max_rounds:
            rounds += 1
            if n_settle > 0:
                _, ts, cs = attempt("settle", n_settle, T / settle_steps_per_period,
                                        (n_settle - 0.05) * T)
                cap_ic, il = end_state(ts, cs)
            text, t, cols = attempt("measure", 3, T / steps_per_period, 0.9 * T)
            prev = measures(ref, t, cols, 1 * T, 2 * T, no_load)
            cur = measures(ref, t, cols, 2 * T, 3 * T, no_load)
            drift, drift_at = _drift(ref, prev, cur, no_load)
            if drift <= settle_tol:
                break
            cap_ic, il = end_state(t, cols)
            n_settle = min(2 * n_settle, 400) if n_settle else settle_periods
    wall = _time.perf_counter() - start
    if drift > settle_tol:
        raise NgspiceError(f"{ref.topology}: no periodic steady state after {rounds} rounds "
                           f"(period-to-period change {drift:.2e} of {drift_at} > {settle_tol:.0e})")
    wf = {}
    if keep_waveforms:
        wf = {"t": t, **cols}
    return RefResult("no_load" if no_load else "loaded", cur, prev, drift, rounds, ladder[0],
                     version, wall, text, wf, failures)


def _combine(a: dict, b: dict, fn) -> dict:
    """Apply ``fn(x_a, x_b)`` to every number of two measure trees of the same shape."""
    out: dict = {}
    for k, v in a.items():
        if isinstance(v, dict):
            out[k] = _combine(v, b[k], fn)
        elif isinstance(v, (int, float)) and not isinstance(v, bool):
            out[k] = fn(v, b[k])
        else:
            out[k] = v
    return out


def simulate_extrapolated(data: dict | Ref, **kw) -> RefResult:
    """:func:`simulate` at rshunt 1e10 and 1e9, extrapolated linearly in 1/rshunt to no shunt.

    rshunt puts 10 Gohm from every node to ground, the diode chains' inner nodes included: in a
    multiplier with kilovolt nodes and a load of about 1 mA that is a few percent of the load
    (the 3-stage demo: every diode's mean current 0.6-2.7 % above the load's at 1e10, ten times
    that at 1e9, and C1's ripple 41.73 V at 1e10, 48.88 V at 1e9). The stresses move linearly in
    1/rshunt over that range, so x(no shunt) = x(1e10) - (x(1e9) - x(1e10)) / 9. Both runs use
    the same integration method; ``RefResult.options`` names both.
    """
    ladders = {}
    for r, text in ((1e10, "rshunt=1e10"), (1e9, "rshunt=1e9")):
        ladders[r] = tuple(o for o in OPTION_LADDER if o.endswith(text))
    kw.pop("options", None)
    a = simulate(data, options=ladders[1e10], **kw)
    method = a.options.split()[0]
    b = simulate(data, options=tuple(sorted(ladders[1e9], key=lambda o: not o.startswith(method))),
                 **{**kw, "keep_waveforms": False})

    def extra(x, y):
        return x - (y - x) / 9.0

    values = _combine(a.values, b.values, extra)
    previous = _combine(a.previous, b.previous, extra)
    return RefResult(a.state, values, previous, a.drift, a.rounds,
                     f"{a.options} | {b.options} (extrapolated to no rshunt)", a.version,
                     a.wall_s + b.wall_s, a.netlist, a.waveforms, a.failures + b.failures)


def dump(path: str) -> None:
    """Write ngspice's steady state of every comparison case to ``path`` (JSON, for the record).

    The tests do not read this file (they run ngspice); it documents what the reference gave,
    so a change of ngspice version or of a netlist shows up in ``git diff``.
    """
    import importlib.util
    import json
    from pathlib import Path

    here = Path(__file__).resolve().parent
    spec = importlib.util.spec_from_file_location("_cases", here / "test_circuit_ngspice.py")
    mod = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(mod)
    out = {"ngspice": ngspice_version(), "options_ladder": list(OPTION_LADDER),
           "diode_model": DIODE_MODEL, "cases": {}}
    for name, data in mod.CASES.items():
        states = ["loaded", "no_load"] if data["load"]["type"] != "none" else ["no_load"]
        out["cases"][name] = {"circuit": data}
        for st in states:
            kw = mod._ref_kw(name, st == "no_load")
            run = simulate_extrapolated if kw.pop("extrapolate", False) else simulate
            r = run(data, no_load=(st == "no_load"), **kw)
            out["cases"][name][st] = {"values": r.values, "drift": r.drift, "rounds": r.rounds,
                                      "options": r.options}
    Path(path).write_text(json.dumps(out, indent=1, sort_keys=True) + "\n")


if __name__ == "__main__":
    import sys

    dump(sys.argv[1] if len(sys.argv) > 1 else
         os.path.join(os.path.dirname(os.path.abspath(__file__)), "reference", "ngspice_steady.json"))
