"""Alembic environment for cutbook stores.

cutbook runs migrations itself when a store is opened (workspace.store.db.migrate),
passing an open connection that already holds the write lock, with foreign keys
off. For developers, ``alembic -c migrations/alembic.ini -x store=PATH upgrade head``
works too.
"""

from __future__ import annotations

from alembic import context

from workspace.store.schema import Base

config = context.config
target_metadata = Base.metadata


def _run(connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        render_as_batch=True,  # SQLite cannot ALTER most things; rebuild tables in batch mode
        compare_type=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _run(connection)
        return
    from workspace.store.db import _make_engine, resolve_store_url

    store = context.get_x_argument(as_dictionary=True).get("store")
    engine = _make_engine(resolve_store_url(store), foreign_keys=False)
    try:
        with engine.connect() as conn:
            _run(conn)
            conn.commit()
    finally:
        engine.dispose()


def run_migrations_offline() -> None:
    context.configure(url="sqlite://", target_metadata=target_metadata, literal_binds=True,
                      render_as_batch=True)
    with context.begin_transaction():
        context.run_migrations()


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
