"""One exception tree for the whole library.

Every error carries structured fields (file, line, column, key, value) and builds a one-line
message from them. The CLI maps the classes to exit codes in one place (``exit_code``):
2 bad input, 3 database problem. Library code never prints or exits.
"""

from __future__ import annotations


class PartsmatchError(Exception):
    """Base of every error partsmatch raises on purpose."""

    exit_code = 2

    def __init__(
        self,
        message: str,
        *,
        file: str | None = None,
        line: int | None = None,
        column: str | None = None,
        key: str | None = None,
        value: object = None,
    ) -> None:
        self.message = message
        self.file = file
        self.line = line
        self.column = column
        self.key = key
        self.value = value
        super().__init__(self.one_line())

    def one_line(self) -> str:
        """``FILE:LINE: column 'X': why`` with the parts that are known, on one line."""
        where = ""
        if self.file is not None:
            where = f"{self.file}:{self.line}: " if self.line is not None else f"{self.file}: "
        if self.column is not None:
            where += f"column '{self.column}': "
        if self.key is not None:
            where += f"key '{self.key}': "
        text = f"{where}{self.message}"
        return " ".join(text.split())  # never more than one line

    def located(self, *, file: str | None = None, line: int | None = None,
                column: str | None = None, key: str | None = None) -> "PartsmatchError":
        """Fill in location fields that are still unknown and rebuild the message."""
        self.file = self.file if self.file is not None else file
        self.line = self.line if self.line is not None else line
        self.column = self.column if self.column is not None else column
        self.key = self.key if self.key is not None else key
        self.args = (self.one_line(),)
        return self

    def __str__(self) -> str:
        return self.one_line()


def short_message(exc: BaseException) -> str:
    """A database driver's message on one line (at most 200 characters), for the errors above:
    the driver's own exception where a wrapper carries one (``.orig``), else ``exc`` itself."""
    return " ".join(str(getattr(exc, "orig", None) or exc).split())[:200]


class InputError(PartsmatchError, ValueError):
    """Bad input: a file, option or value the user gave (exit 2)."""


class UnitError(InputError):
    """A quantity that cannot be read, or has the wrong dimension."""


class CircuitError(InputError):
    """A circuit file that breaks the circuit contract."""


class PolicyError(InputError):
    """A policy file with an unknown key or a bad value."""


class PartNotFound(PartsmatchError, LookupError):
    """No part (or more than one) matches a name given by the user (exit 2)."""


class StockError(InputError):
    """A stock change that would make a quantity negative, or names no stock row."""


class SimulationError(PartsmatchError, RuntimeError):
    """The circuit solver could not reach a verified steady state."""


class DatabaseError(PartsmatchError):
    """The database cannot be opened or used (exit 3)."""

    exit_code = 3


class SchemaOutdated(DatabaseError):
    """The database schema is behind the code's migrations (exit 3)."""
