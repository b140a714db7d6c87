"""Each unit's readings packed into its own row, for lot statistics.

``units`` gains ``readings_layout`` (text) and ``readings`` (bytes): a read-optimised copy of
the unit's measurement rows (:mod:`acquire.store.packed_readings`), written from now on in the
same INSERT as the unit. Units stored before are filled here from their measurement rows, a
batch of units at a time; a unit whose rows cannot be packed exactly keeps NULL, and lot
statistics read its measurement rows as before. The measurement rows are unchanged.
``ix_units_lot_order`` on (lot, the unit's test time, id) hands lot statistics a lot's units in
test order without a sort.

Revision ID: 0012
Revises: 0011
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from acquire.store.packed_readings import pack

revision = "0012"
down_revision = "0011"
branch_labels = None
depends_on = None

#: The measurement columns :func:`pack` reads, in the order it reads them.
PACKED_FROM = (
    "seq",
    "parameter",
    "frequency",
    "value",
    "si_unit",
    "low_limit",
    "high_limit",
    "verdict",
    "lot_id",
    "value_special",
    "uncertainty",
    "tolerance_low",
    "tolerance_high",
)
#: A unit's test time, frozen here (acquire.store.schema.UNIT_TEST_TIME today).
UNIT_TEST_TIME = "coalesce(finished_at, started_at, saved_at)"
#: Units filled per statement.
BATCH = 2000


def upgrade() -> None:
    op.add_column("units", sa.Column("readings_layout", sa.Text, nullable=True))
    op.add_column("units", sa.Column("readings", sa.LargeBinary, nullable=True))
    op.create_index("ix_units_lot_order", "units", ["lot_id", sa.text(UNIT_TEST_TIME), "id"])
    fill(op.get_bind())


def fill(conn: sa.Connection) -> None:
    """Pack every unit's measurement rows into its row, :data:`BATCH` units at a time."""
    ids = list(conn.execute(sa.text("SELECT id FROM units ORDER BY id")).scalars())
    rows_sql = sa.text(
        f"SELECT unit_id, {', '.join(PACKED_FROM)} FROM measurements "
        "WHERE unit_id >= :first AND unit_id <= :last ORDER BY unit_id, seq"
    )
    update = sa.text(
        "UPDATE units SET readings_layout = :layout, readings = :readings WHERE id = :id"
    )
    update = update.bindparams(sa.bindparam("readings", type_=sa.LargeBinary))
    for start in range(0, len(ids), BATCH):
        part = ids[start : start + BATCH]
        found: dict[int, list[tuple]] = {i: [] for i in part}
        for row in conn.execute(rows_sql, {"first": part[0], "last": part[-1]}):
            found[row[0]].append(tuple(row[1:]))
        values = []
        for unit_id, rows in found.items():
            layout, readings = pack(rows)
            values.append({"id": unit_id, "layout": layout, "readings": readings})
        conn.execute(update, values)


def downgrade() -> None:
    op.drop_index("ix_units_lot_order", table_name="units")
    op.drop_column("units", "readings")
    op.drop_column("units", "readings_layout")
