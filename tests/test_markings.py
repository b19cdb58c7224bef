"""Marking decoder: IEC 60062 codes and letters, RKM codes, rated-voltage text, IEC 60127 fuses.

Every check value names its source beside it (see ../shared/REFERENCES.md for how sure we are of
each): IEC 60062 rows marked C are confirmed; the 8/9 multiplier digits, the absolute letters
below 10 pF and the asymmetric letters are from memory; IEC 60127-2 rows are seen only in a
secondary source; the AC/DC voltage markers are common practice, no source.
"""

from __future__ import annotations

import json
import math
import subprocess
import sys

import pytest
from hypothesis import HealthCheck, given, settings
from hypothesis import strategies as st

from partsmatch.cli.main import run
from partsmatch.errors import InputError
from partsmatch.markings import (
    Reading,
    capacitor_code,
    decode,
    decode_query,
    decode_text,
    rkm_code,
)

PF = 1e-12


def _one(text: str) -> Reading:
    readings = decode(text)
    assert len(readings) == 1, [r.note for r in readings]
    return readings[0]


def _close(a: float, b: float) -> bool:
    return math.isclose(a, b, rel_tol=1e-9, abs_tol=0.0)


# ----------------------------------------------------------------- IEC 60062 three-digit code

@pytest.mark.parametrize(
    ("code", "farads"),
    [
        ("103", 10e-9),    # IEC 60062 three-digit code: 103 = 10 nF (REFERENCES.md, C)
        ("104", 100e-9),   # IEC 60062: 104 = 100 nF (C)
        ("105", 1e-6),     # IEC 60062: 105 = 1 uF (C)
        ("472", 4.7e-9),   # IEC 60062 rule: 47 x 10^2 pF = 4.7 nF (C)
        ("221", 220 * PF),  # IEC 60062 rule: 22 x 10^1 pF (C)
        ("100", 10 * PF),  # IEC 60062 rule: 10 x 10^0 pF (C)
        ("684", 0.68e-6),  # IEC 60062 rule: 68 x 10^4 pF = 680 nF (C)
        ("479", 4.7 * PF),  # IEC 60062 multiplier digit 9 = x0.1 (from memory)
        ("109", 1.0 * PF),  # IEC 60062 multiplier digit 9 = x0.1 (from memory)
        ("228", 0.22 * PF),  # IEC 60062 multiplier digit 8 = x0.01 (from memory)
    ],
)
def test_three_digit_code(code: str, farads: float) -> None:
    caps = [r for r in decode(code) if r.kind == "capacitance"]
    assert len(caps) == 1
    assert _close(caps[0].values["capacitance"], farads)
    assert "IEC 60062" in caps[0].note


def test_bare_code_is_also_a_plain_number() -> None:
    # "105" alone could be the IEC 60062 code (1 uF) or a plain number: both, never a guess
    readings = decode("105")
    assert {r.kind for r in readings} == {"capacitance", "number"}
    assert all("ambiguous" in r.note for r in readings)
    assert [r.values.get("number") for r in readings if r.kind == "number"] == [105.0]


# ----------------------------------------------------------------- IEC 60062 tolerance letters

@pytest.mark.parametrize(
    ("letter", "minus", "plus"),
    [
        ("F", 1.0, 1.0),     # IEC 60062 tolerance letter F = ±1 % (C)
        ("G", 2.0, 2.0),     # IEC 60062 G = ±2 % (C)
        ("H", 3.0, 3.0),     # IEC 60062 H = ±3 %, the agreed reading (C; 2.5 % conflicts)
        ("J", 5.0, 5.0),     # IEC 60062 J = ±5 % (C)
        ("K", 10.0, 10.0),   # IEC 60062 K = ±10 % (C)
        ("M", 20.0, 20.0),   # IEC 60062 M = ±20 % (C)
        ("Z", 20.0, 80.0),   # IEC 60062 Z = +80/-20 % (C)
        ("P", 0.0, 100.0),   # IEC 60062 P = +100/-0 % (C)
        ("Q", 10.0, 30.0),   # IEC 60062 Q = -10/+30 % (from memory)
        ("T", 10.0, 50.0),   # IEC 60062 T = -10/+50 % (from memory)
        ("S", 20.0, 50.0),   # IEC 60062 S = -20/+50 % (from memory)
    ],
)
def test_tolerance_letter_after_code(letter: str, minus: float, plus: float) -> None:
    readings = [r for r in decode(f"105{letter}") if r.kind == "capacitance"]
    assert len(readings) == 1
    values = readings[0].values
    assert _close(values["capacitance"], 1e-6)  # IEC 60062: 105 = 1 uF (C)
    assert values["tolerance_minus"] == minus
    assert values["tolerance_plus"] == plus
    assert values["tolerance_letter"] == letter


@pytest.mark.parametrize(
    ("code", "farads", "abs_pf"),
    [
        ("109B", 1.0 * PF, 0.1),    # IEC 60062 below 10 pF: B = ±0.1 pF (from memory)
        ("479C", 4.7 * PF, 0.25),   # IEC 60062 below 10 pF: C = ±0.25 pF (from memory)
        ("339D", 3.3 * PF, 0.5),    # IEC 60062 below 10 pF: D = ±0.5 pF (from memory)
        ("689F", 6.8 * PF, 1.0),    # IEC 60062 below 10 pF: F = ±1 pF (from memory)
        ("829G", 8.2 * PF, 2.0),    # IEC 60062 below 10 pF: G = ±2 pF (from memory)
    ],
)
def test_absolute_letters_below_10_pf(code: str, farads: float, abs_pf: float) -> None:
    # (829G also reads as the RKM code 829 Gohm: only the capacitance reading is checked here)
    caps = [r for r in decode(code) if r.kind == "capacitance"]
    assert len(caps) == 1
    r = caps[0]
    assert _close(r.values["capacitance"], farads)
    assert _close(r.values["tolerance_abs"], abs_pf * PF)
    # the same tolerance as a percentage of the nominal value (arithmetic)
    assert math.isclose(r.values["tolerance_plus"], 100 * abs_pf / (farads / PF), rel_tol=1e-6)


def test_letter_f_at_10_pf_and_above_is_a_percentage() -> None:
    # IEC 60062: at 10 pF and above F = ±1 % (C), not ±1 pF
    r = _one("100F")
    assert r.values["tolerance_minus"] == 1.0 and "tolerance_abs" not in r.values


def test_letter_n_is_ambiguous_and_returns_both() -> None:
    # REFERENCES.md: letter N has conflicting readings (30 % / 0.05 %): return both
    readings = [r for r in decode("105N") if r.kind == "capacitance" and "tolerance_letter" in
                r.values]
    assert sorted(r.values["tolerance_plus"] for r in readings) == [0.05, 30.0]
    assert all("ambiguous" in r.note for r in readings)


def test_letter_h_notes_its_conflicting_reading() -> None:
    # REFERENCES.md: H = 3 % is agreed; a 2.5 % reading conflicts and must be noted
    r = _one("105H")
    assert r.values["tolerance_plus"] == 3.0
    assert "2.5" in r.note


@pytest.mark.parametrize(
    ("text", "minus", "plus"),
    [
        ("3%", 3.0, 3.0),          # a percentage as written (arithmetic)
        ("±5 %", 5.0, 5.0),
        ("+80/-20%", 20.0, 80.0),
        ("-20/+50%", 20.0, 50.0),
        ("J", 5.0, 5.0),           # IEC 60062 J = ±5 % (C)
    ],
)
def test_tolerance_text(text: str, minus: float, plus: float) -> None:
    r = _one(text)
    assert r.kind == "tolerance"
    assert (r.values["tolerance_minus"], r.values["tolerance_plus"]) == (minus, plus)


# ----------------------------------------------------------------- IEC 60062 RKM codes

@pytest.mark.parametrize(
    ("code", "kind", "value"),
    [
        ("p68", "capacitance", 0.68 * PF),  # IEC 60062 RKM: p68 = 0.68 pF (C)
        ("2n2", "capacitance", 2.2e-9),     # IEC 60062 RKM: 2n2 = 2.2 nF (C)
        ("4n7", "capacitance", 4.7e-9),     # IEC 60062 RKM: 4n7 = 4.7 nF (C)
        ("u47", "capacitance", 0.47e-6),    # IEC 60062 RKM: u47 = 0.47 uF (C)
        ("4u7", "capacitance", 4.7e-6),     # IEC 60062 RKM: 4u7 = 4.7 uF (C)
        ("4µ7", "capacitance", 4.7e-6),     # IEC 60062 RKM with the micro sign (C)
        ("R47", "resistance", 0.47),        # IEC 60062 RKM: R47 = 0.47 ohm (C)
        ("4R7", "resistance", 4.7),         # IEC 60062 RKM: 4R7 = 4.7 ohm (C)
        ("470R", "resistance", 470.0),      # IEC 60062 RKM: 470R = 470 ohm (C)
        ("2k2", "resistance", 2.2e3),       # IEC 60062 RKM: 2k2 = 2.2 kohm (C)
        ("4K7", "resistance", 4.7e3),       # IEC 60062 RKM: 4K7 = 4.7 kohm (C)
        ("47K3", "resistance", 47.3e3),     # IEC 60062 RKM: 47K3 = 47.3 kohm (C)
        ("10M", "resistance", 10e6),        # IEC 60062 RKM: 10M = 10 Mohm (C)
        ("4M7", "resistance", 4.7e6),       # IEC 60062 RKM: 4M7 = 4.7 Mohm (C)
    ],
)
def test_rkm_codes(code: str, kind: str, value: float) -> None:
    r = _one(code)
    assert r.kind == kind
    assert _close(r.values[kind], value)
    assert "IEC 60062 RKM" in r.note


def test_rkm_with_tolerance_letter() -> None:
    # IEC 60062: the tolerance letter follows the RKM code; K after 4K7 ... J = ±5 % (C)
    r = _one("4K7J")
    assert _close(r.values["resistance"], 4.7e3) and r.values["tolerance_plus"] == 5.0


def test_lower_case_m_is_ambiguous() -> None:
    # m (milli) and M (mega) differ only in case; typed text loses case: every reading returned
    values = sorted(r.values.get("resistance", 0.0) for r in decode("4m7"))
    assert any(_close(v, 4.7e-3) for v in values) and any(_close(v, 4.7e6) for v in values)
    assert len(decode("4m7")) > 1


def test_code_followed_by_k_may_be_rkm() -> None:
    # 104K: IEC 60062 code 100 nF with K = ±10 %, or RKM 104 kohm: both returned (C, C)
    readings = decode("104K")
    kinds = {r.kind: r for r in readings}
    assert _close(kinds["capacitance"].values["capacitance"], 100e-9)
    assert _close(kinds["resistance"].values["resistance"], 104e3)


# ----------------------------------------------------------------- rated-voltage text

@pytest.mark.parametrize(
    ("text", "key", "volts"),
    [
        ("2100VAC", "voltage_ac", 2100.0),    # VAC marker: common practice, no source
        ("2.1 kV AC", "voltage_ac", 2100.0),  # kilo = 10^3 (BIPM SI Brochure); AC: common practice
        ("2100 V AC", "voltage_ac", 2100.0),  # common practice, no source
        ("250V~", "voltage_ac", 250.0),       # ~ for AC: common practice, no source
        ("12KV", "voltage", 12000.0),         # K for kilo: common practice, no source
        ("12 kV", "voltage", 12000.0),        # no AC/DC marker: common practice, no source
        ("630V-", "voltage_dc", 630.0),       # - for DC: common practice, no source
        ("630 VDC", "voltage_dc", 630.0),     # VDC: common practice, no source
        ("5kV DC", "voltage_dc", 5000.0),     # common practice, no source
        ("400WV", "voltage_dc", 400.0),       # WV working voltage is DC: common practice, no source
    ],
)
def test_rated_voltage(text: str, key: str, volts: float) -> None:
    r = _one(text)
    assert r.kind == "voltage"
    assert r.values == {key: volts}
    assert "common practice, no source" in r.note


# ----------------------------------------------------------------- plain quantities

@pytest.mark.parametrize(
    ("text", "kind", "value"),
    [
        ("0.95uF", "capacitance", 0.95e-6),   # micro = 10^-6 (BIPM SI Brochure table 7)
        ("0.95 µF", "capacitance", 0.95e-6),  # BIPM SI Brochure: µ
        ("950nF", "capacitance", 950e-9),     # nano = 10^-9 (BIPM SI Brochure)
        ("350 mA", "current", 0.35),          # milli = 10^-3 (BIPM SI Brochure)
        ("100 ns", "time", 100e-9),           # BIPM SI Brochure
        ("10 MΩ", "resistance", 10e6),        # mega = 10^6 (BIPM SI Brochure)
        ("0.95 MFD", "capacitance", 0.95e-6),  # old MFD = microfarad: common practice, no source
    ],
)
def test_plain_quantities(text: str, kind: str, value: float) -> None:
    r = _one(text)
    assert r.kind == kind and _close(r.values[kind], value)


def test_thousands_comma_is_ambiguous() -> None:
    # "2,100" is 2.1 with a decimal comma or 2100 with a thousands separator: both returned
    volts = sorted(r.values["voltage_ac"] for r in decode("2,100VAC"))
    assert volts == [2.1, 2100.0]


# ----------------------------------------------------------------- IEC 60127 fuse markings

@pytest.mark.parametrize(
    ("letter", "name"),
    [
        ("FF", "very quick-acting"),  # IEC 60127-1 characteristic letters (C)
        ("F", "quick-acting"),        # IEC 60127-1 (C)
        ("M", "medium time-lag"),     # IEC 60127-1 (C)
        ("T", "time-lag"),            # IEC 60127-1 (C)
        ("TT", "long time-lag"),      # IEC 60127-1 (C)
    ],
)
def test_fuse_characteristic_letters(letter: str, name: str) -> None:
    r = _one(f"{letter}1A")
    assert r.kind == "fuse"
    assert r.values["characteristic"] == letter
    assert r.values["rated_current"] == 1.0
    assert name in r.note and "IEC 60127-1" in r.note


@pytest.mark.parametrize(
    ("marking", "char", "amps", "letter", "breaking", "volts"),
    [
        # IEC 60127-1/-2 marking order: characteristic, current, breaking capacity, voltage
        # (secondary source); L = 35 A or 10 x In, the greater (IEC 60127-2, secondary source)
        ("T3.15AL250V", "T", 3.15, "L", 35.0, 250.0),
        ("T2AL250V", "T", 2.0, "L", 35.0, 250.0),
        ("T5AL250V", "T", 5.0, "L", 50.0, 250.0),     # 10 x 5 A = 50 A > 35 A (IEC 60127-2, secondary source)
        ("F500mAH250V", "F", 0.5, "H", 1500.0, 250.0),  # H = 1500 A at 250 V (IEC 60127-2, secondary source)
        ("FF1A E 125V", "FF", 1.0, "E", 150.0, 125.0),  # E = 150 A (IEC 60127-2, secondary source)
        ("T 3,15 A L 250 V", "T", 3.15, "L", 35.0, 250.0),  # decimal comma and spaces
        ("TT800mAL250V", "TT", 0.8, "L", 35.0, 250.0),
        ("T1.6AL/250V", "T", 1.6, "L", 35.0, 250.0),   # a slash before the voltage
    ],
)
def test_fuse_markings(marking: str, char: str, amps: float, letter: str, breaking: float,
                       volts: float) -> None:
    r = _one(marking)
    assert r.kind == "fuse"
    v = r.values
    assert v["characteristic"] == char
    assert _close(v["rated_current"], amps)
    assert v["breaking_capacity_letter"] == letter
    assert v["breaking_capacity"] == breaking
    assert v["voltage"] == volts
    assert v["fuse_standard"] == "IEC 60127"
    assert "secondary source" in r.note


def test_fuse_l_carries_its_rule() -> None:
    # IEC 60127-2 (secondary source): L is "35 A or 10 x In, the greater"
    assert _one("T2AL250V").values["breaking_capacity_rule"] == "35 A or 10 x In, the greater"


def test_fuse_current_outside_r10_series_is_noted() -> None:
    # IEC 60127-2 rated-current series (R10, secondary source): 3 A is not in it, 3.15 A is
    assert "not in the IEC 60127-2 rated-current series" in _one("T3AL250V").note
    assert "not in the" not in _one("T3.15AL250V").note


def test_lone_letter_t_is_both_fuse_and_tolerance() -> None:
    # T: IEC 60127-1 time-lag (C) or IEC 60062 asymmetric tolerance (from memory)
    assert {r.kind for r in decode("T")} == {"fuse", "tolerance"}


# ----------------------------------------------------------------- unreadable text

@pytest.mark.parametrize("text", ["zzz", "", "   ", "105X", "x" * 200, "V", "1.2.3V", "\n\n"])
def test_unreadable_text_is_one_line_input_error(text: str) -> None:
    with pytest.raises(InputError) as info:
        decode(text)
    message = str(info.value)
    assert len(message.splitlines()) == 1
    if text.strip():
        assert text.strip()[:10] in message  # the message names the text


# ----------------------------------------------------------------- free-text queries

def test_query_capacitor_spec() -> None:
    q = decode_query("0.95uF 2100VAC 3%")
    assert _close(q.ratings["capacitance"], 0.95e-6)  # BIPM SI Brochure: micro
    assert q.ratings["voltage_ac"] == 2100.0          # VAC: common practice, no source
    assert q.ratings["tolerance"] == 3.0
    assert q.unread == () and q.notes == ()


def test_query_diode_spec() -> None:
    q = decode_query("12 kV 350 mA diode")
    assert q.ratings["voltage"] == 12000.0 and _close(q.ratings["current"], 0.35)
    assert q.kind_hint == "diode"


def test_query_fuse_words_join_into_one_marking() -> None:
    # IEC 60127 marking order (secondary source): characteristic, current, voltage
    q = decode_query("T 2A 250V")
    assert q.ratings["characteristic"] == "T" and q.ratings["rated_current"] == 2.0
    assert q.ratings["voltage"] == 250.0 and q.kind_hint == "fuse"
    assert any("tolerance letter" in n for n in q.notes)  # T alone could be IEC 60062 T


def test_query_code_with_letter() -> None:
    q = decode_query("105J")  # IEC 60062: 1 uF, J = ±5 % (C)
    assert _close(q.ratings["capacitance"], 1e-6) and q.ratings["tolerance"] == 5.0


def test_query_ambiguous_piece_is_noted_with_all_readings() -> None:
    q = decode_query("105 bleeder 10M")
    assert _close(q.ratings["capacitance"], 1e-6)  # IEC 60062 code (C)
    assert _close(q.ratings["resistance"], 10e6)   # IEC 60062 RKM (C)
    assert q.kind_hint == "resistor"
    assert any("'105' is ambiguous" in n for n in q.notes)
    assert [len(rs) for text, rs in q.pieces if text == "105"] == [2]


def test_query_leaves_part_numbers_for_text_search() -> None:
    q = decode_query("XR-2211 4007 2n2")
    assert q.unread == ("XR-2211", "4007")
    assert _close(q.ratings["capacitance"], 2.2e-9)


def test_query_conflict_is_noted() -> None:
    q = decode_query("1uF 2uF")
    assert _close(q.ratings["capacitance"], 1e-6)
    assert any("conflicting capacitance" in n for n in q.notes)


def test_decode_text_falls_back_to_words() -> None:
    readings, unread = decode_text("0.95uF 2100VAC oven")
    assert [r.kind for r in readings] == ["capacitance", "voltage"] and unread == ("oven",)
    with pytest.raises(InputError):
        decode_text("no marking here")


# ----------------------------------------------------------------- properties

_MARKING_ALPHABET = st.sampled_from(list("0123456789.,%±+-/~= kKmMuµnpPRrFVACDTLEHJGZQSNW"
                                         "Ωohmsz\n\t\u2028\x85"))
_TEXTS = st.one_of(st.text(), st.text(_MARKING_ALPHABET, max_size=16))
_PROPS = settings(max_examples=300, derandomize=True, deadline=None,
                  suppress_health_check=[HealthCheck.too_slow])


@_PROPS
@given(_TEXTS)
def test_decode_never_raises_anything_but_input_error(text: str) -> None:
    try:
        readings = decode(text)
    except InputError as exc:
        assert len(str(exc).splitlines()) == 1
        return
    assert readings and all(isinstance(r, Reading) and r.note for r in readings)
    for r in readings:
        json.dumps(r.as_dict())  # every reading is JSON-ready
        assert all(math.isfinite(v) for v in r.values.values() if isinstance(v, float))


@_PROPS
@given(_TEXTS)
def test_decode_query_never_raises(text: str) -> None:
    q = decode_query(text)
    assert all(w in text for w in q.unread)
    json.dumps(q.as_dict())
    try:
        decode_text(text)
    except InputError as exc:
        assert len(str(exc).splitlines()) == 1


# IEC 60062 multiplier of the third digit, written here from the standard's table
# (0-6 powers of ten, C; 8 = x0.01 and 9 = x0.1, from memory; 7 = 10^7 read as a power of ten)
_MULTIPLIER_PF = {0: 1, 1: 10, 2: 100, 3: 1e3, 4: 1e4, 5: 1e5, 6: 1e6, 7: 1e7, 8: 0.01, 9: 0.1}


@_PROPS
@given(st.integers(10, 99), st.sampled_from(sorted(_MULTIPLIER_PF)))
def test_three_digit_code_round_trip(significant: int, digit: int) -> None:
    code = f"{significant}{digit}"
    farads = significant * _MULTIPLIER_PF[digit] * PF
    caps = [r for r in decode(code) if r.kind == "capacitance"]
    assert len(caps) == 1 and math.isclose(caps[0].values["capacitance"], farads, rel_tol=1e-9)
    assert capacitor_code(farads) == code


@_PROPS
@given(st.integers(100, 999), st.integers(0, 8), st.sampled_from(["F", "ohm"]))
def test_rkm_round_trip(digits: int, decade: int, unit: str) -> None:
    # three significant digits from 1 pF to 999 uF, or from 0.1 ohm to 99.9 Mohm
    value = float(f"{digits}e{decade - 14 if unit == 'F' else decade - 3}")
    code = rkm_code(value, unit)  # type: ignore[arg-type]
    kind = "capacitance" if unit == "F" else "resistance"
    readings = [r for r in decode(code) if r.kind == kind and kind in r.values]
    assert any(math.isclose(r.values[kind], value, rel_tol=1e-9) for r in readings), code


# ----------------------------------------------------------------- light import

def test_decoding_does_not_import_pint() -> None:
    # the decoder is used on every query; it must stay on the units fast path (no pint import)
    code = ("import sys, partsmatch.markings as m\n"
            "for t in ['105J', '0.95uF', '350 mA', '2.1 kV AC', 'T3.15AL250V', '4K7', '2n2',"
            " '10 MΩ', '100 ns', '12KV']: m.decode(t)\n"
            "m.decode_query('12 kV 350 mA diode 0.95 uF')\n"
            "print(sorted(x for x in ('pint', 'numpy', 'typer') if x in sys.modules))")
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True,
                         check=True)
    assert out.stdout.strip() == "[]"


# ----------------------------------------------------------------- CLI

def test_cli_decode_table(capsys: pytest.CaptureFixture[str]) -> None:
    assert run(["decode", "105J"]) == 0
    out = capsys.readouterr().out
    assert "1 µF" in out and "±5 %" in out and "IEC 60062" in out


def test_cli_decode_fuse_words(capsys: pytest.CaptureFixture[str]) -> None:
    assert run(["decode", "T3.15AL250V"]) == 0
    out = capsys.readouterr().out
    assert "3.15 A" in out and "250 V" in out and "time-lag" in out


def test_cli_decode_json(capsys: pytest.CaptureFixture[str]) -> None:
    assert run(["decode", "105", "--json"]) == 0
    data = json.loads(capsys.readouterr().out)
    assert {d["kind"] for d in data} == {"capacitance", "number"}
    cap = next(d for d in data if d["kind"] == "capacitance")
    assert math.isclose(cap["values"]["capacitance"], 1e-6)  # IEC 60062: 105 = 1 uF (C)
    assert all(d["note"] for d in data)


def test_cli_decode_several_words(capsys: pytest.CaptureFixture[str]) -> None:
    assert run(["decode", "0.95uF", "2100VAC", "oven", "--json"]) == 0
    captured = capsys.readouterr()
    data = json.loads(captured.out)
    assert [d["kind"] for d in data] == ["capacitance", "voltage"]
    assert "not read: oven" in captured.err


def test_cli_decode_unreadable_exits_2(capsys: pytest.CaptureFixture[str]) -> None:
    assert run(["decode", "zzz"]) == 2
    err = capsys.readouterr().err
    assert "zzz" in err and len(err.strip().splitlines()) == 1
