"""Part-number normalisation for lookup.

Worn prints are misread in predictable ways (common practice, no source): O/0, I/1/L, S/5, B/8.
The normal form folds each group to one character, drops case and separators, so that
"ab-1O5.s" and "AB 105 5" compare equal.
"""

from __future__ import annotations

_FOLD = str.maketrans({"O": "0", "Q": "0", "I": "1", "L": "1", "S": "5", "B": "8"})
_SEPARATORS = str.maketrans("", "", " -_./\\,:;'\"()[]#")


def normalize_part_number(text: str) -> str:
    """Upper-case, separators removed, look-alike characters folded (O->0, I/L->1, S->5, B->8)."""
    return text.upper().translate(_SEPARATORS).translate(_FOLD)
