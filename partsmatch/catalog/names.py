"""Part-number normalisation for lookup.

Worn prints are misread in predictable ways (common practice, no source): O/0, I/1/L, S/5, B/8.
The normal form folds each group to one character, drops case and separators, so that
"ab-1O5.s" and "AB 105 5" compare equal.
"""

from __future__ import annotations

_SEPARATORS = {c: None for c in " -_./\\,:;'\"()[]#"}
_STRIP = str.maketrans(_SEPARATORS)
#: one table: separators deleted, look-alike characters folded
_TABLE = str.maketrans({"O": "0", "Q": "0", "I": "1", "L": "1", "S": "5", "B": "8",
                        **_SEPARATORS})


def normalize_part_number(text: str) -> str:
    """Upper-case, separators removed, look-alike characters folded (O->0, I/L->1, S->5, B->8)."""
    return text.upper().translate(_TABLE)


def strip_separators(text: str) -> str:
    """Upper-case with separators removed; look-alike characters kept as they are."""
    return text.upper().translate(_STRIP)
