"""Indexes that count a lot's outcomes without reading every measurement.

``ix_units_lot_id`` is replaced by ``ix_units_lot_serial`` on (lot, serial key, attempt, id):
each serial's attempts of a lot in the order that says which is first and which is latest.
``ix_measurements_failing`` holds only the measurements whose verdict counts a check as failing
(partial index), by lot and unit. No row changes.

Revision ID: 0008
Revises: 0007
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0008"
down_revision = "0007"
branch_labels = None
depends_on = None

#: The partial index's condition, frozen here (acquire.store.schema.FAILING_VERDICT today).
FAILING_VERDICT = "verdict NOT IN ('pass', 'conditional pass', '')"


def upgrade() -> None:
    op.drop_index("ix_units_lot_id", table_name="units")
    op.create_index("ix_units_lot_serial", "units", ["lot_id", "serial_key", "attempt", "id"])
    op.create_index(
        "ix_measurements_failing",
        "measurements",
        ["lot_id", "unit_id"],
        sqlite_where=sa.text(FAILING_VERDICT),
        postgresql_where=sa.text(FAILING_VERDICT),
    )


def downgrade() -> None:
    op.drop_index("ix_measurements_failing", table_name="measurements")
    op.drop_index("ix_units_lot_serial", table_name="units")
    op.create_index("ix_units_lot_id", "units", ["lot_id"])
