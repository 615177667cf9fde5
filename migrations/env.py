"""Alembic environment: migrations run on a connection handed over by :mod:`app.store.migrate`.

There is no alembic.ini: the configuration is built from the server's settings
in code, so the database URL always comes from one place. SQLite migrations run
in batch mode (copy-and-move tables), since SQLite cannot alter most constraints
in place.
"""

from __future__ import annotations

from alembic import context

from app.store.models import Base

connection = context.config.attributes["connection"]
context.configure(
    connection=connection,
    target_metadata=Base.metadata,
    render_as_batch=connection.dialect.name == "sqlite",
    compare_type=True,
)
with context.begin_transaction():
    context.run_migrations()
