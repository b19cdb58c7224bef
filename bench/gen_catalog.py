"""Generate a large, realistic, entirely invented parts catalog as a CSV (the DESIGN.md contract).

Every maker name and part number here is invented (syllables joined at random, a serial number);
none is a real brand or a real part number. The ratings are plausible for the trade:
HV capacitors for oven-style doublers (0.5-1.3 uF, 2100-2500 VAC), DC film parts and
electrolytics, HV rectifier diodes (5-20 kV, 0.35-1 A, standard and fast recovery), HV cartridge
fuses and IEC 60127 mains fuses, HV bleeder resistors (common practice, no source).

Usage: ``python bench/gen_catalog.py ROWS OUT.csv`` or ``write_catalog(path, parts, seed)``.
About 8 % of the parts get a second row with stock at another location (rows of one part add
stock), so a file of N parts has about 1.08 N data rows.
"""

from __future__ import annotations

import csv
import random
import sys
from pathlib import Path

COLUMNS = (
    "part_number", "maker", "kind", "description", "capacitance", "tolerance", "voltage_ac",
    "voltage_dc", "bleeder", "dielectric", "polarized", "ripple_current", "temp_max", "vrrm",
    "if_avg", "ifsm", "trr", "vf", "rated_current", "voltage", "breaking_capacity",
    "characteristic", "i2t", "size", "quantity", "location", "unit_cost",
    "tolerance_minus", "tolerance_plus", "rated_frequency", "voltage_dc_fuse", "fuse_standard",
    "resistance", "power", "voltage_max",
)
_IX = {c: i for i, c in enumerate(COLUMNS)}

# Invented syllables; the joined names are checked by eye to be no maker we know of.
_HEAD = ("Brak", "Orv", "Lark", "Quen", "Tamb", "Vorn", "Heth", "Jass", "Kell", "Mirr", "Nox",
         "Ulv", "Yarr", "Zent", "Drev", "Fenn", "Gorm", "Ilsk", "Wyth", "Saph")
_TAIL = ("amoor", "ane", "span", "dell", "wick", "holt", "rune", "stead", "ferro", "quay")
MAKERS = tuple(h + t for h in _HEAD for t in _TAIL)  # 200 invented makers


def _prefix(maker: str) -> str:
    return (maker[:2] + maker[-1]).upper()


def _cap(rng: random.Random) -> tuple[str, dict]:
    r = rng.random()
    if r < 0.6:  # oven-style HV capacitor
        c = rng.choice((0.50, 0.56, 0.6, 0.62, 0.64, 0.7, 0.75, 0.8, 0.85, 0.9, 0.91, 0.95, 1.0,
                        1.05, 1.1, 1.15, 1.2, 1.3))
        v = rng.choice((2100, 2100, 2100, 2300, 2500))
        tol = rng.choice((3, 3, 5))
        bleed = rng.random() < 0.7
        cap_text = rng.choice((f"{c:g} uF", f"{c:g}uF", f"{c * 1000:g} nF"))
        cells = {"capacitance": cap_text, "tolerance": f"{tol} %",
                 "voltage_ac": rng.choice((f"{v} VAC", f"{v}VAC", f"{v / 1000:g} kVAC")),
                 "bleeder": "10 Mohm" if bleed else "", "dielectric": "PP film",
                 "polarized": "false", "temp_max": "85 degC",
                 "rated_frequency": rng.choice(("50 Hz", "60 Hz", "60 Hz")),
                 "size": rng.choice(("oval 38x60 mm", "oval 38x70 mm", "round 45x70 mm"))}
        desc = (f"HV capacitor {c:g} uF {v} VAC {tol}%"
                + (" internal bleeder 10M" if bleed else "") + ", oven doubler")
        code = f"{v // 100}{int(round(c * 100)):03d}"
    elif r < 0.85:  # DC film
        c = rng.choice((0.01, 0.022, 0.047, 0.1, 0.15, 0.22, 0.33, 0.47, 1.0))
        v = rng.choice((1000, 1600, 2000, 3000, 4000, 6000, 10000))
        tol = rng.choice((5, 10))
        cells = {"capacitance": f"{c:g} uF", "tolerance": f"{tol} %",
                 "voltage_dc": rng.choice((f"{v / 1000:g} kV", f"{v} VDC")),
                 "dielectric": "PP film", "polarized": "false", "temp_max": "105 degC",
                 "ripple_current": rng.choice(("", "1.2 A", "2.5 A", "800 mA")),
                 "size": rng.choice(("box 18x32 mm", "box 24x42 mm", "axial 12x30 mm"))}
        desc = f"DC film capacitor {c:g} uF {v / 1000:g} kV {tol}%"
        code = f"F{v // 100}{int(round(c * 1000)):04d}"
    else:  # electrolytic
        c = rng.choice((10, 22, 47, 100, 220, 470))
        v = rng.choice((250, 350, 400, 450))
        cells = {"capacitance": f"{c} uF", "tolerance": "20 %", "voltage_dc": f"{v} VDC",
                 "dielectric": "Al electrolytic", "polarized": "true", "temp_max": "105 degC",
                 "ripple_current": rng.choice(("450 mA", "1.1 A", "2 A")),
                 "size": rng.choice(("radial 18x35 mm", "snap-in 25x40 mm"))}
        desc = f"Electrolytic {c} uF {v} V, reservoir"
        code = f"E{v}{c:03d}"
    return code, {**cells, "description": desc}


def _diode(rng: random.Random) -> tuple[str, dict]:
    kv = rng.choice((5, 6, 8, 10, 12, 12, 12, 15, 16, 18, 20))
    ma = rng.choice((350, 350, 450, 500, 550, 750, 1000))
    fast = rng.random() < 0.3
    trr = rng.choice((100, 150, 200, 300, 500)) if fast else None
    cells = {"vrrm": rng.choice((f"{kv} kV", f"{kv}kV", f"{kv * 1000} V")),
             "if_avg": rng.choice((f"{ma} mA", f"{ma / 1000:g} A")),
             "ifsm": f"{rng.choice((20, 25, 30, 40, 50))} A", "trr": f"{trr} ns" if trr else "",
             "vf": f"{rng.choice((8, 10, 11, 12, 14, 16))} V", "temp_max": "120 degC",
             "size": rng.choice(("axial 8x40 mm", "axial 10x50 mm", "axial 6x30 mm"))}
    desc = (f"HV rectifier {kv} kV {ma / 1000:g} A, "
            + (f"fast recovery {trr} ns" if fast else "standard recovery"))
    return f"{kv:02d}K{ma // 10:03d}{'F' if fast else 'S'}", {**cells, "description": desc}


_MAINS_A = (0.1, 0.125, 0.16, 0.2, 0.25, 0.315, 0.4, 0.5, 0.63, 0.8, 1, 1.25, 1.6, 2, 2.5, 3.15,
            4, 5, 6.3, 8, 10)


def _fuse(rng: random.Random) -> tuple[str, dict]:
    if rng.random() < 0.3:  # HV cartridge
        a = rng.choice((0.5, 0.6, 0.65, 0.7, 0.75, 0.8, 0.9, 1.0))
        cells = {"rated_current": f"{a:g} A", "voltage": "5 kV", "breaking_capacity": "50 A",
                 "i2t": f"{round(a * a * 1.4, 2):g} A2s", "size": "6x40 mm HV",
                 "fuse_standard": "HV"}
        return f"HV5-{int(a * 1000):04d}", {**cells,
                                           "description": f"HV cartridge fuse {a:g} A 5 kV"}
    a = rng.choice(_MAINS_A)
    ch = rng.choice(("F", "T", "T", "FF", "M", "TT"))
    bc = rng.choice(("35 A", "35 A", "150 A", "1500 A"))
    size = rng.choice(("5x20 mm", "5x20 mm", "6.3x32 mm"))
    v = "250 V" if size == "5x20 mm" else rng.choice(("250 V", "500 V"))
    i2t = round(a * a * rng.choice((0.5, 1.2, 3.0, 8.0)), 3)
    cells = {"rated_current": rng.choice((f"{a:g} A", f"{a * 1000:g} mA")), "voltage": v,
             "breaking_capacity": bc, "characteristic": ch, "i2t": f"{i2t:g} A2s",
             "size": size, "fuse_standard": "IEC 60127", "voltage_dc_fuse": rng.choice(("", "", "125 V"))}
    desc = f"Mains fuse {ch} {a:g} A {v} {size}, breaking capacity {bc}"
    return f"{ch}{int(a * 1000):05d}", {**cells, "description": desc}


def _resistor(rng: random.Random) -> tuple[str, dict]:
    mohm = rng.choice((1, 2.2, 4.7, 10, 15, 22, 47, 100))
    w = rng.choice((0.5, 1, 2))
    kv = rng.choice((5, 10, 15, 20))
    tol = rng.choice((1, 5))
    cells = {"resistance": rng.choice((f"{mohm:g} Mohm", f"{mohm:g} MΩ")), "power": f"{w:g} W",
             "voltage_max": f"{kv} kV", "tolerance": f"{tol} %", "temp_max": "155 degC",
             "size": rng.choice(("axial 5x26 mm", "axial 8x52 mm"))}
    return (f"R{mohm:g}M-{w:g}W-{kv}K".replace(".", "R"),
            {**cells, "description": f"HV bleeder resistor {mohm:g} Mohm {w:g} W {kv} kV"})


_KINDS = (("capacitor", _cap, 0.35), ("diode", _diode, 0.25), ("fuse", _fuse, 0.25),
          ("resistor", _resistor, 0.15))


def _location(rng: random.Random) -> str:
    return f"{rng.choice('ABCDEFGH')}{rng.randint(1, 9)}-{rng.randint(1, 40):02d}"


def generate_rows(parts: int, seed: int = 1):
    """Yield lists of cells (COLUMNS order), about 1.08 rows per part."""
    rng = random.Random(seed)
    kinds = [k for k, _, _ in _KINDS]
    funcs = [fn for _, fn, _ in _KINDS]
    weights = [w for _, _, w in _KINDS]
    choices = rng.choices(range(4), weights, k=parts)
    for serial in range(parts):
        k = choices[serial]
        code, cells = funcs[k](rng)
        maker = MAKERS[serial % len(MAKERS) if serial % 7 else rng.randrange(len(MAKERS))]
        row = [""] * len(COLUMNS)
        row[0] = f"{_prefix(maker)}-{code}-{serial:07d}"
        row[1] = maker
        row[2] = kinds[k]
        for c, v in cells.items():
            row[_IX[c]] = v
        row[_IX["quantity"]] = str(rng.randint(0, 60))
        row[_IX["location"]] = _location(rng)
        row[_IX["unit_cost"]] = f"{rng.uniform(0.1, 40):.2f}"
        yield row
        if rng.random() < 0.08:
            extra = list(row)
            extra[_IX["quantity"]] = str(rng.randint(1, 20))
            loc = _location(rng)
            extra[_IX["location"]] = loc if loc != row[_IX["location"]] else "Z9-99"
            yield extra


def write_catalog(path: str | Path, parts: int, seed: int = 1) -> int:
    """Write the CSV; return the number of data rows."""
    n = 0
    with open(path, "w", newline="", encoding="utf-8") as fh:
        w = csv.writer(fh, lineterminator="\n")
        w.writerow(COLUMNS)
        for row in generate_rows(parts, seed):
            w.writerow(row)
            n += 1
    return n


if __name__ == "__main__":
    if len(sys.argv) != 3:
        sys.exit("usage: python bench/gen_catalog.py PARTS OUT.csv")
    print(write_catalog(sys.argv[2], int(sys.argv[1])), "rows")
