"""Figure of two steady-state cycles with the parts' ratings drawn as limit lines.

matplotlib (Agg backend) is imported inside :func:`plot_waveforms` only, so that importing this
module stays cheap.

Ratings hook: :func:`plot_waveforms` takes ``ratings``, a dict ``slot -> {rating: SI float}``
with the catalog's rating names (``voltage_ac`` V RMS, ``voltage_dc`` V, ``vrrm`` V, ``if_avg``
A, ``rated_current`` A). The CLI fills it from the catalog for the slots whose ``part`` it can
find; any other caller (a report, the substitution engine) may pass its own.
"""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

from partsmatch.errors import InputError

#: (line style, colour) per limit kind
_LIMIT_STYLE = {"v": ("--", "0.35"), "i": (":", "tab:red")}


def rating_limits(spec, ratings: dict[str, dict[str, Any]] | None) -> list[tuple[str, str, float]]:
    """Limit lines ``(axis 'v' or 'i', label, value)`` from slot ratings (SI floats).

    Capacitor: +/- sqrt(2) x its VAC rating (the rating's own peak) and +/- its VDC rating, on
    the voltage axis (its voltage is plotted); diode: -VRRM on the voltage axis (its reverse
    voltage is plotted negative) and IF(AV) on the current axis (a reference for the pulses,
    which are far above an average rating by nature).
    """
    lines: list[tuple[str, str, float]] = []
    for slot, r in (ratings or {}).items():
        if slot not in spec.parts or not r:
            continue
        role = spec.parts[slot].role
        if role == "capacitor":
            if r.get("voltage_ac"):
                pk = math.sqrt(2) * r["voltage_ac"]
                lines += [("v", f"{slot} VAC rating, peak", pk), ("v", "", -pk)]
            if r.get("voltage_dc"):
                lines += [("v", f"{slot} VDC rating", r["voltage_dc"]),
                          ("v", "", -r["voltage_dc"])]
        elif role == "diode":
            if r.get("vrrm"):
                lines.append(("v", f"{slot} VRRM (reverse)", -r["vrrm"]))
            if r.get("if_avg"):
                lines.append(("i", f"{slot} IF(AV)", r["if_avg"]))
    return lines


def _scale(values: float, unit: str) -> tuple[float, str]:
    if values >= 1e3:
        return 1e-3, f"k{unit}"
    if values < 1:
        return 1e3, f"m{unit}"
    return 1.0, unit


def plot_waveforms(spec, waves: dict, path: str | Path, *,
                   ratings: dict[str, dict[str, Any]] | None = None, title: str | None = None
                   ) -> Path:
    """Write a PNG or SVG of ``waves`` (from
    :func:`partsmatch.circuit.stress.simulate_waveforms`): source, capacitor, load and diode
    voltages on the left axis, diode currents on the right, and the rating limit lines."""
    import numpy as np

    path = Path(path)
    if path.suffix.lower() not in (".png", ".svg"):
        raise InputError("the plot file must end in .png or .svg", value=str(path))
    import matplotlib

    matplotlib.use("Agg", force=True)
    import matplotlib.pyplot as plt

    t = waves["t"]
    t_scale, t_unit = (1e3, "ms") if t[-1] >= 1e-3 else (1e6, "µs")
    caps, diodes = spec.slots("capacitor"), spec.slots("diode")
    shown_note = ""
    if len(caps) > 2 or len(diodes) > 2:  # a multiplier: the first and last of each column
        caps, diodes = [caps[0], caps[-1]], [diodes[0], diodes[-1]]
        shown_note = f" ({', '.join(caps + diodes)} shown)"
    vkeys = ["v(source)"] + [f"v({s})" for s in caps + diodes] + ["v(load)"]
    limits = rating_limits(spec, ratings)
    vmax = max(float(np.abs(waves[k]).max()) for k in vkeys)
    vmax = max([vmax] + [abs(v) for axis, _, v in limits if axis == "v"])
    v_scale, v_unit = _scale(vmax, "V")
    ikeys = [f"i({s})" for s in diodes]
    imax = max([float(np.abs(waves[k]).max()) for k in ikeys] + [1e-12])
    i_scale, i_unit = _scale(imax, "A")

    fig, ax = plt.subplots(figsize=(10, 5.6), dpi=110)
    styles = {"v(source)": dict(color="0.55", lw=1.2, ls="-."),
              "v(load)": dict(color="black", lw=1.6)}
    for k in vkeys:
        label = {"v(source)": "source (open circuit)", "v(load)": "load"}.get(k, k[2:-1])
        ax.plot(t * t_scale, waves[k] * v_scale, label=f"{label} voltage", **styles.get(k, {}))
    ax.set_xlabel(f"time ({t_unit})")
    ax.set_ylabel(f"voltage ({v_unit})")
    ax.grid(True, alpha=0.3)
    ax2 = ax.twinx()
    for k, colour in zip(ikeys, ("tab:red", "tab:purple")):
        ax2.plot(t * t_scale, waves[k] * i_scale, lw=1.0, alpha=0.8, color=colour,
                 label=f"{k[2:-1]} current")
    ax2.set_ylabel(f"diode current ({i_unit})", color="tab:red")
    for axis, label, value in limits:
        ls, colour = _LIMIT_STYLE[axis]
        target, scale = (ax, v_scale) if axis == "v" else (ax2, i_scale)
        target.axhline(value * scale, ls=ls, color=colour, lw=1.0, label=label or None)
    handles = ax.get_legend_handles_labels()
    handles2 = ax2.get_legend_handles_labels()
    ax.legend(handles[0] + handles2[0], handles[1] + handles2[1], loc="upper left",
              fontsize=8, framealpha=0.85)
    ax.set_title(title or f"{spec.name}: two steady-state cycles{shown_note}", fontsize=10)
    fig.tight_layout()
    fig.savefig(path)
    plt.close(fig)
    return path
