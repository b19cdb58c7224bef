"""What "worst" means for a stress value (DESIGN.md section 4), in one place.

The largest magnitude, except ``v_min`` (the most negative) and ``v_max`` (the most positive).
Kept free of numpy so that the rules can import it cheaply.
"""

from __future__ import annotations


def worse(key: str, a: float | None, b: float | None) -> bool:
    """True if ``b`` is a worse value of ``key`` than ``a`` (None is never worse)."""
    if b is None:
        return False
    if a is None:
        return True
    if key == "v_min":
        return b < a
    if key == "v_max":
        return b > a
    return abs(b) > abs(a)
