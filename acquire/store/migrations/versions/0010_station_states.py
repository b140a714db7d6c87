"""The line's station states: one row per station, the newest state it told.

New table ``station_states`` (keyed by the SHA-256 of the station's name): state, reason, lot,
plan and its hash, operator, meter, fixture, counts, reference and check-standard problems,
when the session started and when the state was made, and the writing host and process. No
existing row changes.

The table is written out here, frozen, rather than taken from :mod:`acquire.store.schema`,
which follows the newest revision.

Revision ID: 0010
Revises: 0009
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from acquire.store.schema import UtcDateTime

revision = "0010"
down_revision = "0009"
branch_labels = None
depends_on = None


def _text(name: str) -> sa.Column:
    return sa.Column(name, sa.Text, nullable=False, default="")


def upgrade() -> None:
    op.create_table(
        "station_states",
        sa.Column("station_key", sa.String(64), primary_key=True),
        _text("station"),
        sa.Column("state", sa.String(16), nullable=False),
        *(_text(name) for name in ("reason", "lot", "plan", "plan_hash", "operator")),
        *(_text(name) for name in ("meter", "fixture")),
        *(sa.Column(name, sa.Integer, nullable=False) for name in ("tested", "passed", "waiting")),
        _text("references"),
        _text("check_standard"),
        sa.Column("started_at", UtcDateTime, nullable=False),
        sa.Column("updated_at", UtcDateTime, nullable=False),
        _text("host"),
        sa.Column("pid", sa.Integer, nullable=False),
    )


def downgrade() -> None:
    op.drop_table("station_states")
