"""``partsmatch stress CIRCUIT [--json] [--plot FILE.png|.svg]``: the electrical stress of every
slot of a circuit file in every operating state. The work is done by
:func:`partsmatch.circuit.stress.analyze` (imported inside the command: it needs numpy)."""

from __future__ import annotations

from typing import Any

import typer

#: unit key (partsmatch.units) of each stress key
_UNITS = {
    "v_peak": "V", "v_min": "V", "v_max": "V", "v_mean": "V", "v_ac_rms": "V",
    "v_reverse_peak": "V", "v_open_peak": "V", "v_open_rms": "V", "i_rms": "A", "i_avg": "A",
    "i_peak": "A",
    "i_surge": "A", "i_mean": "A", "energy_j": "J", "discharge_s": "s", "surge_s": "s",
    "i2t_surge": "A2s", "i2t_cycle": "A2s", "frequency_hz": "Hz", "p_mean": "W",
}


def register(app: typer.Typer) -> None:
    """Add the ``stress`` command to ``app``."""

    @app.command("stress")
    def stress_command(
        ctx: typer.Context,
        circuit: str = typer.Argument(..., metavar="CIRCUIT", help="Circuit file (TOML)."),
        as_json: bool = typer.Option(False, "--json", help="Print the stress report as JSON."),
        plot: str = typer.Option(None, "--plot", metavar="FILE",
                                 help="Write a figure of two steady-state cycles (.png or .svg)."),
    ) -> None:
        """Compute the stress of every part of a circuit in every operating state (loaded,
        no load, switch-on, high line), with the high-voltage cautions."""
        from partsmatch.circuit.spec import load_circuit
        from partsmatch.circuit.stress import analyze
        from partsmatch.cli.common import emit_json, globals_of
        from partsmatch.errors import InputError

        g = globals_of(ctx)
        if plot is not None and not plot.lower().endswith((".png", ".svg")):
            raise InputError("the plot file must end in .png or .svg", value=plot)
        spec = load_circuit(circuit)
        report = analyze(spec, g.load_policy())
        if as_json:
            emit_json(report)
        else:
            print_report(report)
        if plot is not None:
            from partsmatch.circuit.plot import plot_waveforms
            from partsmatch.circuit.stress import simulate_waveforms

            waves = simulate_waveforms(spec, "loaded", periods=2)
            ratings = catalog_ratings(g, spec)
            path = plot_waveforms(spec, waves, plot, ratings=ratings)
            typer.echo(f"plot written to {path}", err=True)


def catalog_ratings(g, spec) -> dict[str, dict[str, Any]]:
    """Ratings of the catalog parts named in the circuit (``part = "..."``), for limit lines.
    A part the catalog cannot give (no database yet, unknown name) is skipped with a note on
    stderr: the plot is drawn all the same."""
    named = {slot: p.part for slot, p in spec.parts.items() if p.part}
    if not named:
        return {}
    from partsmatch.errors import PartsmatchError

    out: dict[str, dict[str, Any]] = {}
    try:
        from pathlib import Path

        from partsmatch.catalog import db
        from partsmatch.catalog.queries import find_part

        url = db.resolve_url(g.db)
        if url.startswith("sqlite:///") and not Path(url.split("///", 1)[1]).is_file():
            # a plot must not create a catalog file as a side effect
            typer.echo("note: no rating lines (no catalog database yet)", err=True)
            return out
        engine = g.engine()
        with db.session_scope(engine) as session:
            for slot, name in named.items():
                try:
                    out[slot] = find_part(session, name).ratings()
                except PartsmatchError as exc:
                    typer.echo(f"note: no rating lines for {slot}: {exc.one_line()}", err=True)
    except (PartsmatchError, ImportError) as exc:
        msg = exc.one_line() if isinstance(exc, PartsmatchError) else str(exc)
        typer.echo(f"note: no rating lines (catalog not available: {msg})", err=True)
    return out


def _fmt(key: str, value: Any) -> str:
    from partsmatch.units import format_quantity

    if value is None:
        return "-"
    unit = _UNITS.get(key, "")
    if unit == "A2s":  # a prefix on A²s reads ambiguously ((mA)²s or m(A²s)): plain number
        return f"{value:.3g} A²s"
    return format_quantity(value, unit)


def print_report(report: dict[str, Any]) -> None:
    """The stress report as text tables: each value's worst case, the state that set it, and
    every state's own value."""
    from partsmatch.circuit.stress import STATES
    from partsmatch.cli.common import print_table
    from partsmatch.units import format_quantity

    c = report["circuit"]
    src = c["source"]
    typer.echo(f"{c['name']}")
    typer.echo(f"  {c['topology']}{' of ' + str(c['stages']) + ' stages' if c['stages'] else ''}"
               f", source {format_quantity(src['voltage'], 'V')} RMS "
               f"{format_quantity(src['frequency'], 'Hz')}, load {c['load']['type']}")
    typer.echo("")
    headers = ["slot", "stress", "worst", "set by"] + list(STATES)
    rows: list[list[str]] = []
    by = report["by_state"]

    def add(label: str, group: str, values: dict[str, Any], per_state) -> None:
        first = True
        for key, value in values.items():
            if key in ("role", "states"):
                continue
            state = values["states"].get(key) if "states" in values else None
            rows.append([label if first else "", key, _fmt(key, value), state or "-"]
                        + [_fmt(key, per_state(s).get(key)) for s in STATES])
            first = False

    for slot, values in report["slots"].items():
        add(slot, "slots", values, lambda s, slot=slot: by[s]["slots"][slot])
    add("load", "load", report["load"], lambda s: by[s]["load"])
    add("source", "source", report["source"], lambda s: by[s]["source"])
    print_table(headers, rows)
    typer.echo("")
    solver = report.get("solver", {})
    parts = []
    for label, info in solver.items():
        if isinstance(info, dict) and "periods" in info and "residual" in info:
            parts.append(f"{label} in {info['periods']} periods (residual "
                         f"{info['residual']:.1g})")
    if parts:
        typer.echo("steady states verified: " + "; ".join(parts))
    if "wall_s" in solver:
        typer.echo(f"solve time {solver['wall_s'] * 1e3:.0f} ms")
    typer.echo("")
    typer.echo("CAUTIONS")
    for line in report["cautions"]:
        typer.echo(f"  ! {line}")
