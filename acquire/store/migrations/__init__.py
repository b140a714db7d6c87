"""The store's schema migrations, as Alembic revisions run by :mod:`acquire.store.migrate`.

``versions/`` holds one file per revision, oldest first: ``0001`` creates the layout of the first
released program, ``0002`` adds uncertainty and flag columns, ``0003`` the production columns
(a judged value's uncertainty and tolerance limits, a unit's reference override and winding
temperature). ``env.py`` runs them on the connection that
:func:`acquire.store.migrate.ensure_schema` hands over, inside its transaction and under its
lock. ``script.py.mako`` is the template ``alembic revision`` writes a new file from (see
DEVELOPERS.md, "Changing the store's schema").
"""

#: The newest revision in ``versions/``, for readers that check a store's revision without
#: importing Alembic or SQLAlchemy (:mod:`acquire.store.quick_read`). A test keeps it equal to
#: Alembic's head and to :data:`acquire.store.schema.SCHEMA_REVISION`.
HEAD_REVISION = "0012"
