"""Commands: init, db upgrade|status, parts list|show|import|export."""

from __future__ import annotations

import sys
from pathlib import Path

import typer

from partsmatch.cli.common import emit_json, globals_of, print_table

db_app = typer.Typer(help="Database schema: status and upgrade.", no_args_is_help=True)
parts_app = typer.Typer(help="The parts of the catalog: list, show, import, export.",
                        no_args_is_help=True)


def init(
    ctx: typer.Context,
    demo: bool = typer.Option(False, "--demo", help="Also load the invented demo catalog."),
    json_out: bool = typer.Option(False, "--json", help="Print the result as JSON."),
) -> None:
    """Create a new catalog database at the current schema (or bring one up to date)."""
    from partsmatch.catalog import db
    from partsmatch.catalog.io import load_demo

    g = globals_of(ctx)
    engine = g.engine(check_schema=False)
    revision = db.init(engine)
    result = {"database": db.redact(str(engine.url)), "revision": revision}
    if demo:
        result["demo"] = load_demo(engine).to_dict()
    if json_out:
        emit_json(result)
        return
    typer.echo(f"catalog ready at {result['database']} (schema {revision})")
    if demo:
        d = result["demo"]
        typer.echo(f"demo data: {d['parts_added']} parts, {d['stock_rows']} stock lines")


@db_app.command("upgrade")
def db_upgrade(ctx: typer.Context) -> None:
    """Apply every pending schema migration (data is kept)."""
    from partsmatch.catalog import db

    engine = globals_of(ctx).engine(check_schema=False)
    before = db.current_revision(engine)
    db.upgrade(engine)
    after = db.current_revision(engine)
    typer.echo(f"schema {before or '(empty)'} -> {after}" if before != after
               else f"schema already at {after}")


@db_app.command("status")
def db_status(ctx: typer.Context,
              json_out: bool = typer.Option(False, "--json", help="Print as JSON.")) -> None:
    """Show the database's schema revision and the code's."""
    from partsmatch.catalog import db

    st = db.status(globals_of(ctx).engine(check_schema=False))
    if json_out:
        emit_json(st)
        return
    typer.echo(f"database: {st['url']}")
    typer.echo(f"current:  {st['current'] or '(no schema)'}")
    typer.echo(f"head:     {st['head']}")
    typer.echo("up to date" if st["up_to_date"] else "behind: run `partsmatch db upgrade`")


def _summary(p) -> str:
    """The main ratings of a part in one short text."""
    from partsmatch.units import format_quantity as fq

    bits = []
    if p.kind == "capacitor":
        bits.append(fq(p.capacitance, "F") if p.capacitance else "")
        if p.tolerance_minus is not None:
            bits.append(f"±{p.tolerance_minus:g}%" if p.tolerance_minus == p.tolerance_plus
                        else f"-{p.tolerance_minus:g}/+{p.tolerance_plus:g}%")
        if p.voltage_ac:
            bits.append(fq(p.voltage_ac, "V") + " AC")
        if p.voltage_dc:
            bits.append(fq(p.voltage_dc, "V") + " DC")
        if p.polarized:
            bits.append("polarised")
        if p.bleeder:
            bits.append("bleeder " + fq(p.bleeder, "ohm"))
    elif p.kind == "diode":
        bits += [fq(p.vrrm, "V"), fq(p.if_avg, "A")]
        if p.trr:
            bits.append("trr " + fq(p.trr, "s"))
    elif p.kind == "fuse":
        bits += [p.characteristic or "", fq(p.rated_current, "A"), fq(p.voltage, "V")]
        if p.breaking_capacity:
            bits.append("Icn " + fq(p.breaking_capacity, "A"))
    elif p.kind == "resistor":
        bits += [fq(p.resistance, "ohm"), fq(p.power, "W")]
        if p.voltage_max:
            bits.append(fq(p.voltage_max, "V") + " max")
    return " ".join(b for b in bits if b and b != "-")


@parts_app.command("list")
def parts_list(
    ctx: typer.Context,
    kind: str = typer.Option(None, "--kind", help="capacitor, diode, fuse or resistor."),
    limit: int = typer.Option(None, "--limit", min=1, help="At most this many parts."),
    json_out: bool = typer.Option(False, "--json", help="Print as JSON."),
) -> None:
    """List the catalog's parts with their main ratings and stock."""
    from partsmatch.catalog.queries import list_parts
    from partsmatch.catalog.vocab import KINDS
    from partsmatch.errors import InputError

    if kind and kind not in KINDS:
        raise InputError(f"--kind must be one of {', '.join(KINDS)}", value=kind)
    with globals_of(ctx).engine().connect() as conn:  # reading needs no ORM
        parts = list_parts(conn, kind, limit)
    if json_out:
        emit_json([p.to_dict() for p in parts])
        return
    rows = [[p.kind, p.maker, p.part_number, _summary(p), str(p.in_stock)] for p in parts]
    print_table(["kind", "maker", "part", "ratings", "stock"], rows)


@parts_app.command("show")
def parts_show(
    ctx: typer.Context,
    part: str = typer.Argument(..., help="PART or MAKER:PART."),
    json_out: bool = typer.Option(False, "--json", help="Print as JSON."),
) -> None:
    """Show one part's ratings (in engineering units) and its stock by location."""
    from partsmatch.catalog.queries import find_part
    from partsmatch.catalog.vocab import RATING_UNITS
    from partsmatch.units import format_quantity

    with globals_of(ctx).engine().connect() as conn:  # reading needs no ORM
        p = find_part(conn, part)
    if json_out:
        emit_json(p.to_dict())
        return
    typer.echo(f"{p.maker} {p.part_number}  ({p.kind})")
    if p.description:
        typer.echo(f"  {p.description}")
    for key, value in p.ratings().items():
        shown = format_quantity(value, RATING_UNITS[key]) if key in RATING_UNITS else str(value)
        typer.echo(f"  {key:<18} {shown}")
    if p.stock:
        typer.echo("  stock:")
        for s in p.stock:
            cost = f"  at {s.unit_cost:g} each" if s.unit_cost is not None else ""
            typer.echo(f"    {s.location:<10} {s.quantity:>6}{cost}")
    else:
        typer.echo("  stock: none")


@parts_app.command("import")
def parts_import(
    ctx: typer.Context,
    file: Path = typer.Argument(..., help="Catalog CSV (see DESIGN.md for the columns); - for stdin."),
    update: bool = typer.Option(False, "--update", help="Update parts already in the catalog "
                                "(matched by maker and part number) and set their stock."),
    dry_run: bool = typer.Option(False, "--dry-run", help="Check every row, change nothing."),
    ignore_extra: bool = typer.Option(False, "--ignore-extra", help="Skip unknown columns."),
    json_out: bool = typer.Option(False, "--json", help="Print the report as JSON."),
) -> None:
    """Import a catalog CSV as one transaction: the first bad row aborts it, nothing changes."""
    import time

    from partsmatch.catalog.io import import_csv

    engine = globals_of(ctx).engine()
    progress = None
    shown = [0.0]  # when the progress line was last drawn (0: never)
    if sys.stderr.isatty():  # a progress line on a terminal only, never into a pipe or a log
        start = time.monotonic()

        def progress(rows: int, fraction: float | None) -> None:
            now = time.monotonic()
            if now - shown[0] < 0.2 and (fraction or 0.0) < 1.0:
                return
            shown[0] = now
            rate = rows / max(now - start, 1e-6)
            text = f"{rows:>12,} rows  {rate:>9,.0f} rows/s"
            if fraction is not None:
                done = int(fraction * 24)
                text = f"[{'#' * done}{'.' * (24 - done)}] {fraction * 100:5.1f}%  " + text
            sys.stderr.write("\r" + text)
            sys.stderr.flush()
    kwargs = dict(update=update, dry_run=dry_run, ignore_extra=ignore_extra, progress=progress)
    try:
        if str(file) == "-":
            report = import_csv(engine, stream=sys.stdin, name="<stdin>", **kwargs)
        else:
            report = import_csv(engine, file, **kwargs)
    finally:
        if shown[0]:
            sys.stderr.write("\n")
            sys.stderr.flush()
    if json_out:
        emit_json(report.to_dict())
        return
    verb = "would add" if dry_run else "added"
    typer.echo(f"{report.file}: {report.rows} rows; {verb} {report.parts_added} parts, "
               f"updated {report.parts_updated}, {report.stock_rows} new stock lines"
               + (" (dry run: nothing changed)" if dry_run else ""))


@parts_app.command("export")
def parts_export(
    ctx: typer.Context,
    kind: str = typer.Option(None, "--kind", help="Only this kind."),
) -> None:
    """Write the catalog as CSV on stdout (import reads it back unchanged)."""
    from partsmatch.catalog.io import export_csv

    export_csv(globals_of(ctx).engine(), sys.stdout, kind)


def register(app: typer.Typer) -> None:
    app.command("init")(init)
    app.add_typer(db_app, name="db")
    app.add_typer(parts_app, name="parts")
