"""Commands: stock add|take|move|list|history, xref add|list.

Each command parses its arguments, calls one function of :mod:`partsmatch.catalog.stock` and
prints; errors are partsmatch exceptions that the entry point turns into one line and exit 2/3.
"""

from __future__ import annotations

import typer

from partsmatch.cli.common import emit_json, globals_of, print_table

stock_app = typer.Typer(help="Stock by location: add, take, move, list, history.",
                        no_args_is_help=True)
xref_app = typer.Typer(help="Cross-references the shop has verified: add, list.",
                       no_args_is_help=True)

PART_HELP = "PART or MAKER:PART."
NOTE_HELP = "Free text kept with the movement (job, supplier, reason)."


def _when(value) -> str:
    """A movement time for a table: UTC, to the second."""
    return value.strftime("%Y-%m-%d %H:%M:%S") if value is not None else ""


def _cost(value: float | None) -> str:
    return "" if value is None else f"{value:.2f}"


def _whole(text: str, what: str) -> int:
    """A whole-number argument; bad text is a one-line InputError (exit 2)."""
    from partsmatch.errors import InputError

    try:
        return int(text.strip())
    except ValueError:
        raise InputError(f"{what} must be a whole number, not {text!r}", value=text) from None


def _number(text: str | None, what: str) -> float | None:
    from partsmatch.errors import InputError

    if text is None:
        return None
    try:
        return float(text.strip())
    except ValueError:
        raise InputError(f"{what} must be a number, not {text!r}", value=text) from None


def _changed(verb: str, m) -> None:
    typer.echo(f"{verb} {abs(m.delta)} x {m.part} at {m.location}: now {m.quantity_after}")


@stock_app.command("add")
def stock_add(
    ctx: typer.Context,
    part: str = typer.Argument(..., help=PART_HELP),
    location: str = typer.Argument(..., help="Where the pieces are kept (bin, drawer, shelf)."),
    qty: str = typer.Argument(..., metavar="QTY",
                             help="Number of pieces, a whole number above 0."),
    cost: str = typer.Option(None, "--cost", metavar="X",
                            help="Price of one piece (sets the line's cost)."),
    note: str = typer.Option(None, "--note", help=NOTE_HELP),
    json_out: bool = typer.Option(False, "--json", help="Print the movement as JSON."),
) -> None:
    """Add pieces of a part at a location (the stock line is created if needed)."""
    from partsmatch.catalog.stock import add_stock

    m = add_stock(globals_of(ctx).engine(), part, location, _whole(qty, "QTY"),
                  unit_cost=_number(cost, "--cost"), note=note)
    if json_out:
        emit_json(m.to_dict())
        return
    _changed("added", m)


@stock_app.command("take")
def stock_take(
    ctx: typer.Context,
    part: str = typer.Argument(..., help=PART_HELP),
    location: str = typer.Argument(..., help="The location to take from."),
    qty: str = typer.Argument(..., metavar="QTY",
                             help="Number of pieces, a whole number above 0."),
    note: str = typer.Option(None, "--note", help=NOTE_HELP),
    json_out: bool = typer.Option(False, "--json", help="Print the movement as JSON."),
) -> None:
    """Take pieces of a part from a location; more than is there is an error and changes nothing."""
    from partsmatch.catalog.stock import take_stock

    m = take_stock(globals_of(ctx).engine(), part, location, _whole(qty, "QTY"), note=note)
    if json_out:
        emit_json(m.to_dict())
        return
    _changed("took", m)


@stock_app.command("move")
def stock_move(
    ctx: typer.Context,
    part: str = typer.Argument(..., help=PART_HELP),
    from_loc: str = typer.Argument(..., metavar="FROM", help="The location to take from."),
    to_loc: str = typer.Argument(..., metavar="TO", help="The location to put them."),
    qty: str = typer.Argument(..., metavar="QTY",
                             help="Number of pieces, a whole number above 0."),
    note: str = typer.Option(None, "--note", help=NOTE_HELP),
    json_out: bool = typer.Option(False, "--json", help="Print both movements as JSON."),
) -> None:
    """Move pieces of a part from one location to another, as one change."""
    from partsmatch.catalog.stock import move_stock

    mv = move_stock(globals_of(ctx).engine(), part, from_loc, to_loc, _whole(qty, "QTY"),
                    note=note)
    if json_out:
        emit_json(mv.to_dict())
        return
    typer.echo(f"moved {mv.added.delta} x {mv.added.part} from {mv.taken.location} "
               f"(now {mv.taken.quantity_after}) to {mv.added.location} "
               f"(now {mv.added.quantity_after})")


@stock_app.command("list")
def stock_list(
    ctx: typer.Context,
    part: str = typer.Argument(None, help=PART_HELP + " Default: every part."),
    location: str = typer.Option(None, "--location", help="Only this location."),
    kind: str = typer.Option(None, "--kind", help="capacitor, diode, fuse or resistor."),
    json_out: bool = typer.Option(False, "--json", help="Print as JSON."),
) -> None:
    """List stock lines (part, location, quantity, unit cost), empty lines included."""
    from partsmatch.catalog.stock import list_stock

    lines = list_stock(globals_of(ctx).engine(), part, location=location, kind=kind)
    if json_out:
        emit_json([s.to_dict() for s in lines])
        return
    print_table(["maker", "part", "kind", "location", "qty", "unit cost"],
                [[s.maker, s.part_number, s.kind, s.location, str(s.quantity),
                  _cost(s.unit_cost)] for s in lines])


@stock_app.command("history")
def stock_history(
    ctx: typer.Context,
    part: str = typer.Argument(None, help=PART_HELP + " Default: every part."),
    limit: str = typer.Option("50", "--limit", metavar="N",
                             help="At most this many movements."),
    json_out: bool = typer.Option(False, "--json", help="Print as JSON."),
) -> None:
    """Show stock movements, newest first (time in UTC)."""
    from partsmatch.catalog.stock import movements

    rows = movements(globals_of(ctx).engine(), part, limit=_whole(limit, "--limit"))
    if json_out:
        emit_json([m.to_dict() for m in rows])
        return
    print_table(["time (UTC)", "maker", "part", "location", "change", "after", "note"],
                [[_when(m.at), m.maker, m.part_number, m.location, f"{m.delta:+d}",
                  str(m.quantity_after), m.note or ""] for m in rows])


@xref_app.command("add")
def xref_add(
    ctx: typer.Context,
    part_a: str = typer.Argument(..., help="The part to be replaced: " + PART_HELP),
    part_b: str = typer.Argument(..., help="The part verified to replace it: " + PART_HELP),
    relation: str = typer.Option("equivalent", "--relation",
                                 help="equivalent (either way) or replaces (PART_B for PART_A)."),
    note: str = typer.Option(None, "--note", help="How it was verified, by whom."),
    json_out: bool = typer.Option(False, "--json", help="Print the record as JSON."),
) -> None:
    """Record that the shop has verified that PART_B may replace PART_A (dated)."""
    from partsmatch.catalog.stock import add_crossref

    x = add_crossref(globals_of(ctx).engine(), part_a, part_b, relation=relation, note=note)
    if json_out:
        emit_json(x.to_dict())
        return
    typer.echo(f"recorded {x.part_a} {x.relation} {x.part_b} on {x.recorded_at:%Y-%m-%d}")


@xref_app.command("list")
def xref_list(
    ctx: typer.Context,
    part: str = typer.Argument(None, help=PART_HELP + " Default: every cross-reference."),
    json_out: bool = typer.Option(False, "--json", help="Print as JSON."),
) -> None:
    """List verified cross-references; with PART, those naming it on either side."""
    from partsmatch.catalog.stock import list_crossrefs

    rows = list_crossrefs(globals_of(ctx).engine(), part)
    if json_out:
        emit_json([x.to_dict() for x in rows])
        return
    print_table(["part", "relation", "replacement", "recorded", "note"],
                [[x.part_a, x.relation, x.part_b, f"{x.recorded_at:%Y-%m-%d}", x.note or ""]
                 for x in rows])


def register(app: typer.Typer) -> None:
    app.add_typer(stock_app, name="stock")
    app.add_typer(xref_app, name="xref")
