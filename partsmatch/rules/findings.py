"""Findings, and the one comparison every rated check shares.

A finding is ``{rule, status, stress, rating, margin, message, basis}`` (DESIGN.md section 4):
``margin`` = rating / stress for a rating that must exceed its stress (> 1 is good), None where
the check is not a ratio.

**What worked is evidence** (DESIGN.md section 3): where the candidate is at least as good as the
original on a rating, a model stress above that rating is a warning that questions the model's
inputs, not a failure; where the candidate is worse, the stress decides.
"""

from __future__ import annotations

from dataclasses import asdict, dataclass
from typing import Any, Literal

from partsmatch.units import format_quantity

Status = Literal["pass", "warn", "fail"]
Verdict = Literal["accept", "caution", "reject"]


@dataclass(frozen=True)
class Finding:
    rule: str
    status: Status
    stress: float | None
    rating: float | None
    margin: float | None
    message: str
    basis: str
    unit: str = ""

    def to_dict(self) -> dict[str, Any]:
        return asdict(self)


def verdict_of(findings: list[Finding]) -> Verdict:
    """``reject`` if any finding fails, ``caution`` if any warns, else ``accept``."""
    statuses = {f.status for f in findings}
    if "fail" in statuses:
        return "reject"
    if "warn" in statuses:
        return "caution"
    return "accept"


def fq(value: float | None, unit: str) -> str:
    return format_quantity(value, unit) if value is not None else "unknown"


def rated(rule: str, *, stress: float | None, rating: float | None, original: float | None,
          margin_fraction: float, unit: str, what: str, basis: str,
          essential: bool = True) -> Finding:
    """A rating that must exceed its stress, judged with the evidence of the original.

    Args:
        stress: the worst value the part sees (SI); None when the model gives none.
        rating: the candidate's rating (SI); None when the catalog has none.
        original: the original part's rating, None when unknown.
        margin_fraction: stress above ``margin_fraction * rating`` warns (policy margin).
        essential: a missing rating fails (True) or warns (False).
    """
    if stress is None:
        return Finding(rule, "pass", None, rating, None, f"{what}: no stress in this circuit",
                       basis, unit)
    stress = abs(stress)
    if rating is None:
        status: Status = "fail" if essential else "warn"
        return Finding(rule, status, stress, None, None,
                       f"{what}: the candidate has no rating to check against "
                       f"{fq(stress, unit)}", basis, unit)
    margin = rating / stress if stress > 0 else None
    as_good = original is not None and rating >= original
    if stress <= margin_fraction * rating:
        return Finding(rule, "pass", stress, rating, margin,
                       f"{what}: {fq(stress, unit)} against {fq(rating, unit)}", basis, unit)
    if stress <= rating:
        return Finding(rule, "warn", stress, rating, margin,
                       f"{what}: {fq(stress, unit)} is inside the policy margin of "
                       f"{fq(rating, unit)} ({margin_fraction:g} x rating)", basis, unit)
    if as_good:
        return Finding(rule, "warn", stress, rating, margin,
                       f"{what}: the model gives {fq(stress, unit)}, above the rating "
                       f"{fq(rating, unit)}, but the candidate is at least as good as the "
                       f"original ({fq(original, unit)}) that worked here: check the circuit "
                       "values (leakage inductance, load) before trusting either", basis, unit)
    return Finding(rule, "fail", stress, rating, margin,
                   f"{what}: {fq(stress, unit)} exceeds the rating {fq(rating, unit)}"
                   + (f" (original {fq(original, unit)})" if original is not None else ""),
                   basis, unit)


def mismatch(rule: str, what: str, original: str | None, candidate: str | None,
             basis: str) -> Finding:
    """Size, terminals, format: a difference with the original is a warning naming both."""
    if original and candidate and original.strip().lower() != candidate.strip().lower():
        return Finding(rule, "warn", None, None, None,
                       f"{what} differs: original {original}, candidate {candidate}", basis)
    if original and not candidate:
        return Finding(rule, "warn", None, None, None,
                       f"{what} of the candidate unknown (original {original})", basis)
    return Finding(rule, "pass", None, None, None, f"{what}: {candidate or 'not stated'}", basis)
