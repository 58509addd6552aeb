"""Alembic environment of brayscope.

Run programmatically by :meth:`daemon.storage.Store.upgrade` (and ``brayscope db upgrade``),
which builds the :class:`alembic.config.Config` in code and passes an open connection in
``config.attributes["connection"]``; no ``alembic.ini`` is needed.  With only a
``sqlalchemy.url`` main option set, a connection is opened here.
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import context

from daemon.storage.schema import metadata

config = context.config


def _run(connection: sa.Connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=metadata,
        render_as_batch=connection.dialect.name == "sqlite",
        compare_type=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_offline() -> None:
    """Emit SQL to stdout (``alembic upgrade --sql``) instead of executing it."""
    context.configure(
        url=config.get_main_option("sqlalchemy.url"),
        target_metadata=metadata,
        literal_binds=True,
    )
    with context.begin_transaction():
        context.run_migrations()


def run_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _run(connection)
        return
    url = config.get_main_option("sqlalchemy.url")
    if not url:
        raise RuntimeError("no connection and no sqlalchemy.url given to the migrations")
    engine = sa.create_engine(url)
    try:
        with engine.begin() as conn:
            _run(conn)
    finally:
        engine.dispose()


if context.is_offline_mode():
    run_offline()
else:
    run_online()
