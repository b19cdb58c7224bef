"""The catalog's vocabulary: part kinds, fuse letters and standards, rating columns and units.

Plain Python with no imports, so that the parsing half of a parallel CSV import (a process of
its own, see :mod:`partsmatch.catalog.csvrows`) starts without the database layer.
"""

#: Part kinds, fuse characteristics (IEC 60127-1) and fuse standards.
KINDS = ("capacitor", "diode", "fuse", "resistor")
CHARACTERISTICS = ("FF", "F", "M", "T", "TT")
FUSE_STANDARDS = ("IEC 60127", "UL 248-14", "HV")

#: Rating columns and their units (keys of partsmatch.units.UNITS), in CSV contract order.
RATING_UNITS: dict[str, str] = {
    "capacitance": "F", "tolerance_minus": "%", "tolerance_plus": "%", "voltage_ac": "V",
    "rated_frequency": "Hz", "voltage_dc": "V", "bleeder": "ohm", "ripple_current": "A",
    "temp_max": "degC", "vrrm": "V", "if_avg": "A", "ifsm": "A", "trr": "s", "vf": "V",
    "rated_current": "A", "voltage": "V", "voltage_dc_fuse": "V", "breaking_capacity": "A",
    "i2t": "A2s", "resistance": "ohm", "power": "W", "voltage_max": "V",
}
#: Largest quantity a stock row holds: PostgreSQL's INTEGER column; SQLite is held to the same.
MAX_QUANTITY = 2**31 - 1
