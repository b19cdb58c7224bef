"""Printed markings of capacitors, resistors and fuses -> ratings as SI floats.

``decode("105J")`` reads one marking and returns every reading it admits (a list of
:class:`Reading`); ``decode_query("0.95uF 2100VAC 3%")`` splits free text into pieces, decodes
each, and gathers the ratings a catalog lookup can filter on (:class:`QueryReading`).

What is read, and on whose authority:

* IEC 60062 three-digit capacitor code in pF: two significant digits and a power of ten
  (``103`` = 10 nF, ``105`` = 1 uF); a third digit 8 means x0.01 and 9 means x0.1 (from memory).
  The code may be followed by a tolerance letter (``105J``).
* IEC 60062 tolerance letters: F 1 %, G 2 %, H 3 % (a 2.5 % reading is also met: noted),
  J 5 %, K 10 %, M 20 %, Z +80/-20 %, P +100/-0 %; below 10 pF the absolute letters B 0.1 pF,
  C 0.25 pF, D 0.5 pF, F 1 pF, G 2 pF (from memory); asymmetric Q -10/+30 %, T -10/+50 %,
  S -20/+50 % (from memory); N has two readings in use (30 % and 0.05 %): both are returned.
* IEC 60062 RKM codes, the letter standing for the decimal point and the multiplier:
  ``p68``, ``2n2``, ``4n7``, ``u47``, ``4u7`` (capacitance); ``R47``, ``4R7``, ``470R``, ``2k2``,
  ``4K7``, ``47K3``, ``10M``, ``4M7`` (resistance).
* Rated-voltage text (``2100VAC``, ``2.1 kV AC``, ``12KV``, ``630V-``, ``630 VDC``, ``250V~``):
  the AC/DC markers are common practice, no source.
* IEC 60127 fuse markings in the order characteristic, rated current, breaking-capacity letter,
  rated voltage (``T3.15AL250V``, ``F500mAH250V``, ``FF1A E 125V``): characteristic letters
  FF F M T TT (IEC 60127-1); breaking capacity L 35 A or 10 x In (the greater), E 150 A,
  H 1500 A at 250 V (IEC 60127-2, secondary source).
* Plain quantities (``0.95uF``, ``350 mA``, ``12 kV``, ``100 ns``) through
  :func:`partsmatch.units.parse_quantity`.

Ambiguous text gives every reading, each with a note; nothing is guessed silently. Text that
cannot be read raises :class:`partsmatch.errors.InputError` with a one-line message naming the
text; no other exception leaves :func:`decode` or :func:`decode_query`.

The module is pure and light: it imports only the standard library and ``partsmatch.units``
(whose pint fallback is never reached from here: every quantity is rebuilt in a spelling the
units fast path reads).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass, field
from typing import Literal

from partsmatch.errors import InputError, UnitError
from partsmatch.units import format_quantity, parse_quantity

ReadingKind = Literal[
    "capacitance", "resistance", "voltage", "current", "fuse", "tolerance", "time",
    "frequency", "power", "inductance", "energy", "number",
]

#: Longest text :func:`decode` tries to read (a marking is short).
MAX_MARKING = 64
#: Most whitespace-separated pieces :func:`decode_query` joins into one marking ("T 3.15 A L 250 V").
MAX_SPAN = 6


@dataclass(frozen=True)
class Reading:
    """One way of reading a marking.

    Attributes:
        kind: what the marking states (``capacitance``, ``resistance``, ``voltage``,
            ``current``, ``fuse``, ``tolerance``, ``time``, ``frequency``, ``power``,
            ``inductance``, ``energy``, or ``number`` for a bare number).
        values: SI floats and strings: ``capacitance`` (F), ``resistance`` (ohm),
            ``voltage`` / ``voltage_ac`` / ``voltage_dc`` (V), ``current`` / ``rated_current``
            (A), ``breaking_capacity`` (A), ``tolerance_minus`` / ``tolerance_plus`` (%, both
            positive magnitudes), ``tolerance_abs`` (F, an absolute tolerance), ``time`` (s),
            ``frequency`` (Hz), ``power`` (W), ``inductance`` (H), ``energy`` (J), ``number``;
            strings ``characteristic``, ``breaking_capacity_letter``, ``breaking_capacity_rule``,
            ``tolerance_letter``, ``fuse_standard``.
        note: how it was read, naming the standard (or ``common practice, no source``).
        text: the text that was read.
    """

    kind: ReadingKind
    values: dict[str, float | str] = field(hash=False)
    note: str
    text: str = ""

    def as_dict(self) -> dict[str, object]:
        """A JSON-ready dict: text, kind, values, note."""
        return {"text": self.text, "kind": self.kind, "values": dict(self.values),
                "note": self.note}


@dataclass(frozen=True)
class QueryReading:
    """What :func:`decode_query` made of a free-text query.

    Attributes:
        text: the query as given.
        ratings: the recognised ratings, merged from the first reading of every piece (SI floats
            and strings, keys as in :attr:`Reading.values`, plus ``tolerance`` (%) for a
            symmetric tolerance and ``kind_hint`` (capacitor | diode | fuse | resistor) from a
            word such as "diode" or from a fuse marking).
        pieces: every piece of the query that was read, with all its readings (the first is
            the one merged into ``ratings``).
        unread: the words left unread (and bare numbers), for a text search.
        notes: ambiguities and conflicts, one line each.
    """

    text: str
    ratings: dict[str, float | str] = field(hash=False)
    pieces: tuple[tuple[str, tuple[Reading, ...]], ...] = ()
    unread: tuple[str, ...] = ()
    notes: tuple[str, ...] = ()

    @property
    def kind_hint(self) -> str | None:
        hint = self.ratings.get("kind_hint")
        return hint if isinstance(hint, str) else None

    def as_dict(self) -> dict[str, object]:
        return {
            "text": self.text,
            "ratings": dict(self.ratings),
            "pieces": [{"text": t, "readings": [r.as_dict() for r in rs]}
                       for t, rs in self.pieces],
            "unread": list(self.unread),
            "notes": list(self.notes),
        }


# --------------------------------------------------------------------------- letter tables

#: IEC 60062 tolerance letters, percent (minus, plus) as positive magnitudes. H: 3 % is the
#: agreed reading; a 2.5 % reading is also met (noted, not returned as a value).
TOLERANCE_PERCENT: dict[str, tuple[float, float]] = {
    "F": (1.0, 1.0), "G": (2.0, 2.0), "H": (3.0, 3.0), "J": (5.0, 5.0), "K": (10.0, 10.0),
    "M": (20.0, 20.0), "Z": (20.0, 80.0), "P": (0.0, 100.0),
}
#: Asymmetric tolerance letters (from memory): Q -10/+30 %, T -10/+50 %, S -20/+50 %.
TOLERANCE_ASYMMETRIC: dict[str, tuple[float, float]] = {
    "Q": (10.0, 30.0), "T": (10.0, 50.0), "S": (20.0, 50.0),
}
#: IEC 60062 absolute letters for capacitors below 10 pF, in pF (from memory).
TOLERANCE_ABSOLUTE_PF: dict[str, float] = {"B": 0.1, "C": 0.25, "D": 0.5, "F": 1.0, "G": 2.0}
#: The same B C D letters as percentages at 10 pF and above (from memory).
TOLERANCE_PERCENT_MEMORY: dict[str, float] = {"B": 0.1, "C": 0.25, "D": 0.5}
#: N: two readings in use (30 % and 0.05 %): ambiguous, both returned.
TOLERANCE_N: tuple[float, float] = (30.0, 0.05)

TOLERANCE_LETTERS = frozenset(
    set(TOLERANCE_PERCENT) | set(TOLERANCE_ASYMMETRIC) | set(TOLERANCE_ABSOLUTE_PF) | {"N"}
)

#: IEC 60127-1 time-current characteristic letters.
FUSE_CHARACTERISTICS: dict[str, str] = {
    "FF": "very quick-acting", "F": "quick-acting", "M": "medium time-lag",
    "T": "time-lag", "TT": "long time-lag",
}
#: IEC 60127-2 breaking-capacity letters (secondary source): (name, amperes or None, rule).
BREAKING_CAPACITY: dict[str, tuple[str, float | None, str]] = {
    "L": ("low", None, "35 A or 10 x In, the greater"),
    "E": ("enhanced", 150.0, "150 A"),
    "H": ("high", 1500.0, "1500 A at 250 V"),
}
#: IEC 60127-2 rated-current series in A (R10 preferred numbers; secondary source).
FUSE_CURRENT_SERIES: tuple[float, ...] = (
    0.032, 0.040, 0.050, 0.063, 0.080, 0.100, 0.125, 0.160, 0.200, 0.250, 0.315, 0.400, 0.500,
    0.630, 0.800, 1.0, 1.25, 1.6, 2.0, 2.5, 3.15, 4.0, 5.0, 6.3, 8.0, 10.0,
)

#: Words of a query that name the kind of part.
KIND_WORDS: dict[str, str] = {
    "capacitor": "capacitor", "capacitors": "capacitor", "cap": "capacitor", "caps": "capacitor",
    "condenser": "capacitor",
    "diode": "diode", "diodes": "diode", "rectifier": "diode", "rectifiers": "diode",
    "fuse": "fuse", "fuses": "fuse",
    "resistor": "resistor", "resistors": "resistor", "bleeder": "resistor",
}

# --------------------------------------------------------------------------- regular expressions

_NUM = r"(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)"
_CODE3 = re.compile(r"([1-9][0-9])([0-9])\s*([A-Za-z])?")
_RKM = re.compile(r"([0-9]*)([pnuµPNURrKkMmGT])([0-9]*)([A-Z])?")
_VOLTAGE = re.compile(
    rf"({_NUM})\s*([kKmM]?)\s*(?:V|v|volts?|Volts?|VOLTS?)\s*"
    r"(AC|DC|A\.C\.|D\.C\.|RMS|~|-|=|⎓)?",
    re.IGNORECASE,
)
_WORKING_VOLTAGE = re.compile(rf"({_NUM})\s*([kK]?)\s*(?:WV|WVDC)", re.IGNORECASE)
_QUANTITY = re.compile(
    rf"({_NUM})\s*([pnuµmkKMG]?)\s*(F|FD|Ω|ohms?|Hz|s|sec|W|H|A)", re.IGNORECASE
)
_FUSE = re.compile(
    rf"(FF|TT|F|M|T)\s*({_NUM})\s*(mA|A)\s*([LEH])?"
    rf"(?:\s*/?\s*({_NUM})\s*(k?)V\s*(AC|DC|~|-)?)?",
    re.IGNORECASE,
)
_PERCENT = re.compile(
    rf"(?:(±|\+/-|\+-|-\+)\s*)?({_NUM})\s*%", re.IGNORECASE
)
_ASYM_PERCENT = re.compile(
    rf"([+-])\s*({_NUM})\s*%?\s*/\s*([+-])\s*({_NUM})\s*%"
)
_ABS_PF = re.compile(rf"(?:±|\+/-|\+-)\s*({_NUM})\s*pF", re.IGNORECASE)
_NUMBER = re.compile(rf"[+-]?{_NUM}")

_PREFIX_EXP = {"p": -12, "n": -9, "u": -6, "m": -3, "": 0, "k": 3, "M": 6, "G": 9, "T": 12}
_QUANTITY_UNITS = {  # lower-case symbol -> (units key, reading kind, canonical symbol)
    "f": ("F", "capacitance", "F"), "fd": ("F", "capacitance", "F"),
    "ω": ("ohm", "resistance", "ohm"), "ohm": ("ohm", "resistance", "ohm"),
    "ohms": ("ohm", "resistance", "ohm"),
    "hz": ("Hz", "frequency", "Hz"), "s": ("s", "time", "s"), "sec": ("s", "time", "s"),
    "w": ("W", "power", "W"), "h": ("H", "inductance", "H"),
    "a": ("A", "current", "A"),
}


def _full(pattern: re.Pattern[str], text: str) -> re.Match[str] | None:
    """The whole text matched by the pattern, or None."""
    return pattern.fullmatch(text)


def _scaled(number: str, exponent: int) -> float:
    """``number`` x 10**exponent by decimal scaling (0.95, -6 -> 9.5e-07 exactly as written)."""
    return float(f"{number}e{exponent}")


def _quote(text: str) -> str:
    """The text as it appears in a message: quoted, shortened, on one line."""
    short = text if len(text) <= 40 else text[:37] + "..."
    return repr(short)


# --------------------------------------------------------------------------- tolerances


def _tolerance_letter(letter: str, nominal_f: float | None = None,
                      ) -> list[tuple[dict[str, float | str], str]]:
    """Readings of an IEC 60062 tolerance letter: (values, note) pairs.

    ``nominal_f`` is the capacitance the letter follows (F); below 10 pF the letters B C D F G
    are absolute tolerances in pF.
    """
    out: list[tuple[dict[str, float | str], str]] = []
    small = nominal_f is not None and nominal_f < 10e-12
    if letter in TOLERANCE_ABSOLUTE_PF and (small or nominal_f is None):
        pf = TOLERANCE_ABSOLUTE_PF[letter]
        values: dict[str, float | str] = {"tolerance_abs": _scaled(str(pf), -12),
                                          "tolerance_letter": letter}
        if nominal_f:
            pct = round(100.0 * pf * 1e-12 / nominal_f, 6)
            values["tolerance_minus"] = pct
            values["tolerance_plus"] = pct
        absolute = (values, f"{letter} = ±{pf:g} pF, absolute tolerance for capacitors below "
                            "10 pF (IEC 60062 tolerance letter, from memory)")
        if small:
            return [absolute]
        out.extend(_tolerance_letter(letter, 1.0))  # the percent readings first
        out.append(absolute)
        return out
    if letter in TOLERANCE_PERCENT:
        minus, plus = TOLERANCE_PERCENT[letter]
        note = f"{letter} = {_pct_text(minus, plus)} (IEC 60062 tolerance letter)"
        if letter == "H":
            note += "; a conflicting reading of H as ±2.5 % is also met"
        out.append(({"tolerance_minus": minus, "tolerance_plus": plus,
                     "tolerance_letter": letter}, note))
    elif letter in TOLERANCE_PERCENT_MEMORY:
        p = TOLERANCE_PERCENT_MEMORY[letter]
        out.append(({"tolerance_minus": p, "tolerance_plus": p, "tolerance_letter": letter},
                    f"{letter} = ±{p:g} % (IEC 60062 tolerance letter, from memory)"))
    elif letter in TOLERANCE_ASYMMETRIC:
        minus, plus = TOLERANCE_ASYMMETRIC[letter]
        out.append(({"tolerance_minus": minus, "tolerance_plus": plus,
                     "tolerance_letter": letter},
                    f"{letter} = {_pct_text(minus, plus)} (IEC 60062 asymmetric tolerance "
                    "letter, from memory)"))
    elif letter == "N":
        for p in TOLERANCE_N:
            out.append(({"tolerance_minus": p, "tolerance_plus": p, "tolerance_letter": "N"},
                        f"N = ±{p:g} % (IEC 60062 letter N has conflicting readings, "
                        f"{TOLERANCE_N[0]:g} % and {TOLERANCE_N[1]:g} %: ambiguous)"))
    return out


def _pct_text(minus: float, plus: float) -> str:
    if minus == plus:
        return f"±{minus:g} %"
    return f"-{minus:g}/+{plus:g} %"


def _read_tolerance(s: str) -> list[Reading]:
    m = _full(_PERCENT, s)
    if m:
        p = float(m.group(2))
        if p <= 1000.0:
            return [Reading("tolerance", {"tolerance_minus": p, "tolerance_plus": p},
                            "symmetric tolerance in percent", s)]
    m = _full(_ASYM_PERCENT, s)
    if m and m.group(1) != m.group(3):
        a, b = float(m.group(2)), float(m.group(4))
        plus, minus = (a, b) if m.group(1) == "+" else (b, a)
        if plus <= 1000.0 and minus <= 100.0:
            return [Reading("tolerance", {"tolerance_minus": minus, "tolerance_plus": plus},
                            "asymmetric tolerance in percent", s)]
    m = _full(_ABS_PF, s)
    if m:
        return [Reading("tolerance", {"tolerance_abs": _scaled(m.group(1), -12)},
                        "absolute tolerance in pF", s)]
    if s in TOLERANCE_LETTERS:
        return [Reading("tolerance", v, note, s) for v, note in _tolerance_letter(s)]
    return []


# --------------------------------------------------------------------------- capacitor codes


def _read_code(s: str) -> list[Reading]:
    """IEC 60062 three-digit capacitor code, optionally with a tolerance letter."""
    m = _full(_CODE3, s)
    if not m:
        return []
    sig, mult = m.group(1), int(m.group(2))
    letter = (m.group(3) or "").upper()
    if letter and letter not in TOLERANCE_LETTERS:
        return []
    if mult <= 7:
        farads = _scaled(sig, mult - 12)
        how = f"{sig} x 10^{mult} pF"
        src = "IEC 60062 three-digit capacitor code"
        if mult == 7:
            src += "; multiplier digit 7 is outside the usual table (from memory)"
    else:
        exp = -2 if mult == 8 else -1
        farads = _scaled(sig, exp - 12)
        how = f"{sig} x {10.0 ** exp:g} pF"
        src = f"IEC 60062 three-digit capacitor code, multiplier digit {mult} (from memory)"
    base = f"{how} = {format_quantity(farads, 'F')} ({src})"
    if not letter:
        return [Reading("capacitance", {"capacitance": farads},
                        base + "; on a resistor the same digits would mean ohms", s)]
    out = []
    for values, tol_note in _tolerance_letter(letter, farads):
        out.append(Reading("capacitance", {"capacitance": farads, **values},
                           f"{base}; {tol_note}", s))
    return out  # F after a code is the tolerance letter: the farad symbol is not written so


def _read_rkm(s: str) -> list[Reading]:
    """IEC 60062 RKM codes: the letter is the decimal point and the multiplier."""
    m = _full(_RKM, s)
    if not m:
        return []
    before, letter, after, tol = m.group(1), m.group(2), m.group(3), m.group(4) or ""
    if not (before or after):
        return []
    if tol == "F" and not after and letter in "pnuµPNU":
        return []  # 1uF, 100nF: a plain quantity with the farad symbol, read elsewhere
    if letter in "PN" and not after:
        return []  # 105P, 105N: IEC 60062 tolerance letters after a code, not pico or nano
    number = f"{before or '0'}.{after or '0'}"
    if tol and tol not in TOLERANCE_LETTERS:
        return []
    # (kind, exponent, unit key, how) for each reading of the letter
    cap_letters = {"p": -12, "n": -9, "u": -6, "µ": -6, "P": -12, "N": -9, "U": -6}
    res_letters = {"R": 0, "r": 0, "K": 3, "k": 3, "M": 6, "G": 9, "T": 12}
    choices: list[tuple[ReadingKind, int, str]] = []
    if letter in cap_letters:
        how = (f"IEC 60062 RKM code for capacitance: {letter} = "
               f"{'pnµµpnµ'['pnuµPNU'.index(letter)]}F and the decimal point")
        if letter in "PNU":
            how += " (the standard writes the letter in lower case)"
        choices.append(("capacitance", cap_letters[letter], how))
    elif letter in res_letters:
        name = {"R": "ohm", "r": "ohm", "K": "kohm", "k": "kohm", "M": "Mohm", "G": "Gohm",
                "T": "Tohm"}[letter]
        choices.append(("resistance", res_letters[letter],
                        f"IEC 60062 RKM code for resistance: {letter} = {name} and the "
                        "decimal point"))
    elif letter == "m":
        choices.append(("resistance", -3, "IEC 60062 RKM code for resistance: m = milliohm "
                        "and the decimal point (from memory)"))
        choices.append(("resistance", 6, "read as M (Mohm) typed in lower case; RKM letters "
                        "are case-sensitive: ambiguous"))
        choices.append(("capacitance", -3, "IEC 60062 RKM code for capacitance: m = mF "
                        "(from memory); ambiguous with milliohm"))
    if not choices:
        return []
    out: list[Reading] = []
    for kind, exp, how in choices:
        value = _scaled(number, exp)
        unit = "F" if kind == "capacitance" else "ohm"
        base = f"{format_quantity(value, unit)} ({how})"
        if not tol:
            out.append(Reading(kind, {kind: value}, base, s))
            continue
        tol_readings = _tolerance_letter(tol, value if kind == "capacitance" else 1.0)
        for values, tol_note in tol_readings:
            out.append(Reading(kind, {kind: value, **values}, f"{base}; {tol_note}", s))
        if tol == "F" and kind == "capacitance":
            out.append(Reading(kind, {kind: value}, f"{base}; the final F read as the farad "
                               "symbol, not the tolerance letter F: ambiguous", s))
    return out


# --------------------------------------------------------------------------- voltage, quantities

_AC_MARKS = {"ac", "a.c.", "rms", "~"}
_DC_MARKS = {"dc", "d.c.", "-", "=", "⎓"}


def _read_voltage(s: str) -> list[Reading]:
    m = _full(_WORKING_VOLTAGE, s)
    if m:
        volts = _volts(m.group(1), m.group(2))
        if volts is None:
            return []
        return [Reading("voltage", {"voltage_dc": volts}, f"{format_quantity(volts, 'V')} DC: "
                        "WV/WVDC is a working (DC) voltage (common practice, no source)", s)]
    m = _full(_VOLTAGE, s)
    if not m:
        return []
    prefix = m.group(2)
    volts = _volts(m.group(1), prefix)
    if volts is None:
        return []
    mark = (m.group(3) or "").lower()
    shown = format_quantity(volts, "V")
    if prefix == "m":  # millivolts: a rating is never in mV, but mV is what the letters say
        extra = " (m read as milli)"
    elif prefix == "M":
        extra = " (M read as mega)"
    else:
        extra = ""
    if mark in _AC_MARKS:
        return [Reading("voltage", {"voltage_ac": volts}, f"rated voltage {shown} AC (RMS)"
                        f"{extra}: AC marker (common practice, no source)", s)]
    if mark in _DC_MARKS:
        return [Reading("voltage", {"voltage_dc": volts}, f"rated voltage {shown} DC{extra}: "
                        "DC marker (common practice, no source)", s)]
    return [Reading("voltage", {"voltage": volts}, f"voltage {shown}{extra}, AC or DC not "
                    "stated (common practice, no source)", s)]


def _volts(number: str, prefix: str) -> float | None:
    p = {"k": "k", "K": "k", "m": "m", "M": "M", "": ""}[prefix]
    try:
        return parse_quantity(f"{number} {p}V", "V")
    except UnitError:
        return None


def _read_quantity(s: str) -> list[Reading]:
    m = _full(_QUANTITY, s)
    if not m:
        return []
    number, prefix, sym = m.group(1), m.group(2), m.group(3)
    low = sym.lower()
    if not prefix and _full(_CODE3, s):
        return []  # 105F, 104H, 100S: a capacitor code with a tolerance letter, not a unit
    key, kind, canon = _QUANTITY_UNITS[low]
    # p n u k have one meaning whatever their case; m and M differ (milli, mega)
    prefix = {"P": "p", "N": "n", "U": "u", "µ": "u", "K": "k", "g": "G"}.get(prefix, prefix)
    out: list[Reading] = []
    if key == "F" and prefix in ("m", "M") and (sym.upper() in ("F", "FD")):
        # old capacitor markings write MF / MFD for microfarad (common practice, no source)
        micro = _value(number, "u", canon, key)
        if micro is not None:
            out.append(Reading("capacitance", {"capacitance": micro},
                               f"{format_quantity(micro, 'F')}: MF / MFD on older capacitors "
                               "means microfarad (common practice, no source)", s))
        if prefix == "m" and sym == "F":
            milli = _value(number, "m", canon, key)
            if milli is not None:
                out.append(Reading("capacitance", {"capacitance": milli},
                                   f"{format_quantity(milli, 'F')}: mF read as millifarad "
                                   "(BIPM SI prefix); ambiguous with the old MF = µF", s))
        return out
    if prefix and prefix not in _PREFIX_EXP:
        return []
    value = _value(number, prefix, canon, key)
    if value is None:
        return []
    note = f"{format_quantity(value, key)} ({kind}; SI prefixes and symbols, BIPM SI Brochure)"
    if prefix == "M" and key == "A":  # 350MA typed in capitals is milliamperes, not mega
        milli = _value(number, "m", canon, key)
        if milli is not None:
            out.append(Reading(kind, {kind: milli}, f"{format_quantity(milli, key)}: MA read as "
                               "mA typed in capitals: ambiguous with mega", s))
            note += "; M read as mega: ambiguous with mA typed in capitals"
    out.append(Reading(kind, {kind: value}, note, s))
    return out


def _value(number: str, prefix: str, symbol: str, key: str) -> float | None:
    try:
        return parse_quantity(f"{number} {prefix}{symbol}", key)
    except UnitError:
        return None


def _read_number(s: str) -> list[Reading]:
    if not _full(_NUMBER, s):
        return []
    value = float(s)
    if not math.isfinite(value):
        return []
    return [Reading("number", {"number": value}, "a plain number without a unit", s)]


# --------------------------------------------------------------------------- fuses


def _read_fuse(s: str) -> list[Reading]:
    m = _full(_FUSE, s)
    if not m:
        return []
    char = m.group(1).upper()
    amps_text, amp_unit = m.group(2), m.group(3)
    try:
        rated = parse_quantity(f"{amps_text} {'mA' if amp_unit.lower() == 'ma' else 'A'}", "A")
    except UnitError:
        return []
    if rated <= 0:
        return []
    values: dict[str, float | str] = {"characteristic": char, "rated_current": rated,
                                      "fuse_standard": "IEC 60127"}
    parts = [f"{char} = {FUSE_CHARACTERISTICS[char]} (IEC 60127-1 characteristic letter)",
             f"rated current {format_quantity(rated, 'A')}"]
    if not any(math.isclose(rated, x, rel_tol=1e-9) for x in FUSE_CURRENT_SERIES):
        parts.append("not in the IEC 60127-2 rated-current series (secondary source)")
    bc = (m.group(4) or "").upper()
    if bc:
        name, amps, rule = BREAKING_CAPACITY[bc]
        values["breaking_capacity_letter"] = bc
        values["breaking_capacity_rule"] = rule
        values["breaking_capacity"] = max(35.0, 10.0 * rated) if amps is None else amps
        parts.append(f"{bc} = {name} breaking capacity, {rule} -> "
                     f"{format_quantity(values['breaking_capacity'], 'A')} "  # type: ignore[arg-type]
                     "(IEC 60127-2, secondary source)")
    if m.group(5) is not None:
        try:
            volts = parse_quantity(f"{m.group(5)} {m.group(6).lower()}V", "V")
        except UnitError:
            return []
        mark = (m.group(7) or "").lower()
        if mark in ("dc", "-"):
            values["voltage_dc_fuse"] = volts
            parts.append(f"rated voltage {format_quantity(volts, 'V')} DC")
        else:
            values["voltage"] = volts
            parts.append(f"rated voltage {format_quantity(volts, 'V')}")
        if bc == "H" and not math.isclose(volts, 250.0):
            parts.append("the H figure of 1500 A is stated at 250 V")
    parts.append("IEC 60127 marking order: characteristic, rated current, breaking capacity, "
                 "voltage (IEC 60127-1/-2, secondary source)")
    return [Reading("fuse", values, "; ".join(parts), s)]


def _read_fuse_letter(s: str) -> list[Reading]:
    if s not in FUSE_CHARACTERISTICS:
        return []
    return [Reading("fuse", {"characteristic": s, "fuse_standard": "IEC 60127"},
                    f"{s} = {FUSE_CHARACTERISTICS[s]} (IEC 60127-1 characteristic letter)", s)]


# --------------------------------------------------------------------------- decode

_READERS = (_read_fuse, _read_voltage, _read_quantity, _read_code, _read_rkm, _read_tolerance,
            _read_fuse_letter, _read_number)

_SPACES = re.compile(r"\s+")


def _variants(s: str) -> list[tuple[str, str]]:
    """Spellings to read: the decimal comma; a comma before three digits is ambiguous."""
    if "," not in s:
        return [(s, "")]
    if re.search(r"[0-9],[0-9]{3}(?![0-9])", s):
        return [(re.sub(r"(?<=[0-9]),(?=[0-9])", ".", s),
                 "comma read as a decimal point: ambiguous with a thousands separator"),
                (re.sub(r"(?<=[0-9]),(?=[0-9]{3}(?![0-9]))", "", s),
                 "comma read as a thousands separator: ambiguous with a decimal comma")]
    return [(re.sub(r"(?<=[0-9]),(?=[0-9])", ".", s), "comma read as a decimal point")]


def _normalise(text: str) -> str:
    s = _SPACES.sub(" ", text).strip()
    return s.replace("μ", "µ").replace("Ω", "Ω")


def decode(text: str) -> list[Reading]:
    """Every reading of one printed marking.

    Args:
        text: one marking as printed or typed ("105J", "2n2", "4K7", "2100VAC",
            "T3.15AL250V", "0.95uF"); spaces inside it are allowed ("FF1A E 125V").

    Returns:
        The readings, most specific first. More than one reading means the marking is
        ambiguous; each reading's note then says so.

    Raises:
        InputError: the text is empty, too long, or reads as nothing known; the one-line
            message names the text.
    """
    if not isinstance(text, str):
        raise InputError(f"cannot read marking {text!r}: not text", value=text)
    s = _normalise(text)
    if not s:
        raise InputError("cannot read an empty marking", value=text)
    if len(s) > MAX_MARKING:
        raise InputError(f"cannot read marking {_quote(s)}: longer than {MAX_MARKING} "
                         "characters", value=text)
    readings: list[Reading] = []
    for spelling, how in _variants(s):
        for reader in _READERS:
            for r in reader(spelling):
                note = f"{r.note}; {how}" if how else r.note
                readings.append(Reading(r.kind, r.values, note, s))
    if not readings:
        raise InputError(f"cannot read marking {_quote(s)}: not an IEC 60062 capacitor code, "
                         "tolerance letter or RKM code, a rating with a unit, or an IEC 60127 "
                         "fuse marking", value=text)
    if len(readings) > 1:
        n = len(readings)
        readings = [Reading(r.kind, r.values, f"{r.note} [ambiguous: one of {n} readings]",
                            r.text) for r in readings]
    return readings


# --------------------------------------------------------------------------- free-text queries

_TOKEN = re.compile(r"(?:[^\s;,]|(?<=[0-9]),(?=[0-9]))+")  # a comma between digits is a decimal

#: Reading values that become query ratings as they are.
_RATING_KEYS = (
    "capacitance", "resistance", "voltage", "voltage_ac", "voltage_dc", "voltage_dc_fuse",
    "current", "rated_current", "characteristic", "breaking_capacity",
    "breaking_capacity_letter", "fuse_standard", "tolerance_minus", "tolerance_plus",
    "tolerance_abs", "time", "frequency", "power", "inductance", "energy",
)


def decode_query(text: str) -> QueryReading:
    """Split a free-text query into pieces and decode each into rating filters.

    Pieces are whitespace-separated words; up to :data:`MAX_SPAN` neighbouring words are joined
    when together they form one marking ("12 kV", "T 2A 250V", "105 J"), longest first. Words
    naming a kind of part ("diode", "fuse", ...) set ``kind_hint``; anything unread is returned
    in ``unread`` for a text search. The first reading of each piece goes into ``ratings``; an
    ambiguous piece adds a note naming its other readings (all are in ``pieces``).

    Args:
        text: e.g. "0.95uF 2100VAC 3%", "12 kV 350 mA diode", "T 2A 250V", "105J".

    Raises:
        InputError: only when ``text`` is not a string.
    """
    if not isinstance(text, str):
        raise InputError(f"cannot read query {text!r}: not text", value=text)
    tokens = _TOKEN.findall(text)
    ratings: dict[str, float | str] = {}
    pieces: list[tuple[str, tuple[Reading, ...]]] = []
    unread: list[str] = []
    notes: list[str] = []
    i = 0
    while i < len(tokens):
        word = tokens[i].lower()
        if word in KIND_WORDS:
            _merge(ratings, {"kind_hint": KIND_WORDS[word]}, tokens[i], notes)
            i += 1
            continue
        for span in range(min(MAX_SPAN, len(tokens) - i), 0, -1):
            if span > 1 and any(t.lower() in KIND_WORDS for t in tokens[i:i + span]):
                continue
            piece = " ".join(tokens[i:i + span])
            try:
                readings = decode(piece)
            except InputError:
                continue
            if span > 1 and all(r.kind == "number" for r in readings):
                continue
            pieces.append((piece, tuple(readings)))
            _take(piece, readings, tokens[i:i + span], ratings, unread, notes)
            i += span
            break
        else:
            unread.append(tokens[i])
            i += 1
    if "tolerance_minus" in ratings and ratings.get("tolerance_minus") == ratings.get(
            "tolerance_plus"):
        ratings["tolerance"] = ratings["tolerance_minus"]
    return QueryReading(text, ratings, tuple(pieces), tuple(unread), tuple(notes))


def _take(piece: str, readings: list[Reading], words: list[str],
          ratings: dict[str, float | str], unread: list[str], notes: list[str]) -> None:
    """Merge a decoded piece into the query's ratings, noting what was chosen."""
    useful = [r for r in readings if r.kind != "number"]
    if not useful:
        unread.append(piece)  # a bare number: part numbers, quantities, left for text search
        return
    first = useful[0]
    values = {k: v for k, v in first.values.items() if k in _RATING_KEYS}
    if first.kind == "fuse":
        values.setdefault("kind_hint", "fuse")
        if len(words) > 1 and words[0].upper() in TOLERANCE_LETTERS:
            note = (f"{piece!r} read as an IEC 60127 fuse marking because a current follows "
                    f"the letter; {words[0]!r} alone could also be an IEC 60062 tolerance letter")
            notes.append(note)
    _merge(ratings, values, piece, notes)
    others = [r for r in readings if r is not first]
    if others:
        alt = "; or ".join(_short(r) for r in others)
        notes.append(f"{piece!r} is ambiguous: read as {_short(first)}; could also be {alt}")


def _merge(ratings: dict[str, float | str], values: dict[str, float | str], piece: str,
           notes: list[str]) -> None:
    for key, value in values.items():
        if key in ratings and ratings[key] != value:
            if key == "fuse_standard":
                continue
            notes.append(f"conflicting {key}: kept {ratings[key]!r}, ignored {value!r} from "
                         f"{piece!r}")
            continue
        ratings[key] = value


def decode_text(text: str) -> tuple[list[Reading], tuple[str, ...]]:
    """Read text that is one marking or several: ``(readings, words left unread)``.

    The whole text is first read as one marking (:func:`decode`); failing that it is read word
    by word as a query (:func:`decode_query`) and the readings of every piece are returned in
    order, with the words that read as nothing (or only as a bare number).

    Raises:
        InputError: nothing in the text can be read (the message names the text).
    """
    try:
        return decode(text), ()
    except InputError as exc:
        whole = exc
    query = decode_query(text)
    readings = [r for _piece, rs in query.pieces if any(x.kind != "number" for x in rs)
                for r in rs]
    if not readings:
        if isinstance(text, str) and len(text.split()) > 1:
            raise InputError(f"cannot read {_quote(_normalise(text))}: no marking, code or "
                             "rating found in it", value=text) from None
        raise whole
    return readings, query.unread


# --------------------------------------------------------------------------- formatting

_DISPLAY_UNITS = {
    "capacitance": "F", "resistance": "ohm", "voltage": "V", "voltage_ac": "V",
    "voltage_dc": "V", "voltage_dc_fuse": "V", "current": "A", "rated_current": "A",
    "breaking_capacity": "A", "tolerance_abs": "F", "time": "s", "frequency": "Hz",
    "power": "W", "inductance": "H", "energy": "J",
}


def describe_values(values: dict[str, float | str]) -> str:
    """The values of a reading in engineering units, e.g. ``capacitance 1 µF, tolerance ±5 %``."""
    parts: list[str] = []
    minus, plus = values.get("tolerance_minus"), values.get("tolerance_plus")
    for key, value in values.items():
        if key in ("tolerance_minus", "tolerance_plus", "tolerance_letter",
                   "breaking_capacity_rule"):
            continue
        if key in _DISPLAY_UNITS and isinstance(value, float):
            label = {"voltage_ac": "voltage AC", "voltage_dc": "voltage DC",
                     "voltage_dc_fuse": "voltage DC", "tolerance_abs": "tolerance ±",
                     "rated_current": "rated current", "breaking_capacity":
                     "breaking capacity"}.get(key, key)
            parts.append(f"{label} {format_quantity(value, _DISPLAY_UNITS[key])}")
        elif key == "number" and isinstance(value, float):
            parts.append(f"number {value:g}")
        else:
            parts.append(f"{key.replace('_', ' ')} {value}")
    if isinstance(minus, float) and isinstance(plus, float):
        parts.append(f"tolerance {_pct_text(minus, plus)}")
    return ", ".join(parts).replace("tolerance ± ", "tolerance ±")


def _short(r: Reading) -> str:
    return describe_values(r.values) or r.kind


# --------------------------------------------------------------------------- encoding


def capacitor_code(farads: float) -> str:
    """The IEC 60062 three-digit code of a capacitance with two significant digits.

    ``capacitor_code(1e-6) -> "105"``; ``capacitor_code(4.7e-12) -> "479"``. Values from
    0.10 pF to 99 x 10^7 pF; the value is rounded to two significant digits.

    Raises:
        InputError: a value outside that range or not a finite positive number.
    """
    if not (isinstance(farads, (int, float)) and math.isfinite(farads) and farads > 0):
        raise InputError(f"cannot code capacitance {farads!r}: not a positive number",
                         value=farads)
    pf = farads * 1e12
    exp = math.floor(math.log10(pf)) - 1
    sig = round(pf / 10.0 ** exp)
    if sig >= 100:
        sig //= 10
        exp += 1
    if exp in (-2, -1):
        return f"{sig:02d}{9 if exp == -1 else 8}"
    if 0 <= exp <= 7:
        return f"{sig:02d}{exp}"
    raise InputError(f"cannot code capacitance {format_quantity(float(farads), 'F')}: outside "
                     "the three-digit code's range", value=farads)


def rkm_code(value: float, unit: Literal["F", "ohm"]) -> str:
    """The IEC 60062 RKM code of a capacitance or resistance (e.g. 4.7e3 ohm -> ``4K7``).

    Up to three significant digits; the letter takes the place of the decimal point.

    Raises:
        InputError: a value that is not a finite positive number, or out of the letters' range.
    """
    if not (isinstance(value, (int, float)) and math.isfinite(value) and value > 0):
        raise InputError(f"cannot code {value!r}: not a positive number", value=value)
    if unit == "F":
        letters = [(-12, "p"), (-9, "n"), (-6, "u")]
    else:
        letters = [(0, "R"), (3, "K"), (6, "M"), (9, "G"), (12, "T")]
    chosen = 0
    for i, (exp, _letter) in enumerate(letters):
        if value >= 10.0 ** exp * (1 - 1e-12):
            chosen = i
    mant = float(f"{value / 10.0 ** letters[chosen][0]:.3g}")  # three significant digits
    if mant >= 1000 and chosen + 1 < len(letters):
        chosen += 1
        mant = float(f"{value / 10.0 ** letters[chosen][0]:.3g}")
    if mant >= 1000 or mant < 1e-3:
        raise InputError(f"cannot code {value!r} as an RKM code", value=value)
    text = f"{mant:.6f}".rstrip("0").rstrip(".")
    whole, _, frac = text.partition(".")
    if whole == "0":
        whole = ""
    return f"{whole}{letters[chosen][1]}{frac}"
