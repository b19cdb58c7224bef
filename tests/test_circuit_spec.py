"""Circuit files (DESIGN.md section 4): values with units become SI floats; every bad input is a
one-line error that names the file and the key; the CLI exits 2 on it."""

from __future__ import annotations

import textwrap

import pytest

from partsmatch.circuit.spec import (
    CircuitSpec,
    load_circuit,
    parse_circuit,
    slot_names,
    with_part_values,
)
from partsmatch.errors import CircuitError, UnitError

DOUBLER = """
name = "bench 1 kW supply"
topology = "half-wave-doubler"
[source]
voltage = "2100 V"
frequency = "60 Hz"
resistance = "60 ohm"
inductance = "0.2 H"
[load]
type = "threshold"
threshold = "3.8 kV"
dynamic_resistance = "200 ohm"
[parts.C1]
capacitance = "0.95 uF"
bleeder = "10 Mohm"
part = "PN-OF-THE-ORIGINAL"
[parts.D1]
forward_voltage = "10 V"
resistance = "30 ohm"
[parts.F1]
rating = "0.75 A"
[environment]
ambient = "40 degC"
"""


def write(tmp_path, text: str, name: str = "c.toml"):
    path = tmp_path / name
    path.write_text(textwrap.dedent(text))
    return path


def test_design_example_reads_to_si(tmp_path):
    spec = load_circuit(write(tmp_path, DOUBLER))
    assert isinstance(spec, CircuitSpec)
    assert spec.topology == "half-wave-doubler" and spec.stages is None
    assert spec.source.voltage_rms == 2100.0
    assert spec.source.frequency == 60.0
    assert spec.source.resistance == 60.0
    assert spec.source.inductance == pytest.approx(0.2)
    assert spec.load.type == "threshold"
    assert spec.load.threshold == 3800.0 and spec.load.dynamic_resistance == 200.0
    c1 = spec.parts["C1"]
    assert c1.role == "capacitor" and c1.capacitance == pytest.approx(0.95e-6, rel=1e-12)
    assert c1.bleeder == 10e6 and c1.part == "PN-OF-THE-ORIGINAL"
    assert spec.parts["D1"].forward_voltage == 10.0 and spec.parts["D1"].resistance == 30.0
    assert spec.parts["F1"].rating == 0.75 and spec.parts["F1"].role == "fuse"
    assert spec.ambient == 40.0
    assert list(spec.parts) == ["C1", "D1", "F1"]


def test_bare_si_numbers_and_echo():
    spec = parse_circuit({
        "topology": "bridge-rectifier",
        "source": {"voltage": 230, "frequency": 50},
        "load": {"type": "resistor", "resistance": 1000},
        "parts": {"C1": {"capacitance": 470e-6}},
    })
    d = spec.to_dict()
    assert d["source"] == {"voltage": 230.0, "frequency": 50.0, "resistance": 0.0,
                           "inductance": 0.0}
    assert d["load"] == {"type": "resistor", "resistance": 1000.0}
    assert d["parts"]["C1"]["capacitance"] == 470e-6
    # the diodes of the bridge have defaults; the fuse is optional and absent
    assert [s for s in spec.parts] == ["C1", "D1", "D2", "D3", "D4"]


@pytest.mark.parametrize(
    "change, key",
    [
        (("colour = 'red'", ""), "colour"),                                # unknown top-level key
        (("[source]", "[source]\nphase = 10"), "source.phase"),            # unknown source key
        (("part = \"PN-OF-THE-ORIGINAL\"", "voltage = '2 kV'"), "parts.C1.voltage"),
        (("[parts.F1]", "[parts.C9]\ncapacitance = '1 uF'\n[parts.F1]"), "parts.C9"),
        (("type = \"threshold\"", "type = \"threshold\"\nresistance = '1 kohm'"),
         "load.resistance"),
    ],
)
def test_unknown_keys_are_named(tmp_path, change, key):
    old, new = change
    text = DOUBLER.replace(old, new, 1) if old != "colour = 'red'" else "colour = 'red'\n" + DOUBLER
    path = write(tmp_path, text)
    with pytest.raises(CircuitError) as err:
        load_circuit(path)
    msg = str(err.value)
    assert err.value.key == key and f"'{key}'" in msg and str(path) in msg
    assert "\n" not in msg


@pytest.mark.parametrize(
    "old, new, key",
    [
        ('voltage = "2100 V"\n', "", "source.voltage"),
        ('capacitance = "0.95 uF"\n', "", "parts.C1.capacitance"),
        ('type = "threshold"\n', "", "load.type"),
        ('dynamic_resistance = "200 ohm"\n', "", "load.dynamic_resistance"),
        ('topology = "half-wave-doubler"\n', "", "topology"),
    ],
)
def test_missing_keys_are_named(tmp_path, old, new, key):
    with pytest.raises(CircuitError) as err:
        load_circuit(write(tmp_path, DOUBLER.replace(old, new, 1)))
    assert err.value.key == key
    assert "missing" in str(err.value)


def test_missing_capacitor_table_is_named():
    with pytest.raises(CircuitError) as err:
        parse_circuit({"topology": "full-wave-doubler",
                       "source": {"voltage": "100 V", "frequency": "50 Hz"},
                       "load": {"type": "none"},
                       "parts": {"C1": {"capacitance": "1 uF"}}})
    assert err.value.key == "parts.C2"


@pytest.mark.parametrize(
    "old, new, key",
    [
        ('capacitance = "0.95 uF"', 'capacitance = "10 V"', "parts.C1.capacitance"),
        ('frequency = "60 Hz"', 'frequency = "60 ohm"', "source.frequency"),
        ('rating = "0.75 A"', 'rating = "0.75 V"', "parts.F1.rating"),
        ('threshold = "3.8 kV"', 'threshold = "3.8 kA"', "load.threshold"),
    ],
)
def test_wrong_dimension_is_named(tmp_path, old, new, key):
    path = write(tmp_path, DOUBLER.replace(old, new, 1))
    with pytest.raises(UnitError) as err:
        load_circuit(path)
    assert err.value.key == key and str(path) in str(err.value)
    assert "\n" not in str(err.value)


@pytest.mark.parametrize(
    "old, new, key",
    [
        ('capacitance = "0.95 uF"', 'capacitance = "0 uF"', "parts.C1.capacitance"),
        ('voltage = "2100 V"', 'voltage = -2100', "source.voltage"),
        ('bleeder = "10 Mohm"', 'bleeder = "-1 Mohm"', "parts.C1.bleeder"),
        ('resistance = "30 ohm"', 'resistance = "0 ohm"', "parts.D1.resistance"),
        ('frequency = "60 Hz"', 'frequency = "1 MHz"', "source.frequency"),
    ],
)
def test_non_positive_or_out_of_range_is_named(tmp_path, old, new, key):
    with pytest.raises(CircuitError) as err:
        load_circuit(write(tmp_path, DOUBLER.replace(old, new, 1)))
    assert err.value.key == key


def test_zero_winding_resistance_and_zero_forward_voltage_are_allowed(tmp_path):
    text = DOUBLER.replace('resistance = "60 ohm"', 'resistance = "0 ohm"', 1)
    text = text.replace('forward_voltage = "10 V"', 'forward_voltage = 0', 1)
    spec = load_circuit(write(tmp_path, text))
    assert spec.source.resistance == 0.0 and spec.parts["D1"].forward_voltage == 0.0


def test_stages_on_a_non_multiplier_is_an_error(tmp_path):
    with pytest.raises(CircuitError) as err:
        load_circuit(write(tmp_path, "stages = 3\n" + DOUBLER))
    assert err.value.key == "stages" and "multiplier" in str(err.value)


@pytest.mark.parametrize("stages", [0, 11, 2.5, "3", True])
def test_multiplier_stages_range(stages):
    with pytest.raises(CircuitError) as err:
        parse_circuit({"topology": "multiplier", "stages": stages,
                       "source": {"voltage": "1 kV", "frequency": "20 kHz"},
                       "load": {"type": "none"}, "parts": {"C": {"capacitance": "1 nF"}}})
    assert err.value.key == "stages"


def test_multiplier_default_tables_and_explicit_slots():
    spec = parse_circuit({
        "topology": "multiplier", "stages": 3,
        "source": {"voltage": "3 kV", "frequency": "20 kHz"},
        "load": {"type": "resistor", "resistance": "20 Mohm"},
        "parts": {"C": {"capacitance": "2.2 nF"}, "C3": {"capacitance": "4.7 nF"},
                  "D": {"forward_voltage": "20 V", "resistance": "100 ohm"},
                  "D6": {"part": "X-1"}},
    })
    assert spec.slots("capacitor") == ["C1", "C2", "C3", "C4", "C5", "C6"]
    assert spec.parts["C1"].capacitance == pytest.approx(2.2e-9)
    assert spec.parts["C3"].capacitance == pytest.approx(4.7e-9)
    assert spec.parts["D6"].forward_voltage == 20.0 and spec.parts["D6"].part == "X-1"
    assert spec.parts["D2"].part is None


def test_default_table_on_a_non_multiplier_is_an_error():
    with pytest.raises(CircuitError) as err:
        parse_circuit({"topology": "half-wave-rectifier",
                       "source": {"voltage": "10 V", "frequency": "50 Hz"},
                       "load": {"type": "none"}, "parts": {"C": {"capacitance": "1 uF"}}})
    assert err.value.key == "parts.C"


def test_slot_names():
    assert slot_names("half-wave-doubler") == ["C1", "D1", "F1"]
    assert slot_names("bridge-rectifier") == ["C1", "D1", "D2", "D3", "D4", "F1"]
    assert slot_names("multiplier", 2) == ["C1", "C2", "C3", "C4", "D1", "D2", "D3", "D4", "F1"]
    with pytest.raises(CircuitError):
        slot_names("multiplier", None)
    with pytest.raises(CircuitError):
        slot_names("royer")


def test_with_part_values_replaces_one_slot(tmp_path):
    spec = load_circuit(write(tmp_path, DOUBLER))
    new = with_part_values(spec, "C1", capacitance=1.0e-6, bleeder=None, part="CAND-1")
    assert new.parts["C1"].capacitance == 1.0e-6 and new.parts["C1"].part == "CAND-1"
    assert new.parts["C1"].bleeder is None  # a candidate without a bleeder
    assert spec.parts["C1"].capacitance == pytest.approx(0.95e-6)  # the original is untouched
    assert new.parts["D1"] is spec.parts["D1"]
    with pytest.raises(CircuitError) as err:
        with_part_values(spec, "C1", forward_voltage=1.0)
    assert err.value.key == "parts.C1.forward_voltage"
    with pytest.raises(CircuitError):
        with_part_values(spec, "C7", capacitance=1e-6)
    with pytest.raises(CircuitError):
        with_part_values(spec, "C1", capacitance=-1e-6)


def test_bad_files(tmp_path):
    with pytest.raises(CircuitError) as err:
        load_circuit(tmp_path / "nope.toml")
    assert "no such circuit file" in str(err.value)
    bad = write(tmp_path, "topology = [", "bad.toml")
    with pytest.raises(CircuitError) as err:
        load_circuit(bad)
    assert "not valid TOML" in str(err.value) and "\n" not in str(err.value)


def test_cli_exit_code_2_one_line(tmp_path, capsys):
    from partsmatch.cli.main import run

    path = write(tmp_path, DOUBLER.replace('capacitance = "0.95 uF"', 'capacitance = "1 kV"'))
    assert run(["stress", str(path)]) == 2
    err = capsys.readouterr().err.strip()
    assert err.startswith("error: ") and "parts.C1.capacitance" in err
    assert "\n" not in err and "Traceback" not in err
