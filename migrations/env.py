"""Alembic environment of partsmatch.

The engine comes from ``config.attributes["engine"]`` (set by partsmatch.catalog.db) or from the
``sqlalchemy.url`` option; SQLite uses batch mode so that ALTERs work there too.
"""

from alembic import context
from sqlalchemy import create_engine

from partsmatch.catalog.tables import metadata

config = context.config
target_metadata = metadata


def run_migrations_offline() -> None:
    context.configure(url=config.get_main_option("sqlalchemy.url"), target_metadata=target_metadata,
                      literal_binds=True, render_as_batch=True)
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    engine = config.attributes.get("engine") or create_engine(config.get_main_option("sqlalchemy.url"))
    with engine.connect() as connection:
        sqlite = connection.dialect.name == "sqlite"
        if sqlite:
            # Batch migrations re-create tables; with foreign keys on, dropping the old "parts"
            # table would cascade-delete its stock. Switch them off outside any transaction
            # (SQLite ignores this PRAGMA inside one) and check the keys afterwards.
            connection.connection.driver_connection.execute("PRAGMA foreign_keys = OFF")
        context.configure(connection=connection, target_metadata=target_metadata,
                          render_as_batch=connection.dialect.name == "sqlite",
                          transactional_ddl=True)
        with context.begin_transaction():
            context.run_migrations()
            if sqlite:
                bad = connection.exec_driver_sql("PRAGMA foreign_key_check").fetchall()
                if bad:
                    raise RuntimeError(f"foreign key check failed after migration: {bad[:3]}")
        connection.commit()
        if sqlite:
            connection.connection.driver_connection.execute("PRAGMA foreign_keys = ON")


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
