"""Time-domain periodic steady state of piecewise-linear circuits, by exact state-space stepping.

A :class:`Netlist` holds resistors (R), capacitors (C), inductors (L), an ideal sine/DC voltage
source (V) and two-state switches (S). A switch is *on* while the voltage across it exceeds
``von`` and then behaves either as ``von`` in series with ``ron`` (a diode: forward voltage plus
series resistance; a threshold load: threshold voltage plus dynamic resistance) or as a constant
current ``ion`` (a constant-current load); *off* it is the resistance ``roff`` (default
:data:`R_OFF` = 1e10 ohm, the size of shunt ngspice users add for the same purpose). Every node
also has :data:`R_SHUNT` = 1e12 ohm to ground, so that no node floats in any mode (its current
is below 10 nA at 10 kV).

In each mode (the on/off pattern of the switches) the circuit is linear. Writing the capacitor
voltages and inductor currents as ``x`` and the source inputs as ``u = [cos wt, sin wt, 1]``, the
augmented state ``z = [x, u]`` obeys ``z' = M z``; the resistive network is solved once per mode
by modified nodal analysis with capacitors as voltage sources and inductors as current sources.
The state then moves exactly by ``z(t + h) = expm(M h) z(t)`` (cached per mode; batches of steps
use cached powers). Switching instants are located inside a step to 1e-9 of the source voltage
(a safeguarded Newton iteration on the switch condition with the exact partial-step propagator);
a cubic Hermite check between samples catches a condition that dips across its boundary and
back inside one step.

The one-period map is affine for a fixed sequence of modes, so the periodic orbit is found by
one linear solve ``x* = (I - Phi_xx)^-1 b`` (a Newton step on the period map), repeated until a
simulated period from ``x*`` returns to ``x*`` within ``tol`` (the *verified* residual). Because
the switching conditions are continuous across each switching surface (a diode turns on and off
at zero current), the frozen-sequence map is the period map's Jacobian, and the iteration
converges in a few periods whatever the bleeder's time constant: a 10 Mohm bleeder's seconds of
settling are never simulated.
"""

from __future__ import annotations

import math
from dataclasses import dataclass, field

import numpy as np

from partsmatch.errors import SimulationError

R_OFF = 1e10  #: ohm, a switch (diode, threshold load) that is off
R_SHUNT = 1e12  #: ohm, from every node to ground
R_FUSE_OPEN = 1e14  #: ohm, an open fuse: far above R_OFF, so that it takes the whole voltage
STEPS_PER_PERIOD = 512
CHUNK = 128  #: first chunk of steps taken at once after an event (doubles while none comes)
GRAZING_MARGIN = 1e-3  #: a grazing orbit's closest diode comes this near conduction (x peak)
MU_FIRST = 0.05  #: regularisation after a first rejected Newton step
MU_MAX = 20.0  #: beyond this a plain simulated period is taken instead
STEP_LIMIT = 1.0  #: largest Newton step of a state, in units of its scale (source peak)
#: Simulated periods the steady-state search may take: this many, plus PERIODS_PER_CAPACITOR
#: for each capacitor. A flat 150 failed a 10-stage multiplier (470 pF, 40 kHz, no load), whose
#: search needed 185; the 3-stage demo needs at most 15, a 10-stage one 20-185.
PERIODS_BASE = 150
PERIODS_PER_CAPACITOR = 10

_PADE13 = (64764752532480000.0, 32382376266240000.0, 7771770303897600.0, 1187353796428800.0,
           129060195264000.0, 10559470521600.0, 670442572800.0, 33522128640.0, 1323241920.0,
           40840800.0, 960960.0, 16380.0, 182.0, 1.0)
_THETA13 = 5.371920351148152


def expm(a: np.ndarray) -> np.ndarray:
    """Matrix exponential by scaling and squaring with the [13/13] Pade approximant
    (N. J. Higham, SIAM J. Matrix Anal. Appl. 26 (2005) 1179-1193). Kept here because
    scipy.linalg.expm's per-call overhead dominates for the small matrices of these circuits."""
    norm = np.abs(a).sum(axis=0).max()
    s = 0
    if norm > _THETA13:
        s = int(math.ceil(math.log2(norm / _THETA13)))
        a = a / (2.0 ** s)
    b = _PADE13
    ident = np.eye(a.shape[0])
    a2 = a @ a
    a4 = a2 @ a2
    a6 = a4 @ a2
    u = a @ (a6 @ (b[13] * a6 + b[11] * a4 + b[9] * a2) + b[7] * a6 + b[5] * a4 + b[3] * a2
             + b[1] * ident)
    v = a6 @ (b[12] * a6 + b[10] * a4 + b[8] * a2) + b[6] * a6 + b[4] * a4 + b[2] * a2 \
        + b[0] * ident
    r = np.linalg.solve(v - u, v + u)
    for _ in range(s):
        r = r @ r
    return r


@dataclass
class Element:
    """One netlist element between nodes ``a`` and ``b`` (current counted from a to b).

    kind: ``R`` (value ohm), ``C`` (value F; state v = V(a) - V(b)), ``L`` (value H; state i
    from a to b), ``V`` (V(a) - V(b) = value sin(wt) + dc), ``S`` (switch; see module text;
    ``fixed`` True/False holds it on/off).
    """

    kind: str
    name: str
    a: str
    b: str
    value: float = 0.0
    dc: float = 0.0
    von: float = 0.0
    ron: float | None = None
    ion: float | None = None
    roff: float = R_OFF
    fixed: bool | None = None


@dataclass
class _Mode:
    M: np.ndarray
    Y: np.ndarray  # outputs: node voltages, then (v, i) of each element
    G: np.ndarray  # switch conditions (v - von), one row per switch
    GM: np.ndarray
    sgn: np.ndarray  # +1 on, -1 off, 0 fixed
    P: np.ndarray
    powers: list[np.ndarray] = field(default_factory=list)
    eig: object = None
    settle: np.ndarray | None = None

    def power(self, j: int) -> np.ndarray:
        while len(self.powers) <= j:
            last = self.powers[-1] if self.powers else None
            self.powers.append(self.P if last is None else last @ last)
        return self.powers[j]


@dataclass
class Segment:
    """Samples of one constant-mode stretch: times t (s), augmented states Z (n_z x k)."""

    t: np.ndarray
    Z: np.ndarray
    mode: tuple[bool, ...]


def segment_weights(t: np.ndarray) -> np.ndarray:
    """Quadrature weights ``w`` with ``w @ y`` the integral of ``y`` over one segment's samples.

    Within a segment the network is linear and its waveforms are smooth, so Simpson's rule
    (error O(h^4)) replaces the trapezoid (O(h^2): with 512 samples a period and 15-20 in a
    multiplier's diode pulse, the trapezoid left the diodes' mean currents 1-2 % off their
    charge balance). The samples are uniform but for the last interval (an event, or the run's
    end): Simpson pairs cover the uniform run; a left-over interval is integrated by the
    parabola through its two points and the one before it (or after it, at the start); a
    segment of one interval by the trapezoid.
    The weights sum to ``t[-1] - t[0]`` (constants are integrated exactly).
    """
    n = len(t) - 1
    w = np.zeros(len(t))
    if n < 1:
        return w
    h = np.diff(t)
    if n == 1 or h[0] <= 0:
        w[:-1] += 0.5 * h
        w[1:] += 0.5 * h
        return w
    off = np.abs(h - h[0]) > 1e-6 * h[0]
    uniform = int(np.argmax(off)) if off.any() else n  # leading intervals of the first's size
    m = uniform - uniform % 2
    if m:
        third = h[0] / 3.0
        w[0:m + 1:2] += 2 * third
        w[1:m:2] += 4 * third
        w[0] -= third
        w[m] -= third
    for k in range(m, n):  # the interval [t[k], t[k+1]], by a parabola with a third point
        hk = h[k]
        if k and h[k - 1] > 0:  # the point before: t[k-1], t[k], t[k+1]
            near, far, side = k, k + 1, k - 1
            h1 = h[k - 1]
        elif k + 2 <= n and h[k + 1] > 0:  # the point after, mirrored: t[k+2], t[k+1], t[k]
            near, far, side = k + 1, k, k + 2
            h1 = h[k + 1]
        else:
            w[k] += 0.5 * hk
            w[k + 1] += 0.5 * hk
            continue
        c = hk * hk / (6.0 * (h1 + hk))
        d = hk * c / h1
        w[side] -= d
        w[near] += 0.5 * hk + c + d
        w[far] += 0.5 * hk - c
    return w


def quadrature_weights(segments: list["Segment"]) -> np.ndarray:
    """Weights for the integral over a run's concatenated samples: :func:`segment_weights`
    within each segment, the trapezoid across the short gaps between segments (a mode starts
    a moment after its event)."""
    parts = []
    for k, seg in enumerate(segments):
        w = segment_weights(seg.t)
        if k:
            gap = float(seg.t[0] - segments[k - 1].t[-1])
            parts[-1][-1] += 0.5 * gap
            w[0] += 0.5 * gap
        parts.append(w)
    return np.concatenate(parts) if parts else np.zeros(0)


@dataclass
class Run:
    segments: list[Segment]
    z_end: np.ndarray
    phi: np.ndarray | None
    events: int


@dataclass
class SteadyState:
    """A verified periodic orbit: its state ``x`` at t = 0, the run of one period from it,
    the Newton ``iterations`` taken, the ``periods`` simulated in all (trials included) and the
    verified ``residual`` (largest relative change of a state over one period)."""

    x: np.ndarray
    run: Run
    iterations: int
    residual: float
    periods: int = 0


class Netlist:
    """A piecewise-linear circuit driven by one sine source of angular frequency ``omega``.

    Args:
        elements: the elements; node ``"0"`` is ground.
        omega: rad/s of the source.
        vscale: a voltage scale (V), e.g. the source peak, for tolerances.
        steps: fixed steps per source period (sampling and event search grid).
    """

    def __init__(self, elements: list[Element], omega: float, vscale: float,
                 steps: int = STEPS_PER_PERIOD) -> None:
        self.elements = elements
        self.omega = omega
        self.period = 2 * math.pi / omega
        self.h = self.period / steps
        self.steps = steps
        self.vscale = vscale
        self.vtol = 1e-9 * vscale
        # the moment after an event at which the new mode is judged and stepped from: 20 time
        # constants L / R_OFF of an inductor left in series with off switches (the only
        # non-physical fast dynamics here), capped at 1e-5 of a period so as not to hide the
        # circuit's own fast dynamics (R C of a conducting diode and its capacitor)
        l_max = max((e.value for e in elements if e.kind == "L"), default=0.0)
        self._settle = min(1e-5 * self.period, max(1e-12 * self.period, 20 * l_max / R_OFF))
        nodes: list[str] = []
        for e in elements:
            for n in (e.a, e.b):
                if n != "0" and n not in nodes:
                    nodes.append(n)
        self.nodes = nodes
        self.node_index = {n: i for i, n in enumerate(nodes)}
        self.caps = [e for e in elements if e.kind == "C"]
        self.inds = [e for e in elements if e.kind == "L"]
        self.switches = [e for e in elements if e.kind == "S"]
        self.nx = len(self.caps) + len(self.inds)
        self.nz = self.nx + 3
        self.col_cos, self.col_sin, self.col_one = self.nx, self.nx + 1, self.nx + 2
        self.state_names = [c.name for c in self.caps] + [i.name for i in self.inds]
        self.elem_index = {e.name: k for k, e in enumerate(elements)}
        self._modes: dict[tuple[bool, ...], _Mode] = {}

    # --- one mode ---------------------------------------------------------------------------
    def _build(self, mode: tuple[bool, ...]) -> _Mode:
        nn = len(self.nodes)
        vbranches = [e for e in self.elements if e.kind in ("C", "V")]
        nb = len(vbranches)
        n = nn + nb
        K = np.zeros((n, n))
        rhs = np.zeros((n, self.nz))
        idx = self.node_index
        one = self.col_one

        def stamp_g(a: str, b: str, g: float) -> None:
            ia, ib = idx.get(a), idx.get(b)
            if ia is not None:
                K[ia, ia] += g
            if ib is not None:
                K[ib, ib] += g
            if ia is not None and ib is not None:
                K[ia, ib] -= g
                K[ib, ia] -= g

        def inject(a: str, b: str, col: int, amount: float) -> None:
            """A current ``amount * z[col]`` flowing through an element from a to b."""
            ia, ib = idx.get(a), idx.get(b)
            if ia is not None:
                rhs[ia, col] -= amount
            if ib is not None:
                rhs[ib, col] += amount

        for i in range(nn):
            K[i, i] += 1.0 / R_SHUNT
        sw_on = dict(zip((s.name for s in self.switches), mode))
        for e in self.elements:
            if e.kind == "R":
                stamp_g(e.a, e.b, 1.0 / e.value)
            elif e.kind == "L":
                inject(e.a, e.b, len(self.caps) + self.inds.index(e), 1.0)
            elif e.kind == "S":
                if sw_on[e.name]:
                    if e.ion is not None:
                        inject(e.a, e.b, one, e.ion)
                    else:
                        g = 1.0 / e.ron
                        stamp_g(e.a, e.b, g)
                        inject(e.a, e.b, one, -g * e.von)
                else:
                    stamp_g(e.a, e.b, 1.0 / e.roff)
        for k, e in enumerate(vbranches):
            row = nn + k
            ia, ib = idx.get(e.a), idx.get(e.b)
            if ia is not None:
                K[row, ia] += 1.0
                K[ia, row] += 1.0
            if ib is not None:
                K[row, ib] -= 1.0
                K[ib, row] -= 1.0
            if e.kind == "C":
                rhs[row, self.caps.index(e)] = 1.0
            else:
                rhs[row, self.col_sin] = e.value
                rhs[row, one] = e.dc
        try:
            S = np.linalg.solve(K, rhs)
        except np.linalg.LinAlgError:
            raise SimulationError("the circuit's network is singular in one of its switching "
                                  "states (a loop of capacitors and sources?)") from None
        vnode = S[:nn]

        def vrow(e: Element) -> np.ndarray:
            r = np.zeros(self.nz)
            if e.a in idx:
                r += vnode[idx[e.a]]
            if e.b in idx:
                r -= vnode[idx[e.b]]
            return r

        M = np.zeros((self.nz, self.nz))
        branch_row = {e.name: nn + k for k, e in enumerate(vbranches)}
        for k, c in enumerate(self.caps):
            M[k] = S[branch_row[c.name]] / c.value
        for k, ind in enumerate(self.inds):
            M[len(self.caps) + k] = vrow(ind) / ind.value
        w = self.omega
        M[self.col_cos, self.col_sin] = -w
        M[self.col_sin, self.col_cos] = w
        Y = np.zeros((nn + 2 * len(self.elements), self.nz))
        Y[:nn] = vnode
        for k, e in enumerate(self.elements):
            v = vrow(e)
            if e.kind == "R":
                i = v / e.value
            elif e.kind in ("C", "V"):
                i = S[branch_row[e.name]].copy()
            elif e.kind == "L":
                i = np.zeros(self.nz)
                i[len(self.caps) + self.inds.index(e)] = 1.0
            else:
                i = np.zeros(self.nz)
                if sw_on[e.name]:
                    if e.ion is not None:
                        i[one] = e.ion
                    else:
                        i = v / e.ron
                        i[one] -= e.von / e.ron
                else:
                    i = v / e.roff
            Y[nn + 2 * k] = v
            Y[nn + 2 * k + 1] = i
        G = np.zeros((len(self.switches), self.nz))
        sgn = np.zeros(len(self.switches))
        for k, s in enumerate(self.switches):
            G[k] = vrow(s)
            G[k, one] -= s.von
            sgn[k] = 0.0 if s.fixed is not None else (1.0 if mode[k] else -1.0)
        return _Mode(M=M, Y=Y, G=G, GM=G @ M, sgn=sgn, P=expm(M * self.h))

    def mode(self, mode: tuple[bool, ...]) -> _Mode:
        md = self._modes.get(mode)
        if md is None:
            if len(self._modes) > 4096:
                self._modes.clear()
            md = self._modes[mode] = self._build(mode)
            md.settle = self._expm(md, self._settle)
        return md

    def consistent_mode(self, z: np.ndarray) -> tuple[bool, ...]:
        """A switch pattern whose conditions hold at state z (flipping the worst one at a time)."""
        mode = tuple(bool(s.fixed) if s.fixed is not None else False for s in self.switches)
        for _ in range(4 * len(self.switches) + 4):
            md = self.mode(mode)
            s = md.sgn * (md.G @ z)
            k = int(np.argmin(s)) if len(s) else 0
            if not len(s) or s[k] >= -self.vtol:
                return mode
            mode = mode[:k] + (not mode[k],) + mode[k + 1:]
        raise SimulationError("no consistent switching state found (the circuit chatters)")

    # --- stepping ---------------------------------------------------------------------------
    def _batch(self, md: _Mode, z: np.ndarray, k: int) -> np.ndarray:
        """States after 0..k full steps from z (columns)."""
        out = np.empty((self.nz, k + 1))
        out[:, 0] = z
        filled, j = 1, 0
        while filled < k + 1:
            m = min(filled, k + 1 - filled)
            out[:, filled:filled + m] = md.power(j) @ out[:, :m]
            filled += m
            j += 1
        return out

    def _pow(self, md: _Mode, k: int) -> np.ndarray:
        out = np.eye(self.nz)
        j = 0
        while k:
            if k & 1:
                out = md.power(j) @ out
            k >>= 1
            j += 1
        return out

    def _stepprop(self, md: _Mode, j: int, k: int, e_rem: np.ndarray | None) -> np.ndarray:
        """Propagator over the first j samples of a chunk of k full steps (+ rem)."""
        if j <= k:
            return self._pow(md, j)
        return e_rem @ self._pow(md, k)

    def _first_violation(self, md: _Mode, Z: np.ndarray, dts: np.ndarray) -> tuple[int, float]:
        """Index i of the first interval (between columns i and i+1) in which a switch condition
        is broken, and the fraction of it where the break is first seen (1.0: at its end)."""
        if not len(md.sgn) or Z.shape[1] < 2:
            return -1, 1.0
        s = md.sgn[:, None] * (md.G @ Z)
        bad_end = (s[:, 1:] < -self.vtol).any(axis=0)
        n_int = int(np.argmax(bad_end)) + 1 if bad_end.any() else len(bad_end)
        # a condition may dip across its boundary and back between two samples: a cubic
        # Hermite interpolant (values and slopes at both ends) finds such dips; only intervals
        # whose bound min(s0, s1) - (|d0| + |d1|) * 4/27 is below the boundary are examined
        ds = md.sgn[:, None] * (md.GM @ Z[:, :n_int + 1])
        s0, s1 = s[:, :n_int], s[:, 1:n_int + 1]
        d0, d1 = ds[:, :-1] * dts[:n_int], ds[:, 1:] * dts[:n_int]
        cand = ((d0 < 0) & (d1 > 0)
                & (np.minimum(s0, s1) - 0.15 * (np.abs(d0) + np.abs(d1)) < -self.vtol))
        if cand.any():
            rows, cols = np.nonzero(cand)
            a0, a1, b0, b1 = s0[rows, cols], s1[rows, cols], d0[rows, cols], d1[rows, cols]
            best = np.full(len(rows), np.inf)
            where = np.ones(len(rows))
            for th in (0.2, 0.35, 0.5, 0.65, 0.8):
                val = ((2 * th ** 3 - 3 * th ** 2 + 1) * a0 + (th ** 3 - 2 * th ** 2 + th) * b0
                       + (-2 * th ** 3 + 3 * th ** 2) * a1 + (th ** 3 - th ** 2) * b1)
                better = val < best
                best = np.where(better, val, best)
                where = np.where(better, th, where)
            hit = best < -self.vtol
            if hit.any():
                c = cols[hit]
                i = int(c.min())
                return i, float(where[hit][c == i].min())
        if n_int < len(bad_end):
            return n_int - 1, 1.0
        return -1, 1.0

    def _eig(self, md: _Mode):
        """Cached eigendecomposition of M and its condition number (False if unusable)."""
        if md.eig is None:
            w, V = np.linalg.eig(md.M)
            ok = bool(np.all(np.isfinite(w)))
            cond = np.linalg.cond(V) if ok else math.inf
            ok = ok and math.isfinite(cond) and cond < 1e10
            md.eig = (w, V, np.linalg.inv(V), cond) if ok else False
        return md.eig

    def _expm(self, md: _Mode, tau: float) -> np.ndarray:
        """expm(M tau): by the eigendecomposition where it is well conditioned (cond < 1e5,
        error below 1e-10), else by Pade."""
        eig = self._eig(md)
        if eig and eig[3] < 1e5:
            w, V, Vi, _ = eig
            return ((V * np.exp(w * tau)) @ Vi).real
        return expm(md.M * tau)

    def _prop(self, md: _Mode, tau: float, z: np.ndarray) -> np.ndarray:
        """z(tau) for the event search (eigendecomposition up to cond 1e10: the search only
        needs the switching instant; the state there is then taken from :meth:`_expm`)."""
        eig = self._eig(md)
        if eig:
            w, V, Vi, _ = eig
            return (V @ (np.exp(w * tau) * (Vi @ z))).real
        return expm(md.M * tau) @ z

    def _locate(self, md: _Mode, z0: np.ndarray, dt: float, z_dt: np.ndarray | None = None
                ) -> tuple[float, np.ndarray] | None:
        """Earliest time in (0, dt] at which some switch condition of mode md reaches its
        boundary, starting from z0. Returns (tau, expm(M tau)), or None when the exact state at
        ``dt`` breaks no condition (a false alarm of the interpolated dip test: the slopes of a
        stiff node are not smooth enough for it).

        Safeguarded Newton on the condition of the switch that breaks first; the bracket
        [lo, hi] always holds the earliest crossing."""
        lo, hi = 0.0, dt
        z_hi = expm(md.M * hi) @ z0 if z_dt is None else z_dt
        s_hi = md.sgn * (md.G @ z_hi)
        k = int(np.argmin(s_hi))
        if s_hi[k] >= -self.vtol:
            return None  # a dip the cubic interpolant saw but the exact trajectory does not
        # the eigendecomposition is fast but loses accuracy where M is nearly defective (a
        # capacitor whose only discharge path is an off-state resistance beside the constant
        # input): check it against the exact state at hi, else search with Pade
        prop = self._prop
        s_eig = md.sgn * (md.G @ self._prop(md, hi, z0))
        if np.max(np.abs(s_eig - s_hi)) > max(self.vtol, 1e-9 * float(np.max(np.abs(s_hi)))):
            def prop(md_: _Mode, tau_: float, z_: np.ndarray) -> np.ndarray:
                return expm(md_.M * tau_) @ z_
        s_lo = float(md.sgn[k] * (md.G[k] @ z0))
        tau = hi * s_lo / max(s_lo - float(s_hi[k]), 1e-300)
        tstop = 1e-10 * self.period
        for _ in range(100):
            if hi - lo <= tstop:
                break
            if not (lo < tau < hi):
                tau = 0.5 * (lo + hi)
            z = prop(md, tau, z0)
            s = md.sgn * (md.G @ z)
            kk = int(np.argmin(s))
            if s[kk] < -self.vtol:  # past the (earliest) boundary
                hi, k = tau, kk
                s_k = float(s[kk])
            else:
                lo = tau
                s_k = float(s[k])
                if s_k <= self.vtol * 0.5:
                    break
            d = float(md.sgn[k] * (md.GM[k] @ z))
            new = tau - s_k / d if d != 0 else 0.5 * (lo + hi)
            if abs(new - tau) < tstop:
                tau = lo
                break
            tau = new
        tau = lo
        return tau, self._expm(md, tau)

    def run(self, z0: np.ndarray, t0: float, duration: float, *, jac: bool = False) -> Run:
        """Simulate from augmented state z0 at time t0 for ``duration`` seconds."""
        mode = self.consistent_mode(z0)
        t_end = t0 + duration
        t, z = t0, z0.astype(float)
        segments: list[Segment] = []
        phi = np.eye(self.nz) if jac else None
        events = 0
        periods = max(1.0, duration / self.period)
        limit = int(200 * (len(self.switches) + 1) * periods)
        h = self.h
        chunk = CHUNK
        while t < t_end - 1e-12 * self.period:
            md = self.mode(mode)
            k_left = int(math.floor((t_end - t) / h * (1 + 1e-12)))
            # step in chunks that grow while no event comes: an event ends the chunk, and
            # most of a period between events is never stepped twice
            k = min(k_left, chunk)
            last = k == k_left
            Z = self._batch(md, z, k)
            taus = np.arange(k + 1) * h
            rem = (t_end - t) - k * h if last else 0.0
            if last and rem > 1e-9 * h:
                e_rem = self._expm(md, rem)
                Z = np.column_stack([Z, e_rem @ Z[:, -1]])
                taus = np.append(taus, t_end - t)
            elif last:
                rem = 0.0
                taus[-1] = t_end - t
            i, frac = self._first_violation(md, Z, np.diff(taus))
            if i < 0:
                segments.append(Segment(t + taus, Z, mode))
                if jac:
                    step = self._pow(md, k)
                    if rem:
                        step = e_rem @ step
                    phi = step @ phi
                z = Z[:, -1]
                if last:
                    t = t_end
                    break
                t = t + k * h
                chunk *= 2
                continue
            chunk = CHUNK
            dt = (taus[i + 1] - taus[i]) * frac
            found = self._locate(md, Z[:, i], dt, Z[:, i + 1] if frac == 1.0 else None)
            if found is None:
                # no crossing after all: keep the samples up to the end of that interval and
                # go on from there
                segments.append(Segment(t + taus[:i + 2], Z[:, :i + 2], mode))
                if jac:
                    phi = self._stepprop(md, i + 1, k, e_rem if last and rem else None) @ phi
                z = Z[:, i + 1]
                t = t + taus[i + 1]
                if t >= t_end - 1e-12 * self.period:
                    t = t_end
                    break
                continue
            tau, E = found
            z_ev = E @ Z[:, i]
            seg_t = np.append(taus[:i + 1], taus[i] + tau)
            segments.append(Segment(t + seg_t, np.column_stack([Z[:, :i + 1], z_ev]), mode))
            if jac:
                phi = E @ self._pow(md, i) @ phi
            old_mode = mode
            mode = self._flip(mode, md, z_ev)
            if jac and mode != old_mode:
                phi = self._saltation(md, self.mode(mode), z_ev) @ phi
            # start the new mode a moment (1e-6 period) later: the state then lies on its slow
            # manifold (a node held only by off-state resistances has settled), and no
            # non-physical spike of the event instant reaches the recorded waveforms
            settle = self.mode(mode).settle
            z = settle @ z_ev
            t = t + taus[i] + tau + self._settle
            if jac:
                phi = settle @ phi
            events += 1
            if events > limit:
                raise SimulationError("the switching does not settle (more than "
                                      f"{limit} switching events); check the load and parts")
        return Run(segments, z, phi, events)

    def _saltation(self, md: _Mode, md2: _Mode, z: np.ndarray) -> np.ndarray:
        """Jacobian jump at a switching event: I + (f+ - f-) dg / (dg . f-), with dg the
        gradient of the condition that crossed and f-/f+ the vector fields before and after
        (the event time's dependence on the start state). Where the fields agree at the event
        (a diode switching at zero current with no inductor in series) this is the identity."""
        s = md.sgn * (md.G @ z)
        k = int(np.argmin(np.where(md.sgn != 0, np.abs(s), np.inf)))
        dg = md.G[k]
        f_minus = md.M @ z
        rate = float(dg @ f_minus)
        if rate == 0.0 or not math.isfinite(rate):
            return np.eye(self.nz)
        jump = md2.M @ z - f_minus
        return np.eye(self.nz) + np.outer(jump, dg) / rate

    def _violation(self, mode: tuple[bool, ...], z: np.ndarray) -> float:
        """How far the conditions of ``mode`` are broken a moment after z (0 if they hold).

        Judged a moment later: a node held only by off-state resistances (an inductor in series
        with off switches) settles within ~L/R_OFF, and its value at the event itself is not
        meaningful."""
        md2 = self.mode(mode)
        s2 = md2.sgn * (md2.G @ (md2.settle @ z))
        return max(0.0, -float(s2.min())) if len(s2) else 0.0

    def _flip(self, mode: tuple[bool, ...], md: _Mode, z: np.ndarray) -> tuple[bool, ...]:
        """The mode after an event at z: flip the switch at its boundary, then any that the
        flip leaves inconsistent; if that does not settle (several switches at their boundary
        at once), try every combination of the switches near their boundary."""
        s = md.sgn * (md.G @ z)
        k = int(np.argmin(np.where(md.sgn != 0, s, np.inf)))
        new = mode[:k] + (not mode[k],) + mode[k + 1:]
        for _ in range(2 * len(mode) + 2):
            if self._violation(new, z) <= self.vtol:
                return new
            md2 = self.mode(new)
            s2 = md2.sgn * (md2.G @ (md2.settle @ z))
            j = int(np.argmin(s2))
            new = new[:j] + (not new[j],) + new[j + 1:]
        near = [i for i in range(len(mode)) if md.sgn[i] != 0
                and abs(s[i]) <= 1e-3 * self.vscale][:8]
        if k not in near:
            near.insert(0, k)
        best, best_v = None, math.inf
        for bits in range(1, 2 ** len(near)):
            cand = list(mode)
            for b, i in enumerate(near):
                if bits >> b & 1:
                    cand[i] = not cand[i]
            cand_t = tuple(cand)
            v = self._violation(cand_t, z)
            if v < best_v:
                best, best_v = cand_t, v
            if v <= self.vtol:
                return cand_t
        if best is not None and best_v < 1e-3 * self.vscale:
            return best
        raise SimulationError("no consistent switching state after an event (the circuit "
                              "chatters)")

    # --- steady state -----------------------------------------------------------------------
    def u_at(self, t: float) -> np.ndarray:
        w = self.omega * t
        return np.array([math.cos(w), math.sin(w), 1.0])

    def periodic_steady_state(self, x0: np.ndarray | None = None, *, tol: float = 1e-5,
                              max_iter: int | None = None) -> SteadyState:
        """The periodic orbit (state at t = 0 of the source period) and its verified period.

        Verified means: a simulated period from the orbit's state returns to it within ``tol``
        (largest change of any state, relative to its largest value over the period; the
        residual reported), and the state is the orbit, not a state that merely changes slowly
        (a capacitor above its orbit whose diodes never conduct leaks through 1e10 ohm at a
        tiny rate). So one of these must hold as well:

        * the Newton step from the state (the distance to the orbit it predicts, with the
          period's mode sequence) is within ``tol`` of the source peak;
        * the period has switching events (a state that merely leaks has none), or the state
          is the fixed point of the previous period's mode sequence (a full, unclipped Newton
          step landed on it) where conduction vanishes and some diode comes within
          :data:`GRAZING_MARGIN` of the source peak of conducting: the *grazing* orbit of a
          circuit with no load and no bleeder. A state left overcharged by a resonant first
          charge is neither (its diodes stay well off, it only leaks); from such a state the
          search moves down the leak direction to where a diode starts to conduct;
        * plain simulated periods converge to it (taken where Newton steps overshoot, near
          grazing orbits where the period map is not smooth) with events in the period, and
          the distance estimated as residual / (1 - contraction per period) is within ``tol``.

        ``max_iter`` bounds the simulated periods; by default :data:`PERIODS_BASE` plus
        :data:`PERIODS_PER_CAPACITOR` for each capacitor: the slow mode of a multiplier (charge
        handed up the ladder) takes more steps the more stages it has.

        Raises:
            SimulationError: no orbit verified within ``max_iter`` simulated periods.
        """
        if max_iter is None:
            max_iter = PERIODS_BASE + PERIODS_PER_CAPACITOR * len(self.caps)
        x = np.zeros(self.nx) if x0 is None else np.asarray(x0, float)
        u0 = self.u_at(0.0)
        ident = np.eye(self.nx)
        scale = self._scale()

        def evaluate(xs: np.ndarray) -> tuple[Run | None, np.ndarray, float]:
            try:
                r = self.run(np.concatenate([xs, u0]), 0.0, self.period, jac=True)
            except SimulationError:
                if xs is x:
                    raise
                return None, xs, math.inf  # a wild trial state: backtrack from it
            f = r.z_end[:self.nx] - xs
            return r, f, float(np.linalg.norm(f / scale))

        run, f, norm = evaluate(x)
        sims = 1
        newton_landed = False  # x is the fixed point of the previous run's mode sequence
        mu = 0.0  # pseudo-transient regularisation of the Newton step
        rho = 1.0  # contraction of the last plain period (|f| after / |f| before)
        plain = False  # the last step was a plain simulated period
        it = 0
        while True:
            residual = self._residual(run, x, x + f)
            if residual <= tol:
                A = run.phi[:self.nx, :self.nx]
                try:
                    dist = float(np.max(np.abs(np.linalg.solve(ident - A, f)) / scale))
                except np.linalg.LinAlgError:
                    dist = math.inf
                contracting = (run.events > 0 and plain and rho < 0.95
                               and residual / (1 - rho) <= tol)
                grazing = run.events > 0 or (
                    newton_landed and self._min_margin(run) <= GRAZING_MARGIN * self.vscale)
                if dist <= tol or grazing or contracting:
                    return SteadyState(x, run, it, residual, sims)
            if sims >= max_iter:
                break
            if run.events == 0 and len(self.switches) and sims + 12 < max_iter:
                # no switch acts from x (e.g. capacitors left above their orbit by a resonant
                # first charge, leaking through R_OFF only): the affine solve would discharge
                # them completely. Move along that direction only to where a diode starts to
                # conduct (bisection), and take Newton steps from there.
                A = run.phi[:self.nx, :self.nx]
                try:
                    dx = np.linalg.solve(ident - A, f)
                except np.linalg.LinAlgError:
                    dx = f
                big = float(np.max(np.abs(dx) / scale))
                if np.all(np.isfinite(dx)) and big > tol:
                    if big > STEP_LIMIT:
                        dx *= STEP_LIMIT / big
                    lo, hi, hit = 0.0, 1.0, None
                    for _ in range(12):
                        mid = 0.5 * (lo + hi)
                        r_m, f_m, n_m = evaluate(x + mid * dx)
                        sims += 1
                        if r_m is not None and r_m.events == 0:
                            lo = mid
                        else:
                            hi = mid
                            if r_m is not None:
                                hit = (mid, r_m, f_m, n_m)
                    if hit is not None:
                        mid, run, f, norm = hit
                        x = x + mid * dx
                        newton_landed = plain = False
                        mu = 0.0
                        continue
            if plain and rho < 0.5:
                # plain periods converge fast here (a grazing orbit, where the period map is
                # not smooth and Newton steps overshoot): keep taking them
                x = x + f
                run, f, norm_new = evaluate(x)
                sims += 1
                if run is None:
                    raise SimulationError("the steady-state search left the circuit's range")
                rho = norm_new / norm if norm > 0 else 0.0
                norm = norm_new
                newton_landed = False
                continue
            it += 1
            # Newton step on the period map with the mode sequence frozen (exact for it, with
            # the saltation at each event), regularised as in pseudo-transient continuation:
            # ((1 + mu) I - A) dx = f. mu = 0 is plain Newton; a rejected step raises mu, which
            # shortens the step along the slow directions (A near 1: a capacitor that no diode
            # charges in this mode sequence, a bleeder-only decay) where the affine solve of
            # one sequence lands far inside another; accepted steps lower it again.
            A = run.phi[:self.nx, :self.nx]
            plain = False
            while True:
                try:
                    dx = np.linalg.solve((1 + mu) * ident - A, f)
                except np.linalg.LinAlgError:
                    dx = f
                if not np.all(np.isfinite(dx)):
                    dx = f
                # trust region: never move a state by more than the source peak at once
                big = float(np.max(np.abs(dx) / scale))
                clipped = big > STEP_LIMIT
                if clipped:
                    dx *= STEP_LIMIT / big
                trial = x + dx
                run_t, f_t, norm_t = evaluate(trial)
                sims += 1
                if run_t is not None and norm_t < norm:
                    newton_landed = mu == 0.0 and not clipped
                    mu = mu * norm_t / norm if mu > 1e-6 else 0.0
                    break
                mu = max(4 * mu, MU_FIRST)
                if mu > MU_MAX or sims >= max_iter:
                    # no descent: take one plain simulated period
                    trial, run_t, f_t, norm_t = x + f, *evaluate(x + f)
                    sims += 1
                    if run_t is None:
                        raise SimulationError("the steady-state search left the circuit's "
                                              "range")
                    plain = True
                    newton_landed = False
                    rho = norm_t / norm if norm > 0 else 0.0
                    mu = MU_FIRST
                    break
            x, run, f, norm = trial, run_t, f_t, norm_t
        raise SimulationError(f"no periodic steady state verified after {sims} simulated "
                              f"periods (residual {residual:.2g})")

    def _min_margin(self, run: Run) -> float:
        """Closest approach of an off switch to its turn-on condition over a run (V)."""
        best = math.inf
        for seg in run.segments:
            md = self.mode(seg.mode)
            off = md.sgn < 0
            if off.any():
                best = min(best, float((-(md.G[off] @ seg.Z)).min()))
        return best

    def _scale(self) -> np.ndarray:
        """Typical size of each state: the source peak for voltages, peak / impedance for
        inductor currents."""
        ncap = len(self.caps)
        scale = np.full(self.nx, self.vscale)
        if self.nx > ncap:
            scale[ncap:] = self.vscale / (self.omega * max(i.value for i in self.inds))
        return scale

    def _residual(self, run: Run, x0: np.ndarray, xT: np.ndarray) -> float:
        if self.nx == 0:
            return 0.0
        zmax = np.zeros(self.nx)
        for seg in run.segments:
            np.maximum(zmax, np.abs(seg.Z[:self.nx]).max(axis=1), out=zmax)
        ncap = len(self.caps)
        floor = np.empty(self.nx)
        floor[:ncap] = 1e-6 * self.vscale
        if self.nx > ncap:
            floor[ncap:] = 1e-6 * max(float(zmax[ncap:].max()), 1e-9)
        return float(np.max(np.abs(xT - x0) / np.maximum(zmax, floor)))

    # --- outputs ----------------------------------------------------------------------------
    def outputs(self, segments: list[Segment]) -> dict[str, np.ndarray]:
        """Waveforms of a run: ``t``; ``w`` (quadrature weights: ``w @ y`` integrates a
        waveform over the run, see :func:`quadrature_weights`); ``v(node)``; ``v(elem)`` and
        ``i(elem)`` per element (element voltage V(a) - V(b), current from a to b)."""
        ts, ys = [], []
        for seg in segments:
            ts.append(seg.t)
            ys.append(self.mode(seg.mode).Y @ seg.Z)
        t = np.concatenate(ts)
        y = np.concatenate(ys, axis=1)
        out = {"t": t, "w": quadrature_weights(segments)}
        nn = len(self.nodes)
        for i, n in enumerate(self.nodes):
            out[f"v({n})"] = y[i]
        for k, e in enumerate(self.elements):
            out[f"v({e.name})"] = y[nn + 2 * k]
            out[f"i({e.name})"] = y[nn + 2 * k + 1]
        return out
