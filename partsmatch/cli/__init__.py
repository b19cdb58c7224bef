"""The command line: a thin Typer shell over the library (see partsmatch.cli.main)."""
