"""Production results: a measurement's uncertainty and tolerance limits; a unit's references
override and temperature.

``measurements`` gains ``uncertainty`` (the expanded uncertainty U, k = 2, of the value, in its SI
unit; NULL when unknown) and ``tolerance_low`` / ``tolerance_high`` (the test plan's tolerance
limits, NULL for an open side); ``low_limit`` / ``high_limit`` stay the acceptance limits actually
applied (after any guard band). ``units`` gains ``reference_override`` (why references were used
despite a block; '' for none, and for every unit stored before) and ``temperature`` (°C used to
correct the DC resistance; NULL for none). Every existing row is kept; its new cells are NULL or ''.

Revision ID: 0003
Revises: 0002
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

revision = "0003"
down_revision = "0002"
branch_labels = None
depends_on = None


def upgrade() -> None:
    for name in ("uncertainty", "tolerance_low", "tolerance_high"):
        op.add_column("measurements", sa.Column(name, sa.Double, nullable=True))
    op.add_column(
        "units", sa.Column("reference_override", sa.Text, nullable=False, server_default="")
    )
    op.add_column("units", sa.Column("temperature", sa.Double, nullable=True))


def downgrade() -> None:
    op.drop_column("units", "temperature")
    op.drop_column("units", "reference_override")
    for name in ("tolerance_high", "tolerance_low", "uncertainty"):
        op.drop_column("measurements", name)
