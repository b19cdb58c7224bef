"""What a rule sees of the circuit: one slot's stress, split into continuous and transient.

Continuous values are the worst over the steady states (``loaded``, ``no_load``, ``high_line``)
and are held against continuous ratings; the switch-on values are transients, used for surge
current and I²t and held against the policy's transient allowance (DESIGN.md section 4).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

from partsmatch.circuit.worst import worse as _worse

STEADY_STATES = ("loaded", "no_load", "high_line")
TRANSIENT_STATE = "switch_on"


def worst_over(by_state: dict[str, Any], section: str, name: str | None,
               states: tuple[str, ...]) -> tuple[dict[str, float], dict[str, str]]:
    """Worst value of each key over ``states`` and the state that set it."""
    values: dict[str, float] = {}
    setters: dict[str, str] = {}
    for state in states:
        block = by_state.get(state, {}).get(section, {})
        if name is not None:
            block = block.get(name, {})
        for key, v in block.items():
            if not isinstance(v, (int, float)) or isinstance(v, bool):
                continue
            if _worse(key, values.get(key), v):
                values[key] = float(v)
                setters[key] = state
    return values, setters


@dataclass(frozen=True)
class SlotStress:
    """One slot's stress for the rules (SI floats)."""

    slot: str
    role: str
    frequency: float  # Hz, the source frequency
    ambient: float  # degC
    continuous: dict[str, float]
    transient: dict[str, float]
    states: dict[str, str]  # which steady state set each continuous value
    load_mean_current: float | None = None  # A, loaded state
    external_bleeder: float | None = None  # ohm, a bleeder on the board that stays
    capacitance: float | None = None  # F, the slot's capacitance as modelled
    # filled in by the substitution engine when the candidate was re-simulated:
    load_change: float | None = None  # worst fractional change of mean load current
    other_changes: dict[str, dict[str, float]] = field(default_factory=dict)
    resimulated: tuple[str, ...] = ()


def slot_stress(result: dict[str, Any], slot: str, *, frequency: float, ambient: float,
                external_bleeder: float | None = None,
                capacitance: float | None = None) -> SlotStress:
    """SlotStress of ``slot`` from an ``analyze()`` result."""
    by_state = result["by_state"]
    cont, setters = worst_over(by_state, "slots", slot, STEADY_STATES)
    trans, _ = worst_over(by_state, "slots", slot, (TRANSIENT_STATE,))
    role = result["slots"][slot]["role"]
    load = by_state.get("loaded", {}).get("load", {})
    return SlotStress(slot=slot, role=role, frequency=frequency, ambient=ambient,
                      continuous=cont, transient=trans, states=setters,
                      load_mean_current=load.get("i_mean"), external_bleeder=external_bleeder,
                      capacitance=capacitance)
