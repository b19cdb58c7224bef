"""What every command group shares: the global options, JSON output and error exits.

Command modules define ``register(app)`` and import heavy modules (numpy, pint, the solver) only
inside their command functions, so that ``partsmatch --help`` stays fast.
"""

from __future__ import annotations

import json
import math
import sys
from dataclasses import dataclass, field
from typing import Any

import typer


_OPEN: list["Globals"] = []


def close_all() -> None:
    """Close every engine the commands of this run opened."""
    while _OPEN:
        _OPEN.pop().close()


@dataclass
class Globals:
    """Global options, kept on the Typer context object."""

    db: str | None = None
    policy: str | None = None
    debug: bool = False
    _engine: Any = field(default=None, repr=False)

    def __post_init__(self) -> None:
        _OPEN.append(self)

    def close(self) -> None:
        """Dispose of the engine (closes pooled connections)."""
        if self._engine is not None:
            self._engine.dispose()
            self._engine = None

    def engine(self, *, check_schema: bool = True):
        """The database engine for ``--db`` / ``PARTSMATCH_DB`` / the default file."""
        if self._engine is None:
            from partsmatch.catalog import db

            self._engine = db.make_engine(db.resolve_url(self.db))
        if check_schema:
            from partsmatch.catalog import db

            db.require_current(self._engine)
        return self._engine

    def load_policy(self):
        from partsmatch.catalog.db import user_data_dir
        from partsmatch.rules.policy import load_policy

        return load_policy(self.policy, data_dir=user_data_dir())


def globals_of(ctx: typer.Context) -> Globals:
    """The :class:`Globals` of the running command (found on the root context)."""
    root = ctx.find_root()
    if not isinstance(root.obj, Globals):
        root.obj = Globals()
    return root.obj


def _clean(obj: Any) -> Any:
    """JSON-safe copy: NaN and infinities become null."""
    if isinstance(obj, float):
        return obj if math.isfinite(obj) else None
    if isinstance(obj, dict):
        return {str(k): _clean(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple)):
        return [_clean(v) for v in obj]
    return obj


def emit_json(obj: Any) -> None:
    """Print ``obj`` as indented JSON on stdout."""
    sys.stdout.write(json.dumps(_clean(obj), indent=2, ensure_ascii=False, default=str) + "\n")


def print_table(headers: list[str], rows: list[list[str]]) -> None:
    """A plain aligned text table (no colour codes, so it pipes cleanly)."""
    widths = [len(h) for h in headers]
    for row in rows:
        for i, cell in enumerate(row):
            widths[i] = max(widths[i], len(str(cell)))
    line = "  ".join(h.ljust(w) for h, w in zip(headers, widths))
    typer.echo(line.rstrip())
    typer.echo("  ".join("-" * w for w in widths))
    for row in rows:
        typer.echo("  ".join(str(c).ljust(w) for c, w in zip(row, widths)).rstrip())
