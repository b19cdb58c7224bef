"""Start-up stays light: importing partsmatch or asking for --help pulls no heavy module."""

from __future__ import annotations

import subprocess
import sys

import pytest

HEAVY = ("numpy", "scipy", "matplotlib", "pint")


@pytest.mark.parametrize("code", [
    "import partsmatch",
    "from partsmatch.cli.main import run; run(['--help'])",
    "from partsmatch.cli.main import run; run(['parts', '--help'])",
])
def test_no_heavy_imports(code):
    probe = (f"{code}\nimport sys\n"
             f"print('HEAVY:' + ','.join(m for m in {HEAVY!r} if m in sys.modules))")
    out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True, check=True)
    assert out.stdout.splitlines()[-1] == "HEAVY:", out.stdout


def _commands(group, prefix=()):

    for name, cmd in group.commands.items():
        yield (*prefix, name), cmd
        if hasattr(cmd, "commands"):
            yield from _commands(cmd, (*prefix, name))


def test_every_command_has_help_text():
    import typer.main

    from partsmatch.cli.main import app

    root = typer.main.get_command(app)
    missing = [" ".join(path) for path, cmd in _commands(root) if not (cmd.help or "").strip()]
    assert missing == []


def test_every_table_command_offers_json():
    """A command that prints a table also offers --json (brief: every table command)."""
    import typer.main

    from partsmatch.cli.main import app

    root = typer.main.get_command(app)
    exempt = {("parts", "export"), ("parts", "import"), ("db", "upgrade")}
    lacking = []
    for path, cmd in _commands(root):
        if hasattr(cmd, "commands") or path in exempt:
            continue
        if path[-1] in ("add", "take", "move", "upgrade"):
            continue
        if not any("--json" in p.opts for p in cmd.params):
            lacking.append(" ".join(path))
    assert lacking == []


def test_find_runs_without_the_orm(tmp_path):
    """``partsmatch find`` reads through Core tables: it neither imports the ORM (about a
    quarter of its start-up) nor the heavy modules, on a real catalog with a spec-style and a
    part-number query (the part-number query loads rapidfuzz, which is light)."""
    url = f"sqlite:///{tmp_path / 'c.db'}"
    from partsmatch.cli.main import run

    assert run(["--db", url, "init", "--demo"]) == 0
    for query in ("0.95uF 2100VAC", "hvr-1o2"):
        probe = ("import sys\nfrom partsmatch.cli.main import run\n"
                 f"code = run(['--db', {url!r}, 'find', {query!r}])\n"
                 "print('CODE:', code)\n"
                 f"print('LOADED:' + ','.join(m for m in {('sqlalchemy.orm', *HEAVY)!r} "
                 "if m in sys.modules))")
        out = subprocess.run([sys.executable, "-c", probe], capture_output=True, text=True,
                             check=True)
        lines = out.stdout.splitlines()
        assert lines[-2] == "CODE: 0" and lines[-1] == "LOADED:", out.stdout[-2000:]
