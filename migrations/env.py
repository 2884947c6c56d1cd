"""Alembic environment for the drawerfit store.

The store opens its own connection and hands it over in
``config.attributes["connection"]``; no alembic.ini is needed.  Run by hand
(``alembic -x url=sqlite:///stock.sqlite upgrade head`` with a config whose
``script_location`` is this folder) it connects to that URL instead.
"""

from __future__ import annotations

from alembic import context
from sqlalchemy import create_engine

from inventory.schema import Base

config = context.config
target_metadata = Base.metadata


def _run(connection) -> None:
    context.configure(
        connection=connection,
        target_metadata=target_metadata,
        render_as_batch=connection.dialect.name == "sqlite",
    )
    with context.begin_transaction():
        context.run_migrations()


def run_migrations_online() -> None:
    connection = config.attributes.get("connection")
    if connection is not None:
        _run(connection)
        return
    url = context.get_x_argument(as_dictionary=True).get("url") or config.get_main_option(
        "sqlalchemy.url")
    engine = create_engine(url)
    with engine.begin() as conn:
        _run(conn)
    engine.dispose()


def run_migrations_offline() -> None:
    context.configure(url=config.get_main_option("sqlalchemy.url"),
                      target_metadata=target_metadata, literal_binds=True)
    with context.begin_transaction():
        context.run_migrations()


if context.is_offline_mode():
    run_migrations_offline()
else:
    run_migrations_online()
