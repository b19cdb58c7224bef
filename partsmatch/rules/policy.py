"""Shop policy: every limit the stress model and the rules use, with its source.

Defaults live in ``data/policy.toml``: one table per value with ``value``, ``unit`` (a key of
:data:`partsmatch.units.UNITS`, or ``""`` for a plain factor), ``kind`` (``hard``: exceeding it
fails a candidate; ``margin``: inside it is a warning; ``setting``: a model input) and ``source``
(a standard clause, ``common practice, no source``, or ``from memory``).

A shop overrides values with its own TOML file: either ``name = 1.2`` / ``name = "45 degC"``,
or a table ``[name]`` with ``value`` and optionally ``source``. An unknown name is an error.
"""

from __future__ import annotations

import tomllib
from dataclasses import dataclass, replace
from pathlib import Path
from typing import Iterator, Literal

from partsmatch._resources import data_path
from partsmatch.errors import PolicyError, UnitError
from partsmatch.units import parse_quantity

LimitKind = Literal["hard", "margin", "setting"]
_KINDS = ("hard", "margin", "setting")


@dataclass(frozen=True)
class PolicyValue:
    name: str
    value: float
    unit: str
    kind: LimitKind
    source: str
    description: str
    origin: str  # the file the value came from

    @property
    def basis(self) -> str:
        """Text for a finding's ``basis``: the policy key and where its value came from."""
        return f"policy {self.name} = {self.value:g}{(' ' + self.unit) if self.unit else ''} ({self.source})"


class Policy:
    """The values in force. ``policy["safe_voltage"]`` is a float in SI units."""

    def __init__(self, values: dict[str, PolicyValue], files: list[str]) -> None:
        self._values = values
        self.files = files

    def __getitem__(self, name: str) -> float:
        return self._values[name].value

    def entry(self, name: str) -> PolicyValue:
        return self._values[name]

    def __iter__(self) -> Iterator[PolicyValue]:
        return iter(self._values.values())

    def __contains__(self, name: object) -> bool:
        return name in self._values

    @property
    def name(self) -> str:
        """A short label of the files in force, for verdict reports."""
        return " + ".join(Path(f).name for f in self.files)

    def as_dict(self) -> dict[str, dict[str, object]]:
        return {
            v.name: {"value": v.value, "unit": v.unit, "kind": v.kind, "source": v.source,
                     "description": v.description, "origin": v.origin}
            for v in self._values.values()
        }


def _read_toml(path: Path) -> dict:
    try:
        with open(path, "rb") as fh:
            return tomllib.load(fh)
    except OSError as exc:
        raise PolicyError(f"cannot read policy file: {exc.strerror}", file=str(path)) from None
    except tomllib.TOMLDecodeError as exc:
        raise PolicyError(f"not valid TOML: {exc}", file=str(path)) from None


def _number(raw: object, unit: str, path: Path, name: str) -> float:
    if unit:
        try:
            return parse_quantity(raw if isinstance(raw, (str, int, float)) else str(raw), unit,
                                  key=name)
        except UnitError as exc:
            raise exc.located(file=str(path)) from None
    if isinstance(raw, bool) or not isinstance(raw, (int, float)):
        raise PolicyError(f"expected a number, got {raw!r}", file=str(path), key=name, value=raw)
    return float(raw)


def _defaults() -> dict[str, PolicyValue]:
    path = data_path("policy.toml")
    out: dict[str, PolicyValue] = {}
    for name, table in _read_toml(path).items():
        kind = table.get("kind", "setting")
        if kind not in _KINDS:
            raise PolicyError(f"kind must be one of {_KINDS}", file=str(path), key=name)
        unit = table.get("unit", "")
        out[name] = PolicyValue(
            name=name, value=_number(table["value"], unit, path, name), unit=unit, kind=kind,
            source=table.get("source", "common practice, no source"),
            description=table.get("description", ""), origin="default",
        )
    return out


def load_policy(path: str | Path | None = None, data_dir: str | Path | None = None) -> Policy:
    """The default policy, overridden by ``policy.toml`` in ``data_dir`` and then by ``path``."""
    values = _defaults()
    files = [str(data_path("policy.toml"))]
    overrides: list[Path] = []
    if data_dir is not None and (Path(data_dir) / "policy.toml").is_file():
        overrides.append(Path(data_dir) / "policy.toml")
    if path is not None:
        overrides.append(Path(path))
    for file in overrides:
        for name, raw in _read_toml(file).items():
            if name not in values:
                raise PolicyError("unknown policy value", file=str(file), key=name)
            base = values[name]
            source = f"shop policy {file.name}"
            if isinstance(raw, dict):
                unknown = set(raw) - {"value", "source"}
                if unknown or "value" not in raw:
                    raise PolicyError("a policy table takes 'value' and an optional 'source'",
                                      file=str(file), key=name)
                source = str(raw.get("source", source))
                raw = raw["value"]
            values[name] = replace(base, value=_number(raw, base.unit, file, name), source=source,
                                   origin=str(file))
        files.append(str(file))
    return Policy(values, files)
