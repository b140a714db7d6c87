"""Per-point uncertainty and flags; Type A uncertainty of the reference standards.

``sweep_points`` gains ``u_r`` and ``u_x`` (expanded uncertainty of the corrected R and X, ohm,
NULL when unknown) and ``flags`` ('' for a measured value); ``reference_points`` gains
``open_u``, ``short_u`` and ``load_u`` (NULL when unknown); ``reference_sets`` gains ``repeats``
(1 for every set stored before). ``schema_version`` gets version 3, so that a release from before
the migrations refuses the store instead of writing rows that lack these values.

Revision ID: 0002
Revises: 0001
"""

from __future__ import annotations

from datetime import UTC, datetime

import sqlalchemy as sa
from alembic import op

from acquire.store.schema import UtcDateTime

revision = "0002"
down_revision = "0001"
branch_labels = None
depends_on = None

_VERSIONS = sa.table(
    "schema_version",
    sa.column("version", sa.Integer),
    sa.column("applied_at", UtcDateTime),
    sa.column("note", sa.Text),
)


def upgrade() -> None:
    op.add_column("sweep_points", sa.Column("u_r", sa.Double, nullable=True))
    op.add_column("sweep_points", sa.Column("u_x", sa.Double, nullable=True))
    op.add_column("sweep_points", sa.Column("flags", sa.Text, nullable=False, server_default=""))
    for standard in ("open", "short", "load"):
        op.add_column("reference_points", sa.Column(f"{standard}_u", sa.Double, nullable=True))
    op.add_column(
        "reference_sets",
        sa.Column("repeats", sa.Integer, nullable=False, server_default=sa.text("1")),
    )
    op.get_bind().execute(
        _VERSIONS.insert(),
        {"version": 3, "applied_at": datetime.now(UTC), "note": "kept by Alembic from here on"},
    )


def downgrade() -> None:
    op.get_bind().execute(_VERSIONS.delete().where(_VERSIONS.c.version == 3))
    op.drop_column("reference_sets", "repeats")
    for standard in ("open", "short", "load"):
        op.drop_column("reference_points", f"{standard}_u")
    for name in ("flags", "u_x", "u_r"):
        op.drop_column("sweep_points", name)
