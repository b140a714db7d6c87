"""Publish positions: how far each station's units have gone out over MQTT.

New table ``publish_positions`` (station, the id of the newest unit of that station the broker
acknowledged, when it moved). No row changes; a station without a row has published nothing.

Revision ID: 0009
Revises: 0008
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from acquire.store.schema import UtcDateTime

revision = "0009"
down_revision = "0008"
branch_labels = None
depends_on = None


def upgrade() -> None:
    op.create_table(
        "publish_positions",
        sa.Column("station", sa.Text, primary_key=True),
        sa.Column("last_unit_id", sa.Integer, nullable=False),
        sa.Column("updated_at", UtcDateTime, nullable=False),
    )


def downgrade() -> None:
    op.drop_table("publish_positions")
