"""Unit parsing and formatting.

Check values: SI prefixes and unit symbols from the BIPM SI Brochure, 9th edition (2019):
table 7 (prefixes p 1e-12, n 1e-9, µ 1e-6, m 1e-3, k 1e3, M 1e6, G 1e9) and tables 2/4 (V, A, F,
Ω, H, Hz, s, W, J). "u" for micro and "K" for kilo are common practice, no source.
"""

from __future__ import annotations

import math

import pytest
from hypothesis import given, settings
from hypothesis import strategies as st

from partsmatch.errors import PartsmatchError, UnitError
from partsmatch.units import ac_dc, format_quantity, parse_quantity


@pytest.mark.parametrize("text,unit,expected", [
    ("2100 VAC", "V", 2100.0),          # V: volt (BIPM table 4)
    ("12kV", "V", 12e3),                # k = 1e3 (BIPM table 7)
    ("12 KV", "V", 12e3),               # K for kilo: common practice, no source
    ("0.95uF", "F", 0.95e-6),           # u for µ: common practice, no source
    ("0.95 µF", "F", 0.95e-6),          # µ = 1e-6 (BIPM table 7)
    ("950 nF", "F", 950e-9),            # n = 1e-9 (BIPM table 7)
    ("2n2", "F", None),                 # RKM code is a marking, not a unit text (markings.py)
    ("350 mA", "A", 0.35),              # m = 1e-3 (BIPM table 7)
    ("100 ns", "s", 100e-9),            # s: second (BIPM table 2)
    ("10 Mohm", "ohm", 10e6),           # M = 1e6 (BIPM table 7)
    ("10 MΩ", "ohm", 10e6),             # Ω: ohm (BIPM table 4)
    ("60 Hz", "Hz", 60.0),              # Hz: hertz (BIPM table 4)
    ("1.5 H", "H", 1.5),                # H: henry (BIPM table 4)
    ("2 W", "W", 2.0),                  # W: watt (BIPM table 4)
    ("3 pF", "F", 3e-12),               # p = 1e-12 (BIPM table 7)
    ("1 GHz", "Hz", 1e9),               # G = 1e9 (BIPM table 7)
    ("9.5e-07", "F", 9.5e-07),          # bare SI number
    ("40 degC", "degC", 40.0),
    ("3 %", "%", 3.0),
    ("2.5 A2s", "A2s", 2.5),
    ("630V-", "V", 630.0),
    ("0.75 A", "A", 0.75),
    ("2 milliampere", "A", 2e-3),       # pint fallback: unit name spelled out (BIPM table 7)
    ("1 kilovolt", "V", 1e3),           # pint fallback
])
def test_parse_check_values(text, unit, expected):
    if expected is None:
        with pytest.raises(UnitError):
            parse_quantity(text, unit)
        return
    assert parse_quantity(text, unit) == pytest.approx(expected, rel=1e-12)


def test_decimal_scaling_is_exact():
    # 0.95 µF must be the same float as the literal 0.95e-6, so export -> import round-trips
    assert parse_quantity("0.95uF", "F") == 0.95e-6


@pytest.mark.parametrize("text,unit", [("5 mm", "V"), ("2 A", "F"), ("10 ohm", "A"),
                                       ("1 kg", "Hz")])
def test_wrong_dimension_names_column_and_unit(text, unit):
    with pytest.raises(UnitError) as exc:
        parse_quantity(text, unit, column="capacitance")
    msg = str(exc.value)
    assert "column 'capacitance'" in msg and "wrong dimension" in msg and "\n" not in msg


@pytest.mark.parametrize("text", ["", "  ", "abc", "1/0 V", "nan", "inf V", "1e999 V"])
def test_unreadable(text):
    with pytest.raises(UnitError):
        parse_quantity(text, "V")


@pytest.mark.parametrize("text,kind", [("2100VAC", "ac"), ("250V~", "ac"), ("630V-", "dc"),
                                       ("630 VDC", "dc"), ("12 kV", None)])
def test_ac_dc_marker(text, kind):
    # common practice, no source: VAC / V~ mark an AC rating, VDC / V- a DC one
    assert ac_dc(text) == kind


@pytest.mark.parametrize("value,unit,text", [
    (9.5e-07, "F", "950 nF"), (2100.0, "V", "2.1 kV"), (0.35, "A", "350 mA"),
    (1e7, "ohm", "10 MΩ"), (1e-7, "s", "100 ns"), (999.96, "V", "1 kV"), (0.0, "V", "0 V"),
    (None, "V", "-"), (40.0, "degC", "40 °C"),
])
def test_format(value, unit, text):
    assert format_quantity(value, unit) == text


@settings(max_examples=300, derandomize=True)
@given(st.text(max_size=40), st.sampled_from(["V", "A", "F", "ohm", "s", "Hz", "degC", "%"]))
def test_parse_never_raises_anything_else(text, unit):
    try:
        v = parse_quantity(text, unit, column="x")
    except PartsmatchError as exc:
        assert isinstance(exc, UnitError)
        assert "\n" not in str(exc)
    else:
        assert math.isfinite(v)


@settings(max_examples=300, derandomize=True)
@given(st.floats(min_value=1e-13, max_value=1e13, allow_nan=False),
       st.sampled_from(["V", "A", "F", "ohm", "s"]))
def test_format_then_parse_is_close(value, unit):
    text = format_quantity(value, unit, digits=6).replace("µ", "u").replace("Ω", "ohm")
    assert parse_quantity(text, unit) == pytest.approx(value, rel=1e-5)
