"""Circuit files: the TOML contract of DESIGN.md section 4, read into a frozen :class:`CircuitSpec`.

Every value may carry units (``"2.1 kV"``, ``"0.95 uF"``) or be a bare SI number; inside the
spec all quantities are SI floats (V RMS, Hz, ohm, H, A, F). Errors are one-line
:class:`~partsmatch.errors.CircuitError` / :class:`~partsmatch.errors.UnitError` naming the file
and the key (``parts.C1.capacitance``).

Slots (reference designators) are fixed by the topology (:func:`slot_names`):

* half-wave-rectifier, half-wave-doubler: C1, D1
* full-wave-doubler: C1, C2, D1, D2
* bridge-rectifier: C1, D1..D4
* multiplier of n stages: C1..C2n, D1..D2n; a ``[parts.C]`` / ``[parts.D]`` table gives defaults
  for every capacitor / diode of the multiplier, an explicit ``[parts.Ck]`` overrides it.
* every topology: an optional fuse F1 in series with the source.

Capacitor tables are required (``capacitance``; optional ``bleeder``, ``part``). Diode tables
are optional: ``forward_voltage`` defaults to 1 V and ``resistance`` (series resistance of the
piecewise-linear model) to 1 ohm (placeholder values, common practice, no source: give the
part's own figures where they matter). A fuse table takes ``rating`` (A), ``resistance``
(cold resistance, default 0: the intact fuse is a short) and ``part``.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, field, replace
from pathlib import Path
from typing import Any, Literal

from partsmatch.errors import CircuitError, UnitError
from partsmatch.units import parse_quantity

Topology = Literal["half-wave-rectifier", "half-wave-doubler", "full-wave-doubler",
                   "bridge-rectifier", "multiplier"]
TOPOLOGIES: tuple[str, ...] = ("half-wave-rectifier", "half-wave-doubler", "full-wave-doubler",
                               "bridge-rectifier", "multiplier")
LOAD_TYPES: tuple[str, ...] = ("resistor", "current", "threshold", "none")
Role = Literal["capacitor", "diode", "fuse"]

#: Frequency range the solver is built for (issue 3: 1 Hz - 100 kHz).
F_MIN, F_MAX = 1.0, 100e3
MAX_STAGES = 10

DEFAULT_DIODE_VF = 1.0  # V, placeholder (common practice, no source)
DEFAULT_DIODE_RS = 1.0  # ohm, placeholder (common practice, no source)

_LOAD_KEYS = {
    "resistor": {"resistance": "ohm"},
    "current": {"current": "A"},
    "threshold": {"threshold": "V", "dynamic_resistance": "ohm"},
    "none": {},
}
_SLOT_KEYS: dict[str, dict[str, str]] = {
    "capacitor": {"capacitance": "F", "bleeder": "ohm"},
    "diode": {"forward_voltage": "V", "resistance": "ohm"},
    "fuse": {"rating": "A", "resistance": "ohm"},
}
#: Values that may be zero (all others must be positive).
_ZERO_OK = {("diode", "forward_voltage"), ("fuse", "resistance")}


@dataclass(frozen=True)
class SourceSpec:
    """The winding that feeds the rectifier: ideal sine behind R and L."""

    voltage_rms: float  # V RMS, open circuit
    frequency: float  # Hz
    resistance: float = 0.0  # ohm
    inductance: float = 0.0  # H (leakage)

    @property
    def v_peak(self) -> float:
        return self.voltage_rms * 2 ** 0.5


@dataclass(frozen=True)
class LoadSpec:
    """The load across the output (see :mod:`partsmatch.circuit.topologies` for its model)."""

    type: str  # resistor | current | threshold | none
    resistance: float | None = None  # ohm (resistor)
    current: float | None = None  # A (current)
    threshold: float | None = None  # V (threshold)
    dynamic_resistance: float | None = None  # ohm (threshold)


@dataclass(frozen=True)
class SlotSpec:
    """One slot's circuit values (SI floats) and an optional catalog part name."""

    role: str  # capacitor | diode | fuse
    capacitance: float | None = None  # F
    bleeder: float | None = None  # ohm, across the capacitor
    forward_voltage: float | None = None  # V
    resistance: float | None = None  # ohm (diode series R; fuse cold resistance)
    rating: float | None = None  # A (fuse rated current)
    part: str | None = None

    def to_dict(self) -> dict[str, Any]:
        keys = {"capacitor": ("capacitance", "bleeder"),
                "diode": ("forward_voltage", "resistance"),
                "fuse": ("rating", "resistance")}[self.role]
        out: dict[str, Any] = {"role": self.role}
        out.update({k: getattr(self, k) for k in keys})
        out["part"] = self.part
        return out


@dataclass(frozen=True)
class CircuitSpec:
    """A circuit file read into SI floats. Treat ``parts`` as read-only."""

    name: str
    topology: str
    stages: int | None
    source: SourceSpec
    load: LoadSpec
    parts: dict[str, SlotSpec] = field(default_factory=dict)
    ambient: float | None = None  # degC
    origin: str = "<circuit>"

    def slots(self, role: str | None = None) -> list[str]:
        """Slot names present, in topology order (optionally of one role)."""
        return [s for s in self.parts if role is None or self.parts[s].role == role]

    def to_dict(self) -> dict[str, Any]:
        """The spec echoed in SI floats (the ``circuit`` key of ``stress --json``)."""
        load = {"type": self.load.type}
        for key in _LOAD_KEYS[self.load.type]:
            load[key] = getattr(self.load, key)
        return {
            "name": self.name,
            "topology": self.topology,
            "stages": self.stages,
            "source": {"voltage": self.source.voltage_rms, "frequency": self.source.frequency,
                       "resistance": self.source.resistance,
                       "inductance": self.source.inductance},
            "load": load,
            "parts": {slot: p.to_dict() for slot, p in self.parts.items()},
            "ambient": self.ambient,
        }


def slot_names(topology: str, stages: int | None = None) -> list[str]:
    """Every slot name of a topology, capacitors then diodes, then the optional fuse F1."""
    if topology == "half-wave-rectifier" or topology == "half-wave-doubler":
        caps, diodes = 1, 1
    elif topology == "full-wave-doubler":
        caps, diodes = 2, 2
    elif topology == "bridge-rectifier":
        caps, diodes = 1, 4
    elif topology == "multiplier":
        if not isinstance(stages, int) or not 1 <= stages <= MAX_STAGES:
            raise CircuitError(f"a multiplier needs stages = 1..{MAX_STAGES}", key="stages",
                               value=stages)
        caps = diodes = 2 * stages
    else:
        raise CircuitError(f"unknown topology {topology!r}; one of {', '.join(TOPOLOGIES)}",
                           key="topology", value=topology)
    return ([f"C{i}" for i in range(1, caps + 1)] + [f"D{i}" for i in range(1, diodes + 1)]
            + ["F1"])


def role_of(slot: str) -> str:
    return {"C": "capacitor", "D": "diode", "F": "fuse"}[slot[0]]


def _table(data: Any, key: str, file: str) -> dict:
    if not isinstance(data, dict):
        raise CircuitError("expected a table", file=file, key=key, value=data)
    return data


def _unknown(table: dict, allowed: set[str] | dict, prefix: str, file: str) -> None:
    for k in table:
        if k not in allowed:
            raise CircuitError(f"unknown key (expected one of: {', '.join(sorted(allowed))})",
                               file=file, key=f"{prefix}{k}")


def _quantity(raw: Any, unit: str, key: str, file: str, *, zero_ok: bool = False) -> float:
    if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
        raise UnitError("expected a quantity (a number or text with units)", file=file, key=key,
                        value=raw)
    try:
        value = parse_quantity(raw, unit, key=key)
    except UnitError as exc:
        raise exc.located(file=file) from None
    if value < 0 or (value == 0 and not zero_ok):
        need = "zero or positive" if zero_ok else "positive"
        raise CircuitError(f"must be {need}, got {raw!r}", file=file, key=key, value=raw)
    return value


def _require(table: dict, k: str, prefix: str, file: str) -> Any:
    if k not in table:
        raise CircuitError("missing required key", file=file, key=f"{prefix}{k}")
    return table[k]


def _parse_slot(role: str, table: dict, prefix: str, file: str,
                base: SlotSpec | None = None) -> SlotSpec:
    allowed = dict(_SLOT_KEYS[role], part="")
    _unknown(table, allowed, prefix, file)
    values: dict[str, Any] = {}
    for k, unit in _SLOT_KEYS[role].items():
        if k in table:
            values[k] = _quantity(table[k], unit, prefix + k, file,
                                  zero_ok=(role, k) in _ZERO_OK)
    if "part" in table:
        if not isinstance(table["part"], str) or not table["part"].strip():
            raise CircuitError("expected a part name (text)", file=file, key=prefix + "part")
        values["part"] = table["part"].strip()
    if base is not None:
        return replace(base, **values)
    return SlotSpec(role=role, **values)


def _finish_slot(slot: SlotSpec, prefix: str, file: str) -> SlotSpec:
    if slot.role == "capacitor" and slot.capacitance is None:
        raise CircuitError("missing required key", file=file, key=prefix + "capacitance")
    if slot.role == "diode":
        slot = replace(slot,
                       forward_voltage=(DEFAULT_DIODE_VF if slot.forward_voltage is None
                                        else slot.forward_voltage),
                       resistance=DEFAULT_DIODE_RS if slot.resistance is None else slot.resistance)
    if slot.role == "fuse" and slot.resistance is None:
        slot = replace(slot, resistance=0.0)
    return slot


def parse_circuit(data: dict, source: str = "<circuit>") -> CircuitSpec:
    """A circuit from a dict shaped like the TOML contract (values: unit text or SI numbers).

    Raises:
        CircuitError, UnitError: naming ``source`` as the file and the offending key.
    """
    file = source
    data = _table(data, "(top level)", file)
    _unknown(data, {"name", "topology", "stages", "source", "load", "parts", "environment"}, "",
             file)
    topology = _require(data, "topology", "", file)
    if topology not in TOPOLOGIES:
        raise CircuitError(f"unknown topology {topology!r}; one of {', '.join(TOPOLOGIES)}",
                           file=file, key="topology", value=topology)
    stages = data.get("stages")
    if topology == "multiplier":
        if stages is None:
            raise CircuitError("missing required key (a multiplier needs its number of stages)",
                               file=file, key="stages")
        if isinstance(stages, bool) or not isinstance(stages, int) or not (
                1 <= stages <= MAX_STAGES):
            raise CircuitError(f"must be a whole number 1..{MAX_STAGES}, got {stages!r}",
                               file=file, key="stages", value=stages)
    elif stages is not None:
        raise CircuitError(f"only a multiplier has stages, not a {topology}", file=file,
                           key="stages", value=stages)
    name = data.get("name", Path(source).stem if source != "<circuit>" else "circuit")
    if not isinstance(name, str):
        raise CircuitError("expected text", file=file, key="name", value=name)

    src = _table(_require(data, "source", "", file), "source", file)
    _unknown(src, {"voltage", "frequency", "resistance", "inductance"}, "source.", file)
    voltage = _quantity(_require(src, "voltage", "source.", file), "V", "source.voltage", file)
    frequency = _quantity(_require(src, "frequency", "source.", file), "Hz", "source.frequency",
                          file)
    if not F_MIN <= frequency <= F_MAX:
        raise CircuitError(f"must be {F_MIN:g} Hz to {F_MAX / 1e3:g} kHz, got {src['frequency']!r}",
                           file=file, key="source.frequency", value=src["frequency"])
    resistance = _quantity(src.get("resistance", 0.0), "ohm", "source.resistance", file,
                           zero_ok=True)
    inductance = _quantity(src.get("inductance", 0.0), "H", "source.inductance", file,
                           zero_ok=True)
    source_spec = SourceSpec(voltage, frequency, resistance, inductance)

    load_t = _table(_require(data, "load", "", file), "load", file)
    ltype = _require(load_t, "type", "load.", file)
    if ltype not in LOAD_TYPES:
        raise CircuitError(f"unknown load type {ltype!r}; one of {', '.join(LOAD_TYPES)}",
                           file=file, key="load.type", value=ltype)
    for k in load_t:
        if k != "type" and k not in _LOAD_KEYS[ltype]:
            known = any(k in keys for keys in _LOAD_KEYS.values())
            why = f"does not apply to a {ltype} load" if known else "unknown key"
            raise CircuitError(why, file=file, key=f"load.{k}")
    lvals = {k: _quantity(_require(load_t, k, "load.", file), unit, f"load.{k}", file)
             for k, unit in _LOAD_KEYS[ltype].items()}
    load_spec = LoadSpec(type=ltype, **lvals)

    names = slot_names(topology, stages)
    parts_t = _table(data.get("parts", {}), "parts", file)
    defaults: dict[str, SlotSpec] = {}
    for group in ("C", "D"):
        if group in parts_t:
            if topology != "multiplier":
                raise CircuitError("a default table applies to a multiplier only; name the slot",
                                   file=file, key=f"parts.{group}")
            defaults[group] = _parse_slot(role_of(group), _table(parts_t[group], f"parts.{group}",
                                                                 file), f"parts.{group}.", file)
    for slot in parts_t:
        if slot not in names and slot not in defaults:
            raise CircuitError(f"no such slot in a {topology} (slots: {', '.join(names)})",
                               file=file, key=f"parts.{slot}")
    parts: dict[str, SlotSpec] = {}
    for slot in names:
        prefix = f"parts.{slot}."
        role = role_of(slot)
        base = defaults.get(slot[0])
        if slot in parts_t:
            spec = _parse_slot(role, _table(parts_t[slot], f"parts.{slot}", file), prefix, file,
                               base)
        elif base is not None:
            spec = base
        elif role == "capacitor":
            raise CircuitError("missing required table", file=file, key=f"parts.{slot}")
        elif role == "diode":
            spec = SlotSpec(role="diode")
        else:
            continue  # the fuse is optional
        parts[slot] = _finish_slot(spec, prefix, file)

    ambient = None
    if "environment" in data:
        env = _table(data["environment"], "environment", file)
        _unknown(env, {"ambient"}, "environment.", file)
        if "ambient" in env:
            raw = env["ambient"]
            if isinstance(raw, bool) or not isinstance(raw, (str, int, float)):
                raise UnitError("expected a temperature", file=file, key="environment.ambient")
            try:
                ambient = parse_quantity(raw, "degC", key="environment.ambient")
            except UnitError as exc:
                raise exc.located(file=file) from None
    return CircuitSpec(name=name, topology=topology, stages=stages, source=source_spec,
                       load=load_spec, parts=parts, ambient=ambient, origin=source)


def load_circuit(path: str | Path) -> CircuitSpec:
    """Read a circuit TOML file (DESIGN.md section 4)."""
    file = str(path)
    try:
        with open(path, "rb") as fh:
            data = tomllib.load(fh)
    except FileNotFoundError:
        raise CircuitError("no such circuit file", file=file) from None
    except OSError as exc:
        raise CircuitError(f"cannot read circuit file: {exc.strerror}", file=file) from None
    except tomllib.TOMLDecodeError as exc:
        raise CircuitError(f"not valid TOML: {exc}", file=file) from None
    return parse_circuit(data, file)


_VALUE_KEYS = {"capacitance", "bleeder", "forward_voltage", "resistance", "rating", "part"}


def with_part_values(spec: CircuitSpec, slot: str, **values: Any) -> CircuitSpec:
    """A copy of ``spec`` with one slot's values replaced (SI floats; ``bleeder=None`` removes
    the bleeder). Used to re-simulate with a candidate part in place."""
    if slot not in spec.parts:
        if slot == "F1":  # a fuse may be added to a circuit that had none
            base = SlotSpec(role="fuse", resistance=0.0)
        else:
            raise CircuitError(f"no slot {slot} in this circuit", key=f"parts.{slot}")
    else:
        base = spec.parts[slot]
    for k, v in values.items():
        if k not in _VALUE_KEYS or (k != "part" and k not in _SLOT_KEYS[base.role]):
            raise CircuitError(f"not a value of a {base.role} slot", key=f"parts.{slot}.{k}")
        if k == "part":
            continue
        if v is None:
            if k in ("capacitance",) or (base.role == "diode"):
                raise CircuitError("cannot be removed", key=f"parts.{slot}.{k}")
            continue
        zero_ok = (base.role, k) in _ZERO_OK
        if isinstance(v, bool) or not isinstance(v, (int, float)) or v < 0 or (v == 0 and
                                                                              not zero_ok):
            raise CircuitError(f"must be a positive number, got {v!r}", key=f"parts.{slot}.{k}")
    new = replace(base, **{k: (float(v) if isinstance(v, (int, float)) else v)
                           for k, v in values.items()})
    parts = dict(spec.parts)
    parts[slot] = new
    if slot not in spec.parts:  # keep topology order: the fuse goes last
        parts = {k: parts[k] for k in [*spec.parts, slot]}
    return replace(spec, parts=parts)
