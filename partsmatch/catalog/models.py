"""ORM classes over the catalog tables of :mod:`partsmatch.catalog.tables`.

The code that writes (stock, cross-references, repairs, saved circuits, import updates) works
with these classes; the lookups query the Core tables and need no ORM. Every column, constraint
and index is declared once, in ``tables.py``; the names below are re-exported from there.
Schema changes go through Alembic revisions in ``migrations/`` only.
"""

from __future__ import annotations

from sqlalchemy.orm import DeclarativeBase, relationship

from partsmatch.catalog import tables
from partsmatch.catalog.tables import utcnow  # noqa: F401  (re-exported for the writers)
from partsmatch.catalog.vocab import KINDS, RATING_UNITS  # noqa: F401  (re-exported)


class Base(DeclarativeBase):
    metadata = tables.metadata


class Part(Base):
    __table__ = tables.parts

    stock = relationship("Stock", back_populates="part", order_by="Stock.location")


class Stock(Base):
    __table__ = tables.stock

    part = relationship(Part, back_populates="stock")


class StockMovement(Base):
    """Every change of a stock quantity, kept for the shop's history."""

    __table__ = tables.stock_movements


class CrossRef(Base):
    """An equivalence the shop has verified (part_a may be replaced by part_b)."""

    __table__ = tables.crossrefs


class SavedCircuit(Base):
    """A circuit file saved by name, with the catalog parts of its slots."""

    __table__ = tables.circuits


class Repair(Base):
    """A substitution that was made, with the verdict it had at the time."""

    __table__ = tables.repairs
