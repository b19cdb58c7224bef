"""Database location, engine, sessions and schema state.

Location: ``--db URL`` > ``PARTSMATCH_DB`` > a SQLite file in the user data directory
(platformdirs). SQLite is opened with WAL, foreign keys on and a busy timeout, so that several
processes (benches) can share one file; PostgreSQL URLs (``postgresql+psycopg://...``) use the
same models and migrations.
"""

from __future__ import annotations

import os
import re
from contextlib import contextmanager
from pathlib import Path
from typing import TYPE_CHECKING, Iterator

from sqlalchemy import Engine, create_engine, event, inspect, text
from sqlalchemy.exc import SQLAlchemyError

from partsmatch._resources import migrations_path
from partsmatch.errors import DatabaseError, SchemaOutdated, short_message

if TYPE_CHECKING:
    from sqlalchemy.orm import Session

BUSY_TIMEOUT_MS = 30_000


def user_data_dir() -> Path:
    """The per-user data directory (catalog file, shop policy)."""
    from platformdirs import user_data_dir as _udd

    return Path(_udd("partsmatch", appauthor=False))


def resolve_url(cli_url: str | None = None) -> str:
    """``--db`` beats ``PARTSMATCH_DB`` beats the default SQLite file."""
    if cli_url:
        return cli_url
    env = os.environ.get("PARTSMATCH_DB")
    if env:
        return env
    folder = user_data_dir()
    folder.mkdir(parents=True, exist_ok=True)
    return f"sqlite:///{folder / 'catalog.db'}"


def _sqlite_pragmas(dbapi_connection, _record) -> None:
    # Let SQLAlchemy, not the driver, issue BEGIN, so that DDL and DML share one transaction
    # (SQLAlchemy docs, "Serializable isolation / Savepoints / Transactional DDL" for pysqlite).
    dbapi_connection.isolation_level = None
    cur = dbapi_connection.cursor()
    cur.execute("PRAGMA foreign_keys = ON")
    cur.execute(f"PRAGMA busy_timeout = {BUSY_TIMEOUT_MS}")
    cur.execute("PRAGMA journal_mode = WAL")
    cur.execute("PRAGMA synchronous = NORMAL")
    cur.close()


def make_engine(url: str) -> Engine:
    """An engine for ``url``; a SQLite file's folder is created if missing."""
    try:
        if url.startswith("sqlite"):
            path = url.split("///", 1)[1] if "///" in url else ""
            if path and path != ":memory:" and not path.startswith("file:"):
                Path(path).parent.mkdir(parents=True, exist_ok=True)
            engine = create_engine(url, connect_args={"timeout": BUSY_TIMEOUT_MS / 1000})
            event.listen(engine, "connect", _sqlite_pragmas)

            @event.listens_for(engine, "begin")
            def _begin(conn):  # noqa: ANN001 - SQLAlchemy event signature
                conn.exec_driver_sql("BEGIN")

        else:
            engine = create_engine(url, pool_pre_ping=True)
    except (SQLAlchemyError, ValueError, OSError, ImportError) as exc:
        raise DatabaseError(f"cannot open database {redact(url)}: {exc}") from None
    return engine


def redact(url: str) -> str:
    """The URL with any password hidden, for messages."""
    try:
        from sqlalchemy.engine import make_url

        return make_url(url).render_as_string(hide_password=True)
    except Exception:  # noqa: BLE001 - best effort for a message
        return "<database>"


@contextmanager
def session_scope(engine: Engine) -> Iterator[Session]:
    """One transaction: committed on success, rolled back on any error."""
    from sqlalchemy.orm import Session  # the ORM only where a command writes

    session = Session(engine, expire_on_commit=False)
    try:
        yield session
        session.commit()
    except BaseException:
        session.rollback()
        raise
    finally:
        session.close()


# ---------------------------------------------------------------- migrations
def alembic_config(engine: Engine):
    """An Alembic Config pointing at the shipped migrations, bound to ``engine``."""
    from alembic.config import Config

    cfg = Config()
    cfg.set_main_option("script_location", str(migrations_path()))
    cfg.set_main_option("sqlalchemy.url", engine.url.render_as_string(hide_password=False)
                        .replace("%", "%%"))
    cfg.attributes["engine"] = engine
    return cfg


_REV = re.compile(r"^(revision|down_revision)\s*=\s*['\"]?([^'\"\s]*)['\"]?", re.MULTILINE)


def head_revision(engine: Engine | None = None) -> str:
    """The newest revision of the shipped migrations.

    Read from the revision files' ``revision`` / ``down_revision`` lines rather than through
    Alembic, whose import costs more than the rest of a command's start-up; a history that is
    not a single line (a branch) is left to Alembic.
    """
    revs: dict[str, str | None] = {}
    for path in (migrations_path() / "versions").glob("*.py"):
        found = dict(m.groups() for m in _REV.finditer(path.read_text(encoding="utf-8")))
        if "revision" in found:
            down = found.get("down_revision")
            revs[found["revision"]] = None if down in (None, "", "None") else down
    heads = set(revs) - {d for d in revs.values() if d}
    if len(heads) == 1:
        return heads.pop()
    from alembic.script import ScriptDirectory  # pragma: no cover - branched history

    return ScriptDirectory.from_config(alembic_config(engine)).get_current_head()


def current_revision(engine: Engine) -> str | None:
    """The schema revision stored in the database, None for a database without one."""
    try:
        with engine.connect() as conn:
            if not inspect(conn).has_table("alembic_version"):
                return None
            row = conn.execute(text("SELECT version_num FROM alembic_version")).first()
            return row[0] if row else None
    except SQLAlchemyError as exc:
        raise DatabaseError(f"cannot open database {redact(str(engine.url))}: "
                            f"{short_message(exc)}") from None


def upgrade(engine: Engine, revision: str = "head") -> None:
    from alembic import command

    try:
        command.upgrade(alembic_config(engine), revision)
    except SQLAlchemyError as exc:
        raise DatabaseError(f"upgrade failed: {short_message(exc)}") from None


def downgrade(engine: Engine, revision: str) -> None:
    from alembic import command

    try:
        command.downgrade(alembic_config(engine), revision)
    except SQLAlchemyError as exc:
        raise DatabaseError(f"downgrade failed: {short_message(exc)}") from None


def status(engine: Engine) -> dict[str, str | None | bool]:
    cur, head = current_revision(engine), head_revision(engine)
    return {"url": redact(str(engine.url)), "current": cur, "head": head, "up_to_date": cur == head}


def require_current(engine: Engine) -> None:
    """Raise SchemaOutdated (exit 3) unless the database schema is at the code's head."""
    cur = current_revision(engine)
    if cur is None:
        raise SchemaOutdated(
            f"database {redact(str(engine.url))} has no partsmatch schema: "
            "run `partsmatch init` (new catalog) or `partsmatch db upgrade`")
    head = head_revision(engine)
    if cur != head:
        raise SchemaOutdated(
            f"database schema is at revision {cur}, the code needs {head}: "
            "run `partsmatch db upgrade`")


def init(engine: Engine) -> str:
    """Create a brand-new database at head (or upgrade an existing one); return the revision."""
    upgrade(engine, "head")
    return head_revision(engine)
