"""Find the data and migrations folders, installed or in a source checkout.

A wheel carries the top-level ``data/`` and ``migrations/`` folders inside the package as
``partsmatch/_data`` and ``partsmatch/_migrations`` (hatchling force-include, see pyproject.toml);
a source checkout or editable install finds them beside the package.
"""

from __future__ import annotations

from pathlib import Path

_PKG = Path(__file__).resolve().parent


def _folder(installed: str, top: str) -> Path:
    inside = _PKG / installed
    if inside.is_dir():
        return inside
    return _PKG.parent / top


def data_path(*parts: str) -> Path:
    """Path of a file under the shipped ``data/`` folder (demo catalog, circuits, policy)."""
    return _folder("_data", "data").joinpath(*parts)


def migrations_path() -> Path:
    """Path of the Alembic ``migrations/`` folder."""
    return _folder("_migrations", "migrations")
