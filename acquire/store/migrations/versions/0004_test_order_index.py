"""Each measurement carries its unit's test time; one index serves lot statistics in test order.

``measurements`` gains ``tested_at``: the time its unit was tested, the unit's ``finished_at``,
else its ``started_at``, else its ``saved_at`` (filled here for every row stored before). The
index ``ix_measurements_lot_summary`` is replaced by ``ix_measurements_lot_order`` on (lot,
quantity, whether the value is finite, test time, unit, sequence number) followed by the value,
verdict and the four limits, so a lot's statistics, moving ranges in test order included, read
that index alone, in its own order, with no sort and no look-up of the table.

Revision ID: 0004
Revises: 0003
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from acquire.store.schema import UtcDateTime

revision = "0004"
down_revision = "0003"
branch_labels = None
depends_on = None

#: The columns of the new index, in its order.
ORDER_INDEX = (
    "lot_id",
    "parameter",
    "frequency",
    "si_unit",
    "value_special",
    "tested_at",
    "unit_id",
    "seq",
    "value",
    "verdict",
    "low_limit",
    "high_limit",
    "tolerance_low",
    "tolerance_high",
)


def upgrade() -> None:
    op.add_column("measurements", sa.Column("tested_at", UtcDateTime, nullable=True))
    op.execute(
        "UPDATE measurements SET tested_at = (SELECT COALESCE(units.finished_at, "
        "units.started_at, units.saved_at) FROM units WHERE units.id = measurements.unit_id)"
    )
    op.drop_index("ix_measurements_lot_summary", table_name="measurements")
    op.create_index("ix_measurements_lot_order", "measurements", list(ORDER_INDEX))


def downgrade() -> None:
    op.drop_index("ix_measurements_lot_order", table_name="measurements")
    op.create_index(
        "ix_measurements_lot_summary",
        "measurements",
        ["lot_id", "parameter", "frequency", "si_unit", "value", "verdict"],
    )
    op.drop_column("measurements", "tested_at")
