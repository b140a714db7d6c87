"""Alembic environment of the store: run the migrations on the connection given by the caller.

:func:`acquire.store.migrate.ensure_schema` puts an open connection, already inside its
transaction (and holding the creation lock), in ``config.attributes["connection"]``; the
migrations join that transaction, so a failure leaves the store as it was.
"""

from alembic import context

connection = context.config.attributes.get("connection")
if connection is None:
    raise RuntimeError(
        "the store's migrations run through acquire.store.open_store (or with a connection in "
        "config.attributes['connection']), not from a database URL"
    )
context.configure(connection=connection)
with context.begin_transaction():
    context.run_migrations()
