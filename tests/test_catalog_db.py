"""Schema, migrations and constraints on real SQLite and PostgreSQL databases."""

from __future__ import annotations

import pytest
from sqlalchemy import insert, select, text
from sqlalchemy.exc import IntegrityError

from partsmatch.catalog import db
from partsmatch.catalog.models import Part, Stock
from partsmatch.errors import SchemaOutdated


def _part(**kw):
    base = dict(kind="capacitor", maker="Test Maker", part_number="T-1", pn_norm="T1")
    base.update(kw)
    return base


def test_migration_round_trip_keeps_rows(db_url):
    engine = db.make_engine(db_url)
    db.upgrade(engine, "head")
    with engine.begin() as conn:
        conn.execute(insert(Part), [_part(capacitance=9.5e-7, voltage_ac=2100.0)])
        pid = conn.scalar(select(Part.id))
        conn.execute(insert(Stock), [dict(part_id=pid, location="A1-01", quantity=3)])
    db.downgrade(engine, "0001_baseline")
    assert db.current_revision(engine) == "0001_baseline"
    with engine.connect() as conn:
        assert conn.execute(text("SELECT capacitance, voltage_ac FROM parts")).all() == \
            [(9.5e-7, 2100.0)]
    db.upgrade(engine, "head")
    assert db.status(engine)["up_to_date"]
    with engine.connect() as conn:
        assert conn.execute(select(Part.capacitance, Part.voltage_ac)).all() == [(9.5e-7, 2100.0)]
        assert conn.execute(select(Stock.quantity)).scalar() == 3
    engine.dispose()


@pytest.mark.parametrize("values", [
    dict(kind="transistor"),                       # kind outside the closed set
    dict(capacitance=-1e-6),                       # negative rating
    dict(vrrm=-5.0),
    dict(tolerance_minus=150.0),                   # tolerance 0-100 %
    dict(characteristic="X"),                      # IEC 60127-1 letters only
    dict(kind="fuse", fuse_standard="IEC 60127"),  # an IEC 60127 fuse needs its letter
])
def test_constraints_rejected_by_database(engine, values):
    with pytest.raises(IntegrityError):
        with engine.begin() as conn:
            conn.execute(insert(Part), [_part(**values)])


def test_stock_quantity_never_negative_in_database(engine):
    with engine.begin() as conn:
        conn.execute(insert(Part), [_part()])
        pid = conn.scalar(select(Part.id))
    with pytest.raises(IntegrityError):
        with engine.begin() as conn:
            conn.execute(insert(Stock), [dict(part_id=pid, location="A", quantity=-1)])


def test_unique_maker_part_number(engine):
    with engine.begin() as conn:
        conn.execute(insert(Part), [_part()])
    with pytest.raises(IntegrityError):
        with engine.begin() as conn:
            conn.execute(insert(Part), [_part()])


def test_outdated_schema_is_refused(db_url, cli):
    engine = db.make_engine(db_url)
    db.upgrade(engine, "0001_baseline")
    with pytest.raises(SchemaOutdated) as exc:
        db.require_current(engine)
    assert "partsmatch db upgrade" in str(exc.value)
    engine.dispose()
    code, out, err = cli("--db", db_url, "parts", "list")
    assert code == 3
    assert "partsmatch db upgrade" in err and "Traceback" not in err
    code, out, err = cli("--db", db_url, "db", "upgrade")
    assert code == 0
    code, out, err = cli("--db", db_url, "parts", "list")
    assert code == 0


def test_empty_database_names_init(sqlite_url, cli):
    code, out, err = cli("--db", sqlite_url, "parts", "list")
    assert code == 3 and "partsmatch init" in err


def test_sqlite_pragmas(sqlite_url):
    engine = db.make_engine(sqlite_url)
    with engine.connect() as conn:
        assert conn.exec_driver_sql("PRAGMA journal_mode").scalar() == "wal"
        assert conn.exec_driver_sql("PRAGMA foreign_keys").scalar() == 1
        assert conn.exec_driver_sql("PRAGMA busy_timeout").scalar() == db.BUSY_TIMEOUT_MS
    engine.dispose()


def test_url_precedence(monkeypatch, tmp_path):
    monkeypatch.setenv("PARTSMATCH_DB", "sqlite:///env.db")
    assert db.resolve_url("sqlite:///cli.db") == "sqlite:///cli.db"
    assert db.resolve_url(None) == "sqlite:///env.db"
    monkeypatch.delenv("PARTSMATCH_DB")
    monkeypatch.setenv("XDG_DATA_HOME", str(tmp_path))
    assert db.resolve_url(None).endswith("catalog.db")


def test_fast_head_revision_agrees_with_alembic(sqlite_url):
    from alembic.script import ScriptDirectory

    engine = db.make_engine(sqlite_url)
    alembic_head = ScriptDirectory.from_config(db.alembic_config(engine)).get_current_head()
    assert db.head_revision(engine) == alembic_head
    engine.dispose()
