"""Rank substitutes for one slot of a circuit (the main job).

1. The circuit is analysed once with the original in place (every operating state).
2. Candidates of the slot's kind are prefiltered in SQL by indexed rating windows around the
   original and the stress (:func:`prefilter`).
3. A candidate whose circuit-affecting values differ from the model's is re-simulated:
   a capacitor always at both tolerance extremes (its bleeder too where the bleeder's current
   differs from the model's by more than :data:`BLEEDER_RESIM_FRACTION` of the slot's RMS
   current), a diode where its forward drop differs from the model's by more than
   :data:`VF_RESIM_FRACTION` of the source peak. Re-simulations are cached by those values, and a
   capacitor's stress is interpolated linearly between simulations on a capacitance grid of
   :data:`CAP_GRID` (relative step; a value within :data:`GRID_SNAP` of a step of a grid point
   takes that point), so that a catalog of thousands of capacitors costs a handful of
   simulations. Measured on the 60 Hz demo doubler, a 10 % grid interpolates every stress of
   every state within 0.6 % of a direct simulation (tests/test_substitute.py checks 1 %; before
   the solver's steady-state fix of aabf60e the switch-on state jumped with C and the error
   reached 2 %). A candidate that
   already fails the capacitance window is judged on the original's stress (it is rejected
   whatever its stress).
4. Every rule of the slot's kind is evaluated (partsmatch.rules) and the candidates are ranked:
   accept before caution before reject, then in stock, closeness to the original (its main
   ratings, tolerance, size), fewer warnings, the smallest margin (larger first), cost, and
   finally maker and part number (deterministic).
"""

from __future__ import annotations

import math
from dataclasses import dataclass, replace
from typing import Any

from sqlalchemy import select
from sqlalchemy.orm import Session

from partsmatch import __version__
from partsmatch.catalog.models import CrossRef, Part
from partsmatch.catalog.queries import records
from partsmatch.catalog.records import PartRecord
from partsmatch.circuit.worst import worse
from partsmatch.errors import InputError, SimulationError
from partsmatch.rules import capacitor
from partsmatch.rules.context import SlotStress, slot_stress
from partsmatch.rules.engine import evaluate
from partsmatch.rules.findings import Finding, verdict_of
from partsmatch.rules.policy import Policy

#: Relative capacitance step of the re-simulation grid (stress is interpolated between points).
CAP_GRID = 0.10
#: A capacitance within this fraction of a grid step of a grid point takes that point's result.
GRID_SNAP = 0.05
#: A bleeder is re-simulated when its current at the slot's peak voltage differs from the
#: model bleeder's by more than this fraction of the slot's loaded RMS current.
BLEEDER_RESIM_FRACTION = 0.01
#: A diode is re-simulated when its forward drop differs from the model's by more than this
#: fraction of the source peak voltage.
VF_RESIM_FRACTION = 0.005
_VERDICT_RANK = {"accept": 0, "caution": 1, "reject": 2}


# ------------------------------------------------------------------ the original
def original_from_text(text: str, role: str) -> PartRecord:
    """An original that is not in the catalog, from entered ratings or a marking
    (``"0.95uF 2100VAC 3%"``, ``"12 kV 350 mA"``, ``"T0.75AL5kV"``)."""
    from partsmatch.markings import decode_query

    q = decode_query(text)
    r = dict(q.ratings)
    if not r or set(r) <= {"kind_hint"}:
        raise InputError(f"no rating could be read from {text!r}", value=text)
    v: dict[str, Any] = {}
    if role == "capacitor":
        for k in ("capacitance", "tolerance_minus", "tolerance_plus", "voltage_ac", "voltage_dc"):
            if k in r:
                v[k] = r[k]
        if "voltage" in r and "voltage_ac" not in v and "voltage_dc" not in v:
            v["voltage_dc"] = r["voltage"]  # AC or DC not stated: read as the lesser, DC
    elif role == "diode":
        v["vrrm"] = r.get("vrrm", r.get("voltage"))
        v["if_avg"] = r.get("if_avg", r.get("current"))
        for k in ("ifsm", "trr", "vf"):
            if k in r:
                v[k] = r[k]
    elif role == "fuse":
        v["rated_current"] = r.get("rated_current", r.get("current"))
        for k in ("voltage", "characteristic", "fuse_standard", "breaking_capacity", "i2t"):
            if k in r:
                v[k] = r[k]
    v = {k: x for k, x in v.items() if x is not None}
    if not v:
        raise InputError(f"no {role} rating could be read from {text!r}", value=text)
    return PartRecord(kind=role, maker="(entered)", part_number=text, **v)  # type: ignore[arg-type]


def choose_slot(spec, original: PartRecord, slot: str | None) -> str:
    """The slot to replace: ``slot`` if given, else the one naming the original, else the only
    slot of the original's kind."""
    if slot:
        if slot not in spec.parts:
            raise InputError(f"the circuit has no slot {slot} (it has {', '.join(spec.parts)})",
                             value=slot)
        if spec.parts[slot].role != original.kind:
            raise InputError(f"slot {slot} holds a {spec.parts[slot].role}, not a "
                             f"{original.kind}", value=slot)
        return slot
    named = [s for s, p in spec.parts.items()
             if p.part and p.part.split(":")[-1].strip().lower() ==
             original.part_number.lower()]
    if len(named) == 1:
        return named[0]
    same = [s for s, p in spec.parts.items() if p.role == original.kind]
    if len(named) > 1:
        same = named
    if len(same) == 1:
        return same[0]
    if not same:
        raise InputError(f"the circuit has no {original.kind} slot")
    raise InputError(f"several {original.kind} slots ({', '.join(same)}): choose one with --slot")


# ------------------------------------------------------------------ interpolation
def _interp(a: Any, b: Any, w: float) -> Any:
    """Linear interpolation between two analyze() results (nested dicts of floats)."""
    if isinstance(a, dict) and isinstance(b, dict):
        return {k: _interp(a[k], b.get(k), w) for k in a}
    if isinstance(a, (int, float)) and not isinstance(a, bool) and isinstance(b, (int, float)):
        return a + w * (b - a)
    return a if w < 0.5 else b


def _worst(a: Any, b: Any, key: str = "") -> Any:
    """Key-wise worst of two results (largest magnitude; v_min most negative)."""
    if isinstance(a, dict) and isinstance(b, dict):
        return {k: _worst(a[k], b.get(k), k) for k in a}
    if isinstance(a, (int, float)) and not isinstance(a, bool) and isinstance(b, (int, float)):
        return b if worse(key, a, b) else a
    return a


@dataclass(frozen=True)
class Judged:
    part: PartRecord
    verdict: str
    findings: list[Finding]
    stress: dict[str, Any]
    closeness: float
    min_margin: float | None
    resimulated: tuple[str, ...]

    @property
    def warnings(self) -> int:
        return sum(1 for f in self.findings if f.status == "warn")

    @property
    def score(self) -> int:
        s = 100.0 - 35.0 * _VERDICT_RANK[self.verdict] - min(25.0, 250.0 * self.closeness)
        if self.part.in_stock <= 0:
            s -= 10.0
        if self.min_margin is not None and self.min_margin < 1.2:
            s -= 10.0 * (1.2 - max(self.min_margin, 0.0))
        return int(round(max(0.0, min(100.0, s))))

    def sort_key(self) -> tuple:
        cost = self.part.unit_cost
        return (_VERDICT_RANK[self.verdict], 0 if self.part.in_stock > 0 else 1,
                round(self.closeness, 6), self.warnings,
                -(self.min_margin if self.min_margin is not None else math.inf),
                cost if cost is not None else math.inf, self.part.maker.lower(),
                self.part.part_number.lower())

    def to_dict(self) -> dict[str, Any]:
        return {
            "part_number": self.part.part_number, "maker": self.part.maker,
            "kind": self.part.kind, "verdict": self.verdict, "score": self.score,
            "in_stock": self.part.in_stock,
            "locations": [{"location": s.location, "quantity": s.quantity}
                          for s in self.part.stock],
            "unit_cost": self.part.unit_cost,
            "resimulated": list(self.resimulated),
            "ratings": self.part.ratings(),
            "stress": self.stress,
            "findings": [f.to_dict() for f in self.findings],
        }


class Substitution:
    """Everything needed to judge candidates for one slot: the circuit analysed with the
    original in place, and a cache of re-simulations."""

    def __init__(self, spec, original: PartRecord, slot: str, policy: Policy) -> None:
        from partsmatch.circuit.stress import analyze

        self.spec = spec
        self.original = original
        self.slot = slot
        self.policy = policy
        self.role = spec.parts[slot].role
        self._analyze = analyze
        self.base = analyze(spec, policy)
        self._cache: dict[tuple, Any] = {}
        s = spec.parts[slot]
        self.ambient = spec.ambient if spec.ambient is not None else policy["ambient"]
        self.c0 = s.capacitance if self.role == "capacitor" else None
        # the model's bleeder: the original's own if the catalog says it has one, else the board's.
        # An entered original (--original-spec, id None) says nothing of a bleeder: the circuit's
        # bleeder may have been inside the failed part, so it is not assumed to stay on the board
        # (a candidate without one is then told to fit one, never silently passed).
        self.bleeder_known = original.id is not None or bool(original.bleeder)
        self.external_bleeder = None
        if self.role == "capacitor" and s.bleeder and not original.bleeder and self.bleeder_known:
            self.external_bleeder = s.bleeder
        #: the slot's stress with the original in place
        self.base_stress = self._stress_of(self.base)

    def _stress_of(self, result: dict[str, Any]) -> SlotStress:
        """The slot's stress in an analysis of the circuit (the original's, or a candidate's)."""
        return slot_stress(result, self.slot, frequency=self.spec.source.frequency,
                           ambient=self.ambient, external_bleeder=self.external_bleeder,
                           capacitance=self.c0)

    # -------------------------------------------------------------- simulations
    def _simulate(self, **values: Any) -> dict[str, Any]:
        from partsmatch.circuit.spec import with_part_values

        key = tuple(sorted(values.items()))
        if key not in self._cache:
            try:
                self._cache[key] = self._analyze(with_part_values(self.spec, self.slot, **values),
                                                 self.policy)
            except SimulationError as exc:  # cached too: the same values fail the same way
                self._cache[key] = exc
        out = self._cache[key]
        if isinstance(out, SimulationError):
            raise out
        return out

    def _grid(self, k: int, bleeder: float | None) -> dict[str, Any]:
        if k == 0 and bleeder == self.spec.parts[self.slot].bleeder:
            return self.base
        return self._simulate(capacitance=self.c0 * (1 + CAP_GRID) ** k, bleeder=bleeder)

    def _at_capacitance(self, c: float, bleeder: float | None) -> dict[str, Any]:
        """Result at capacitance ``c``, interpolated between grid simulations."""
        x = math.log(c / self.c0) / math.log1p(CAP_GRID)
        if abs(x - round(x)) <= GRID_SNAP:
            return self._grid(round(x), bleeder)
        k0 = math.floor(x)
        return _interp(self._grid(k0, bleeder), self._grid(k0 + 1, bleeder), x - k0)

    def _model_bleeder(self, cand: PartRecord) -> float | None:
        """The bleeder to simulate with ``cand``: its own (with the board's), unless the
        difference from the model's is negligible (BLEEDER_RESIM_FRACTION)."""
        model = self.spec.parts[self.slot].bleeder
        bleeders = [r for r in (cand.bleeder, self.external_bleeder) if r]
        new = 1.0 / sum(1.0 / r for r in bleeders) if bleeders else None
        v = abs(self.base["slots"][self.slot].get("v_peak") or 0.0)
        i_rms = self.base["by_state"]["loaded"]["slots"][self.slot].get("i_rms") or 0.0
        diff = abs((1.0 / new if new else 0.0) - (1.0 / model if model else 0.0)) * v
        return new if i_rms <= 0 or diff > BLEEDER_RESIM_FRACTION * i_rms else model

    def stress_with(self, cand: PartRecord) -> tuple[dict[str, Any], SlotStress, tuple[str, ...]]:
        """The analysis with ``cand`` in place (worst over its tolerance extremes) and the slot's
        stress for the rules."""
        result = self.base
        resim: tuple[str, ...] = ()
        load_change = None
        other: dict[str, dict[str, float]] = {}
        if self.role == "capacitor" and cand.capacitance and self.c0 and \
                capacitor.capacitance(self.original, cand, None, self.policy).status != "fail":
            bleeder = self._model_bleeder(cand)
            tm = cand.tolerance_minus or 0.0
            tp = cand.tolerance_plus or 0.0
            extremes = [cand.capacitance * (1 - tm / 100.0), cand.capacitance * (1 + tp / 100.0)]
            results = [self._at_capacitance(c, bleeder) for c in extremes]
            result = _worst(results[0], results[1])
            resim = tuple(f"C={c:.4g} F" for c in extremes)
            i0 = self.base["by_state"]["loaded"]["load"].get("i_mean")
            if i0:
                changes = [r["by_state"]["loaded"]["load"]["i_mean"] / i0 - 1.0 for r in results]
                load_change = max(changes, key=abs)
            other = self._other_changes(results)
        elif self.role == "diode" and cand.vf is not None:
            model_vf = self.spec.parts[self.slot].forward_voltage or 0.0
            if abs(cand.vf - model_vf) > VF_RESIM_FRACTION * self.spec.source.v_peak:
                result = self._simulate(forward_voltage=cand.vf)
                resim = (f"VF={cand.vf:g} V",)
        st = self.base_stress if result is self.base else self._stress_of(result)
        st = replace(st, load_change=load_change, other_changes=other, resimulated=resim)
        return result, st, resim

    def _other_changes(self, results: list[dict[str, Any]]) -> dict[str, dict[str, float]]:
        out: dict[str, dict[str, float]] = {}
        base = self.base["slots"]
        for slot, vals in base.items():
            if slot == self.slot:
                continue
            for key in ("i_avg", "i_rms", "i_peak", "i_surge"):
                b = vals.get(key)
                if not b:
                    continue
                rise = max((r["slots"][slot].get(key) or 0.0) / b - 1.0 for r in results)
                if rise > 0:
                    out.setdefault(slot, {})[key] = rise
        return out

    # -------------------------------------------------------------- judging
    def closeness(self, cand: PartRecord) -> float:
        """Distance of the candidate from the original (0 = the same part): log ratios of the
        main ratings, the difference of tolerances, and a step for another size or format."""
        o = self.original
        pairs = {
            "capacitor": [(cand.capacitance, o.capacitance or self.c0),
                          (cand.voltage_ac, o.voltage_ac), (cand.voltage_dc, o.voltage_dc)],
            # VF too: without it a diode with a higher drop (less modelled surge) outranked the
            # original's exact twin on the margin tie-break (bench supply: QRF1010 over ORV-R1K10)
            "diode": [(cand.vrrm, o.vrrm), (cand.if_avg, o.if_avg), (cand.ifsm, o.ifsm),
                      (cand.vf, o.vf)],
            "fuse": [(cand.rated_current, o.rated_current), (cand.voltage, o.voltage),
                     (cand.breaking_capacity, o.breaking_capacity)],
        }[self.role]
        d = sum(abs(math.log(a / b)) for a, b in pairs if a and b)
        if self.role == "capacitor":
            d += abs((cand.tolerance_plus or 0.0) - (o.tolerance_plus or 0.0)) / 100.0
            if self.bleeder_known:
                d += 0.05 if bool(cand.bleeder) != bool(o.bleeder) else 0.0
        if o.size and cand.size and o.size.strip().lower() != cand.size.strip().lower():
            d += 0.05
        return d

    def judge(self, cand: PartRecord) -> Judged:
        extra: list[Finding] = []
        try:
            result, st, resim = self.stress_with(cand)
        except SimulationError as exc:
            # one candidate the solver cannot settle must not abort the whole ranking: judge it
            # on the original's stress and say so
            result, resim, st = self.base, (), self.base_stress
            extra.append(Finding("resimulation", "warn", None, None, None,
                                 f"the circuit could not be re-simulated with this part in "
                                 f"place ({exc}): judged on the original's stress",
                                 "circuit model"))
        verdict, findings = evaluate(self.original, cand, st, self.policy)
        if extra:
            findings = findings + extra
            verdict = verdict_of(findings)
        margins = [f.margin for f in findings if f.margin is not None and f.unit in ("V", "A",
                                                                                      "A2s")]
        return Judged(part=cand, verdict=verdict, findings=findings,
                      stress={"slots": result["slots"], "load": result["load"]},
                      closeness=self.closeness(cand),
                      min_margin=min(margins) if margins else None, resimulated=resim)


# ------------------------------------------------------------------ candidates
#: How many candidates of each prefilter query are judged (the closest to the original first).
PREFILTER_LIMIT = 250


def _closeness_sql(role: str, o: PartRecord, c0: float | None):
    """SQL expression of a candidate's distance from the original (relative differences of the
    main ratings; the Python ranking refines it with log ratios, tolerance and size)."""
    from sqlalchemy import func, literal

    def rel(col, ref):
        return func.abs(func.coalesce(col, 0.0) - ref) / ref if ref else literal(0.0)

    if role == "capacitor":
        return rel(Part.capacitance, o.capacitance or c0) + rel(Part.voltage_ac, o.voltage_ac) \
            + rel(Part.voltage_dc, o.voltage_dc)
    if role == "diode":
        return rel(Part.vrrm, o.vrrm) + rel(Part.if_avg, o.if_avg)
    return rel(Part.rated_current, o.rated_current) + rel(Part.voltage, o.voltage)


def prefilter(session: Session, sub: Substitution, *, in_stock: bool = False,
              limit: int = PREFILTER_LIMIT) -> list[PartRecord]:
    """Candidates of the slot's kind inside indexed rating windows (SQL range queries).

    Windows (wide enough to show the near misses that ``--all`` lists as rejected):
    capacitors within twice the allowed capacitance deviation of the original; diodes with VRRM
    at least half the continuous peak reverse voltage; fuses from half to twice the original's
    current. Of each window the ``limit`` parts closest to the original are taken, and as many
    of the closest parts in stock (in-stock parts rank before closer ones that are not), so that
    a catalog of a million parts still judges a few hundred.
    """
    from partsmatch.catalog.models import Stock

    o, role = sub.original, sub.role
    stmt = select(Part).where(Part.kind == role)
    if role == "capacitor":
        c0 = o.capacitance or sub.c0
        tol = max(o.tolerance_minus or 0.0, o.tolerance_plus or 0.0)
        w = 2.0 * max(tol, sub.policy["cap_window"]) / 100.0
        stmt = stmt.where(Part.capacitance.between(c0 * (1 - w), c0 * (1 + w)))
    elif role == "diode":
        vr = sub.base_stress.continuous.get("v_reverse_peak") or 0.0
        stmt = stmt.where(Part.vrrm >= 0.5 * abs(vr))
    elif role == "fuse":
        i0 = o.rated_current or sub.spec.parts[sub.slot].rating
        if i0:
            stmt = stmt.where(Part.rated_current.between(0.5 * i0, 2.0 * i0))
    if o.id is not None:
        stmt = stmt.where(Part.id != o.id)
    stocked = Part.id.in_(select(Stock.part_id).where(Stock.quantity > 0))
    order = (_closeness_sql(role, o, sub.c0), Part.maker, Part.part_number)
    ids: dict[int, None] = {}
    queries = [stmt.where(stocked)] if in_stock else [stmt.where(stocked), stmt]
    for q in queries:
        for pid in session.scalars(q.with_only_columns(Part.id).order_by(*order).limit(limit)):
            ids[pid] = None
    parts = list(session.scalars(select(Part).where(Part.id.in_(list(ids)))))
    return records(session, sorted(parts, key=lambda p: (p.maker, p.part_number)))


def crossrefs_for(session: Session, original: PartRecord) -> list[dict[str, Any]]:
    """The shop's recorded equivalences naming the original (either side)."""
    if original.id is None:
        return []
    rows = session.execute(select(CrossRef).where(
        (CrossRef.part_a_id == original.id) | (CrossRef.part_b_id == original.id))
        .order_by(CrossRef.recorded_at)).scalars().all()
    out = []
    for x in rows:
        other_id = x.part_b_id if x.part_a_id == original.id else x.part_a_id
        other = session.get(Part, other_id)
        out.append({"part": f"{other.maker}:{other.part_number}" if other else str(other_id),
                    "relation": x.relation, "note": x.note,
                    "recorded_at": x.recorded_at.isoformat() if x.recorded_at else None})
    return out


def verdict_report(sub: Substitution, judged: list[Judged], xrefs: list[dict[str, Any]]
                   ) -> dict[str, Any]:
    """The verdict JSON of DESIGN.md section 4 for judged candidates of one slot."""
    base_slot = dict(sub.base["slots"][sub.slot])
    return {
        "slot": sub.slot,
        "circuit": sub.spec.name,
        "circuit_file": sub.spec.origin,
        "policy": sub.policy.name,
        "version": __version__,
        "original": sub.original.to_dict(),
        "stress": base_slot,
        "load": sub.base["load"],
        "crossrefs": xrefs,
        "cautions": sub.base["cautions"],
        "candidates": [j.to_dict() for j in judged],
    }


def judge_candidates(session: Session, sub: Substitution, *, in_stock: bool = False
                     ) -> list[Judged]:
    """Every prefiltered catalog part (the original itself left out) judged in ``sub``'s slot,
    best first."""
    return sorted((sub.judge(c) for c in prefilter(session, sub, in_stock=in_stock)),
                  key=Judged.sort_key)


def replace_part(session: Session, spec, original: PartRecord, *, slot: str | None = None,
                 policy: Policy, in_stock: bool = False, include_rejected: bool = False,
                 limit: int | None = None) -> dict[str, Any]:
    """Rank the catalog's substitutes for ``original`` in ``spec`` (the verdict JSON)."""
    slot = choose_slot(spec, original, slot)
    sub = Substitution(spec, original, slot, policy)
    judged = judge_candidates(session, sub, in_stock=in_stock)
    n_candidates = len(judged)
    counts = {v: sum(1 for j in judged if j.verdict == v) for v in ("accept", "caution", "reject")}
    if not include_rejected:
        judged = [j for j in judged if j.verdict != "reject"]
    listed = len(judged)
    if limit:
        judged = judged[:limit]
    report = verdict_report(sub, judged, crossrefs_for(session, original))
    report["judged"] = {"candidates": n_candidates, **counts, "not_shown": listed - len(judged)}
    return report


def check_part(session: Session | None, spec, original: PartRecord, candidate: PartRecord, *,
               slot: str | None = None, policy: Policy,
               cache: dict[tuple[str, str], Substitution] | None = None) -> dict[str, Any]:
    """One candidate against one original in ``spec`` (the verdict JSON with one candidate).

    ``cache`` keeps the analysed circuit per (original, slot) across calls (``check --batch``).
    """
    slot = choose_slot(spec, original, slot)
    cache = {} if cache is None else cache
    key = (original.name, slot)
    if key not in cache:
        cache[key] = Substitution(spec, original, slot, policy)
    sub = cache[key]
    judged = sub.judge(candidate)
    xrefs = crossrefs_for(session, original) if session is not None else []
    report = verdict_report(sub, [judged], xrefs)
    report["verdict"] = judged.verdict
    return report


__all__ = ["Substitution", "replace_part", "check_part", "original_from_text", "choose_slot",
           "prefilter", "verdict_of"]


def resolve_original(session: Session | None, spec, part: str | None, original_spec: str | None,
                     slot: str | None) -> tuple[PartRecord, str]:
    """The original part and its slot, from a catalog name, entered ratings, or the circuit's
    ``part = ...`` of ``slot``."""
    from partsmatch.catalog.queries import find_part

    if part and original_spec:
        raise InputError("give either PART or --original-spec, not both")
    if original_spec:
        role = spec.parts[slot].role if slot and slot in spec.parts else _role_of_text(original_spec)
        original = original_from_text(original_spec, role)
        return original, choose_slot(spec, original, slot)
    if not part:
        if slot and slot in spec.parts and spec.parts[slot].part:
            part = spec.parts[slot].part
        else:
            raise InputError("name the original: PART, --original-spec, or --slot of a circuit "
                             "slot that names its part")
    if session is None:
        raise InputError("a catalog is needed to look up a part")
    original = find_part(session, part)
    return original, choose_slot(spec, original, slot)


def _role_of_text(text: str) -> str:
    from partsmatch.markings import decode_query

    r = decode_query(text).ratings
    hint = r.get("kind_hint")
    if hint in ("capacitor", "diode", "fuse"):
        return str(hint)
    if "capacitance" in r:
        return "capacitor"
    if "characteristic" in r or "rated_current" in r:
        return "fuse"
    raise InputError(f"cannot tell the kind of part from {text!r}: give --slot", value=text)
