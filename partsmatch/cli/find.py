"""``partsmatch find QUERY [--kind K] [--in-stock] [--limit N] [--json]``: look parts up by a
part number as read off a board, a marking, ratings, a maker or description words. The lookup
is :func:`partsmatch.catalog.search.find`; this module only parses arguments and prints."""

from __future__ import annotations

import typer


def register(app: typer.Typer) -> None:
    """Add the ``find`` command to ``app``."""

    @app.command("find")
    def find_command(
        ctx: typer.Context,
        query: list[str] = typer.Argument(
            ..., metavar="QUERY",
            help="A part number (worn print, any case or separators), a marking (105J, "
            "T 2A 250V), ratings (0.95uF 2100VAC 3%, 12 kV 350 mA diode), a maker or "
            "words of a description. Several words are one query."),
        kind: str = typer.Option(None, "--kind",
                                 help="Only this kind: capacitor, diode, fuse or resistor."),
        in_stock: bool = typer.Option(False, "--in-stock",
                                      help="Only parts with stock on a shelf."),
        limit: int = typer.Option(20, "--limit", help="At most this many hits (1-1000)."),
        as_json: bool = typer.Option(False, "--json",
                                     help="Print the hits as a JSON list (part, score, "
                                     "matched, how)."),
    ) -> None:
        """Find catalog parts by part number, marking, ratings or text, with why each matched
        and where it is stocked."""
        from partsmatch.catalog.search import find
        from partsmatch.cli.common import emit_json, globals_of

        # a Core connection: the lookup needs no ORM, and leaving it out saves about a
        # quarter of the command's start-up
        with globals_of(ctx).engine().connect() as conn:
            hits = find(conn, " ".join(query), kind=kind, in_stock=in_stock, limit=limit)
        if as_json:
            emit_json([h.to_dict() for h in hits])
            return
        if not hits:
            typer.echo("no parts found")
            return
        _print_hits(hits)


def _print_hits(hits) -> None:
    from partsmatch.cli.catalog import _summary
    from partsmatch.cli.common import print_table

    rows = []
    for h in hits:
        p = h.part
        where = ", ".join(f"{s.location} x{s.quantity}" for s in p.stock if s.quantity > 0)
        rows.append([f"{h.score:.1f}", p.maker, p.part_number, p.kind, _summary(p),
                     "; ".join(h.matched), str(p.in_stock), where or "-"])
    print_table(["score", "maker", "part", "kind", "ratings", "why", "stock", "locations"], rows)
