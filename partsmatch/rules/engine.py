"""Rules registry and verdicts: which rules apply to a kind, and the verdict they give."""

from __future__ import annotations

from partsmatch.catalog.records import PartRecord
from partsmatch.errors import InputError
from partsmatch.rules import capacitor, diode, fuse
from partsmatch.rules.context import SlotStress
from partsmatch.rules.findings import Finding, Verdict, verdict_of
from partsmatch.rules.policy import Policy

#: Slot role -> the rules that judge a candidate in it.
REGISTRY = {
    "capacitor": capacitor.RULES,
    "diode": diode.RULES,
    "fuse": fuse.RULES,
}


def evaluate(original: PartRecord, candidate: PartRecord, stress: SlotStress,
             policy: Policy) -> tuple[Verdict, list[Finding]]:
    """Run every rule of the slot's role; the verdict follows the worst finding."""
    if candidate.kind != stress.role:
        f = Finding("kind", "fail", None, None, None,
                    f"a {candidate.kind} cannot fill a {stress.role} slot", "the circuit's slot")
        return "reject", [f]
    if stress.role not in REGISTRY:
        raise InputError(f"no rules for a {stress.role} slot")
    findings: list[Finding] = []
    for rule in REGISTRY[stress.role]:
        out = rule(original, candidate, stress, policy)
        findings.extend(out if isinstance(out, list) else [out])
    return verdict_of(findings), findings
