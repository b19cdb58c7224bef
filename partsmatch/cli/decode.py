"""``partsmatch decode TEXT [--json]``: read a printed marking (capacitor code, RKM code,
rated voltage, IEC 60127 fuse marking) into ratings. The reading is done by
:mod:`partsmatch.markings`; this module only parses arguments and prints."""

from __future__ import annotations

import typer


def register(app: typer.Typer) -> None:
    """Add the ``decode`` command to ``app``."""

    @app.command("decode")
    def decode_command(
        text: list[str] = typer.Argument(..., metavar="TEXT",
                                         help="A marking as printed, e.g. 105J, 2n2, 4K7, "
                                         "2100VAC, T3.15AL250V (several words are read as one "
                                         "marking, or else word by word)."),
        as_json: bool = typer.Option(False, "--json", help="Print the readings as a JSON list."),
    ) -> None:
        """Read a printed marking into ratings, with every reading of an ambiguous one."""
        from partsmatch.cli.common import emit_json
        from partsmatch.markings import decode_text

        readings, unread = decode_text(" ".join(text))
        if unread:
            typer.echo(f"not read: {' '.join(unread)}", err=True)
        if as_json:
            emit_json([r.as_dict() for r in readings])
            return
        _print_readings(readings)


def _print_readings(readings) -> None:
    from partsmatch.markings import describe_values

    last_text = None
    for r in readings:
        if r.text != last_text:
            typer.echo(r.text)
            last_text = r.text
        shown = describe_values(r.values)
        typer.echo(f"  {shown}" if shown.startswith(r.kind) else f"  {r.kind}: {shown}")
        typer.echo(f"    {r.note}")
