"""Rating text <-> SI floats.

``parse_quantity("0.95 uF", "F") -> 9.5e-07``. The common spellings (a number, an optional SI
prefix, a known unit symbol, an optional AC/DC/RMS marker) go through a cached regular-expression
fast path so that a large catalog import is not bound by pint; anything else falls back to pint
(imported lazily, on first need). A value of the wrong dimension is a :class:`UnitError` naming
the column or key and the expected unit.

SI prefixes and unit symbols follow the BIPM SI Brochure (9th edition, 2019), tables 5 and 7;
``K`` is also read as kilo and ``u`` as micro because rating text commonly spells them so
(common practice, no source).
"""

from __future__ import annotations

import math
import re
from functools import lru_cache

from partsmatch.errors import UnitError

#: Units partsmatch stores, with the pint unit used for the fallback and a display symbol.
UNITS: dict[str, tuple[str, str, str]] = {
    # key: (pint unit, display symbol, name used in messages)
    "V": ("volt", "V", "voltage (V)"),
    "A": ("ampere", "A", "current (A)"),
    "F": ("farad", "F", "capacitance (F)"),
    "ohm": ("ohm", "Ω", "resistance (ohm)"),
    "H": ("henry", "H", "inductance (H)"),
    "Hz": ("hertz", "Hz", "frequency (Hz)"),
    "s": ("second", "s", "time (s)"),
    "W": ("watt", "W", "power (W)"),
    "J": ("joule", "J", "energy (J)"),
    "A2s": ("ampere**2*second", "A²s", "I²t (A²s)"),
    "degC": ("degC", "°C", "temperature (degC)"),
    "%": ("percent", "%", "percentage (%)"),
}


# Spellings of each unit's symbol accepted by the fast path (compared case-insensitively,
# except that a prefix letter keeps its case: m is milli, M is mega).
_SYMBOLS: dict[str, tuple[str, ...]] = {
    "V": ("v", "volt", "volts"),
    "A": ("a", "amp", "amps", "ampere", "amperes"),
    "F": ("f", "farad", "farads"),
    "ohm": ("ohm", "ohms", "Ω", "Ω", "r"),
    "H": ("h", "henry", "henries"),
    "Hz": ("hz",),
    "s": ("s", "sec"),
    "W": ("w", "watt", "watts"),
    "J": ("j", "joule", "joules"),
    "A2s": ("a2s", "a^2s", "a²s", "a^2*s", "a2·s", "a²·s"),
    "degC": ("degc", "°c", "℃", "c"),
    "%": ("%",),
}

_NUMBER = r"[+-]?(?:\d+(?:[.,]\d*)?|[.,]\d+)(?:[eE][+-]?\d+)?"
_QUALIFIER = r"(?:\s*(?P<q>ac|a\.c\.|dc|d\.c\.|rms|~|-|=|pk|peak))?"
_FAST = re.compile(
    rf"^\s*(?P<num>{_NUMBER})\s*(?P<prefix>[pnuµμmkKMGT])?(?P<sym>[^\d\s~=-]*?)\s*{_QUALIFIER}\s*$",
    re.IGNORECASE,
)

_AC = {"ac", "a.c.", "~", "rms"}
_DC = {"dc", "d.c.", "-", "="}


def _symbol_ok(unit: str, sym: str) -> bool:
    return sym.lower() in _SYMBOLS[unit] or sym in _SYMBOLS[unit]


_A2S = re.compile(r"a\s*(?:\^\s*2|2|²)\s*[·*]?\s*s$", re.IGNORECASE)
# BIPM SI Brochure table 7 (the prefixes used on parts), plus the u and K spellings.
_EXP = {"p": -12, "n": -9, "u": -6, "µ": -6, "μ": -6, "m": -3, "k": 3, "K": 3, "M": 6, "G": 9,
        "T": 12}


@lru_cache(maxsize=65536)
def _fast(text: str, unit: str) -> float | None:
    """The fast path; None when the text is not one of the common spellings."""
    if unit == "A2s":
        text = _A2S.sub("a²s", text)
    m = _FAST.match(text)
    if m is None:
        return None
    num_text = m.group("num").replace(",", ".")
    prefix = m.group("prefix") or ""
    sym = m.group("sym") or ""
    if unit in ("%", "degC"):
        if prefix or not (sym == "" or _symbol_ok(unit, sym)):
            return None
        return float(num_text)
    if prefix and prefix not in _EXP:
        return None
    if sym and not _symbol_ok(unit, sym):
        # the letter taken for a prefix may begin the symbol itself (none of ours does today)
        if prefix and _symbol_ok(unit, prefix + sym):
            return float(num_text)
        return None
    if not prefix:
        return float(num_text)
    if "e" in num_text.lower():
        return float(num_text) * 10.0 ** _EXP[prefix]
    return float(f"{num_text}e{_EXP[prefix]}")  # exact decimal scaling: 0.95u -> 9.5e-07


def ac_dc(text: str) -> str | None:
    """``'ac'``, ``'dc'`` or None: the AC/DC marker written after a voltage (VAC, V~, VDC, V-)."""
    m = _FAST.match(text)
    if m and m.group("q"):
        q = m.group("q").lower()
        return "ac" if q in _AC else "dc" if q in _DC else None
    low = text.lower().replace(" ", "")
    if low.endswith(("vac", "v~", "vrms", "v.a.c.")):
        return "ac"
    if low.endswith(("vdc", "v-", "v=", "v.d.c.")):
        return "dc"
    return None


@lru_cache(maxsize=1)
def registry():
    """The one pint registry (imported lazily: pint is slow to import)."""
    import pint

    return pint.UnitRegistry(autoconvert_offset_to_baseunit=True)


def _pint_parse(text: str, unit: str) -> float:
    import pint

    ureg = registry()
    clean = re.sub(r"(?i)\s*(ac|dc|rms|~|pk|peak)\s*$", "", text.strip())
    clean = clean.replace("Ω", "ohm").replace("Ω", "ohm").replace("µ", "u").replace("μ", "u")
    clean = clean.replace("°C", "degC").replace("℃", "degC").replace("²", "**2")
    try:
        q = ureg.Quantity(clean)
    except (pint.errors.PintError, SyntaxError, ValueError, TypeError, AttributeError,
            KeyError, IndexError, ZeroDivisionError, OverflowError, RecursionError, TokenError) as exc:
        raise UnitError(f"cannot read {text!r} as a {UNITS[unit][2]}", value=text) from exc
    except Exception as exc:  # pint's parser raises a wide range of errors on odd text
        raise UnitError(f"cannot read {text!r} as a {UNITS[unit][2]}", value=text) from exc
    if not hasattr(q, "magnitude"):
        if isinstance(q, (int, float)):
            return float(q)
        raise UnitError(f"cannot read {text!r} as a {UNITS[unit][2]}", value=text)
    if q.dimensionless and unit != "%":
        return float(q.magnitude)
    try:
        return float(q.to(UNITS[unit][0]).magnitude)
    except pint.errors.DimensionalityError as exc:
        raise UnitError(
            f"{text!r} has the wrong dimension: expected a {UNITS[unit][2]}", value=text
        ) from exc
    except Exception as exc:
        raise UnitError(f"cannot read {text!r} as a {UNITS[unit][2]}", value=text) from exc


try:  # tokenize's error class, raised by pint on some text
    from tokenize import TokenError
except ImportError:  # pragma: no cover
    TokenError = SyntaxError  # type: ignore[misc,assignment]


def parse_quantity(text: str | float | int, unit: str, *, column: str | None = None,
                   key: str | None = None) -> float:
    """Read a rating into an SI float.

    Args:
        text: "0.95 uF", "2100 VAC", "12kV", "10 MΩ", "100 ns", a bare SI number, or a number.
        unit: one of :data:`UNITS` (``"V"``, ``"A"``, ``"F"``, ``"ohm"``, ...); the result is in
            that unit without prefix (volts, amperes, farads, ohms ...).
        column, key: where the text came from, named in an error.

    Raises:
        UnitError: unreadable text, wrong dimension, or a value that is not finite.
    """
    if unit not in UNITS:
        raise ValueError(f"unknown unit key {unit!r}")
    if isinstance(text, bool):
        raise UnitError(f"expected a {UNITS[unit][2]}, got {text!r}", column=column, key=key,
                        value=text)
    if isinstance(text, (int, float)):
        value = float(text)
    else:
        s = str(text).strip()
        if not s:
            raise UnitError(f"empty value, expected a {UNITS[unit][2]}", column=column, key=key,
                            value=text)
        if len(s) > 64:
            raise UnitError(f"value too long to be a {UNITS[unit][2]}", column=column, key=key,
                            value=s[:20])
        fast = _fast(s, unit)
        if fast is None:
            try:
                fast = _pint_parse(s, unit)
            except UnitError as exc:
                raise exc.located(column=column, key=key) from None
        value = fast
    if not math.isfinite(value):
        raise UnitError(f"{text!r} is not a finite number", column=column, key=key, value=text)
    return value


def format_quantity(value: float | None, unit: str, digits: int = 3) -> str:
    """SI float -> engineering text ("9.5e-07", "F" -> "950 nF"); "-" for None."""
    if value is None:
        return "-"
    symbol = UNITS[unit][1] if unit in UNITS else unit
    if unit in ("degC", "%"):
        return f"{_sig(value, digits)} {symbol}".replace(" %", " %")
    if value == 0 or not math.isfinite(value):
        return f"{value:g} {symbol}"
    exp3 = int(math.floor(math.log10(abs(value)) / 3) * 3)
    exp3 = max(-12, min(12, exp3))
    mant = _round_sig(value / 10**exp3, digits)
    if abs(mant) >= 1000 and exp3 < 12:  # rounding carried into the next prefix
        exp3 += 3
        mant = _round_sig(value / 10**exp3, digits)
    names = {-12: "p", -9: "n", -6: "µ", -3: "m", 0: "", 3: "k", 6: "M", 9: "G", 12: "T"}
    return f"{_sig(mant, digits)} {names[exp3]}{symbol}"


def _round_sig(x: float, digits: int) -> float:
    if x == 0 or not math.isfinite(x):
        return x
    return round(x, digits - 1 - int(math.floor(math.log10(abs(x)))))


def _sig(x: float, digits: int) -> str:
    """``x`` to ``digits`` significant digits, in plain (not exponent) notation."""
    if x == 0 or not math.isfinite(x):
        return f"{x:g}"
    decimals = max(0, digits - 1 - int(math.floor(math.log10(abs(x)))))
    text = f"{x:.{decimals}f}"
    return text.rstrip("0").rstrip(".") if "." in text else text
