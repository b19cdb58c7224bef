"""Entry point: global options, command groups, and the one place errors become exit codes.

Exit codes (DESIGN.md section 4): 0 success, 1 the command found a problem the user asked about,
2 bad input, 3 database problem; 70 an internal error. No traceback unless ``--debug``.
"""

from __future__ import annotations

import importlib
import sys

import typer

from partsmatch import __version__
from partsmatch.cli.common import Globals, close_all
from partsmatch.errors import PartsmatchError

app = typer.Typer(
    name="partsmatch",
    help="Find and check substitutes for high-voltage capacitors, diodes and fuses "
    "against the stress they see in their circuit.",
    no_args_is_help=True,
    add_completion=False,
    pretty_exceptions_enable=False,
    rich_markup_mode=None,
)

#: Exit code of an internal error (a bug): outside the 0-3 contract so that no script reads it
#: as a verdict (EX_SOFTWARE of BSD sysexits.h).
INTERNAL_ERROR = 70

#: Command modules under partsmatch.cli; each defines register(app).
GROUPS = ("catalog", "decode", "find", "stock", "stress", "substitute")


def _version(value: bool) -> None:
    if value:
        typer.echo(f"partsmatch {__version__}")
        raise typer.Exit()


@app.callback()
def main(
    ctx: typer.Context,
    db: str = typer.Option(None, "--db", help="Database URL (default: PARTSMATCH_DB, then a "
                           "SQLite file in the user data directory)."),
    policy: str = typer.Option(None, "--policy", help="Shop policy TOML overriding the defaults."),
    debug: bool = typer.Option(False, "--debug", help="Show tracebacks."),
    version: bool = typer.Option(False, "--version", callback=_version, is_eager=True,
                                 help="Print the version and exit."),
) -> None:
    """Find and check substitutes for high-voltage capacitors, diodes and fuses."""
    ctx.obj = Globals(db=db, policy=policy, debug=debug)


for _name in GROUPS:
    try:
        _mod = importlib.import_module(f"partsmatch.cli.{_name}")
    except ModuleNotFoundError as _exc:  # a group still being written
        if _exc.name != f"partsmatch.cli.{_name}":
            raise
        continue
    _mod.register(app)


def run(argv: list[str] | None = None) -> int:
    """Console-script entry: run the app and map errors to exit codes."""
    args = sys.argv[1:] if argv is None else argv
    debug = "--debug" in args
    try:
        # without standalone mode click returns (does not raise) the code of a typer.Exit
        code = app(args=args, prog_name="partsmatch", standalone_mode=False)
        if isinstance(code, int) and code:
            return code
    except PartsmatchError as exc:
        if debug:
            raise
        typer.echo(f"error: {exc.one_line()}", err=True)
        return exc.exit_code
    except typer.Exit as exc:
        return exc.exit_code
    except typer.Abort:
        typer.echo("aborted", err=True)
        return 130
    except KeyboardInterrupt:
        typer.echo("interrupted", err=True)
        return 130
    except Exception as exc:  # click usage errors and the like
        # typer may carry its own copy of click, so recognise click's exceptions by shape
        fmt = getattr(exc, "format_message", None)
        if callable(fmt) and isinstance(getattr(exc, "exit_code", None), int):
            typer.echo(f"error: {' '.join(str(fmt()).split())}", err=True)
            return exc.exit_code
        if debug:
            raise
        typer.echo(f"error: unexpected {type(exc).__name__}: {' '.join(str(exc).split())} "
                   "(run with --debug for details)", err=True)
        return INTERNAL_ERROR
    finally:
        close_all()
    return 0


def entry() -> None:
    """The ``partsmatch`` console script."""
    sys.exit(run())


if __name__ == "__main__":  # pragma: no cover
    entry()
