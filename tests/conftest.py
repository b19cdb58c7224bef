"""Shared fixtures: real databases (a SQLite file, and PostgreSQL when one is given).

PostgreSQL: set ``PARTSMATCH_TEST_PG`` to an admin URL (``postgresql+psycopg://user@host:port/db``);
``.ci/run`` starts a server and sets it. Each test gets a database of its own. Without the
variable the PostgreSQL cases are skipped, except under CI (``CI=true``), where they fail.
"""

from __future__ import annotations

import itertools
import os
import uuid
from contextlib import contextmanager

import pytest

PG_ENV = "PARTSMATCH_TEST_PG"
_counter = itertools.count()


def _pg_admin_url() -> str | None:
    url = os.environ.get(PG_ENV)
    if not url:
        if os.environ.get("CI") == "true":
            pytest.fail(f"{PG_ENV} is not set under CI: PostgreSQL tests must run", pytrace=False)
        pytest.skip(f"{PG_ENV} not set: PostgreSQL cases skipped (CI runs them)")
    return url


@pytest.fixture(scope="session")
def pg_admin():
    """An autocommit engine on the PostgreSQL admin database (session-wide)."""
    url = _pg_admin_url()
    from sqlalchemy import create_engine

    engine = create_engine(url, isolation_level="AUTOCOMMIT")
    yield engine
    engine.dispose()


def _new_pg_database(admin) -> tuple[str, str]:
    from sqlalchemy import text

    name = f"pm_test_{os.getpid()}_{next(_counter)}_{uuid.uuid4().hex[:6]}"
    with admin.connect() as conn:
        conn.execute(text(f'CREATE DATABASE "{name}"'))
    return name, admin.url.set(database=name).render_as_string(hide_password=False)


def _drop_pg_database(admin, name: str) -> None:
    from sqlalchemy import text

    with admin.connect() as conn:
        conn.execute(text(f'DROP DATABASE IF EXISTS "{name}" WITH (FORCE)'))


@contextmanager
def module_database(request, tmp_path_factory, label: str):
    """An engine on a new database at head, for module-scoped fixtures parametrised with
    ``sqlite`` / ``postgresql`` (the database is dropped afterwards)."""
    from partsmatch.catalog import db

    name = None
    if request.param == "sqlite":
        url = f"sqlite:///{tmp_path_factory.mktemp(label) / 'catalog.db'}"
    else:
        admin = request.getfixturevalue("pg_admin")
        name, url = _new_pg_database(admin)
    engine = db.make_engine(url)
    try:
        db.init(engine)
        yield engine
    finally:
        engine.dispose()
        if name:
            _drop_pg_database(request.getfixturevalue("pg_admin"), name)


@pytest.fixture(params=["sqlite", pytest.param("postgresql", marks=pytest.mark.pg)])
def db_url(request, tmp_path):
    """URL of an empty database on each backend."""
    if request.param == "sqlite":
        yield f"sqlite:///{tmp_path / 'catalog.db'}"
        return
    admin = request.getfixturevalue("pg_admin")
    name, url = _new_pg_database(admin)
    try:
        yield url
    finally:
        from sqlalchemy import create_engine  # noqa: F401  (keeps import local)

        _drop_pg_database(admin, name)


@pytest.fixture(scope="session")
def pg_template(pg_admin):
    """Name of a PostgreSQL database migrated to head once per session; tests copy it."""
    from partsmatch.catalog import db

    name, url = _new_pg_database(pg_admin)
    eng = db.make_engine(url)
    db.init(eng)
    eng.dispose()
    yield name
    _drop_pg_database(pg_admin, name)


@pytest.fixture
def engine(db_url, request):
    """An engine on a new database at the current schema (PostgreSQL: a copy of a template
    migrated once per session, which is much faster than migrating each database)."""
    from sqlalchemy import text
    from sqlalchemy.engine import make_url

    from partsmatch.catalog import db

    if db_url.startswith("postgresql"):
        admin = request.getfixturevalue("pg_admin")
        template = request.getfixturevalue("pg_template")
        name = make_url(db_url).database
        with admin.connect() as conn:
            conn.execute(text(f'DROP DATABASE "{name}"'))
            conn.execute(text(f'CREATE DATABASE "{name}" TEMPLATE "{template}"'))
        eng = db.make_engine(db_url)
    else:
        eng = db.make_engine(db_url)
        db.init(eng)
    yield eng
    eng.dispose()


@pytest.fixture
def demo_engine(engine):
    """A database holding the invented demo catalog."""
    from partsmatch.catalog.io import load_demo

    load_demo(engine)
    return engine


@pytest.fixture
def sqlite_url(tmp_path):
    return f"sqlite:///{tmp_path / 'catalog.db'}"


@pytest.fixture
def cli(capsys):
    """Run the CLI in process: ``code, out, err = cli("parts", "list")``."""
    from partsmatch.cli.main import run

    def _run(*args: str) -> tuple[int, str, str]:
        code = run([str(a) for a in args])
        captured = capsys.readouterr()
        return code, captured.out, captured.err

    return _run


def pytest_terminal_summary(terminalreporter):
    """Say how many PostgreSQL cases ran, so a CI log shows they were not skipped."""
    passed = [r for r in terminalreporter.stats.get("passed", []) if "postgresql" in r.nodeid]
    failed = [r for r in terminalreporter.stats.get("failed", []) if "postgresql" in r.nodeid]
    skipped = [r for r in terminalreporter.stats.get("skipped", []) if "postgresql" in r.nodeid]
    url = os.environ.get(PG_ENV)
    where = ""
    if url:
        from sqlalchemy.engine import make_url

        u = make_url(url)
        where = f" against {u.host}:{u.port}"
    terminalreporter.write_line(
        f"PostgreSQL cases{where}: {len(passed)} passed, {len(failed)} failed, "
        f"{len(skipped)} skipped")
