"""Power chokes: bias sweeps, temperature-rise runs, and a measurement's bias current.

New tables ``bias_sweeps`` (what was asked, how going ahead was confirmed, status and writing
process), ``bias_points`` (one row per bias step), ``bias_drops`` (the saturation current at
each drop asked), ``rise_runs`` (a temperature-rise run's settings and result) and
``rise_readings`` (its DC resistance and rise over time). ``measurements`` gains
``bias_current`` (the DC bias in A a value was measured at; NULL for none, and for every
measurement stored before). Every existing row is kept.

The tables are written out here, frozen, rather than taken from :mod:`acquire.store.schema`,
which follows the newest revision.

Revision ID: 0005
Revises: 0004
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from acquire.store.schema import UtcDateTime

revision = "0005"
down_revision = "0004"
branch_labels = None
depends_on = None

_STATES = "status IN ('running', 'complete', 'interrupted', 'failed')"


def _text(name: str) -> sa.Column:
    return sa.Column(name, sa.Text, nullable=False, default="")


def _real(name: str) -> sa.Column:
    return sa.Column(name, sa.Double, nullable=True)


def _writer() -> list[sa.Column]:
    return [
        sa.Column("status", sa.String(16), nullable=False),
        _text("note"),
        sa.Column("started_at", UtcDateTime, nullable=False),
        sa.Column("finished_at", UtcDateTime, nullable=True),
        sa.Column("last_write_at", UtcDateTime, nullable=True),
        sa.Column("writer_host", sa.Text, nullable=True),
        sa.Column("writer_pid", sa.Integer, nullable=True),
    ]


def _key(name: str, table: str) -> sa.Column:
    return sa.Column(name, sa.Integer, sa.ForeignKey(f"{table}.id"), primary_key=True)


def _index() -> sa.Column:
    return sa.Column("idx", sa.Integer, primary_key=True, autoincrement=False)


def upgrade() -> None:
    op.add_column("measurements", sa.Column("bias_current", sa.Double, nullable=True))
    op.create_table(
        "bias_sweeps",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        *(_text(name) for name in ("dut", "fixture", "meter", "supply")),
        sa.Column(
            "reference_set_id", sa.Integer, sa.ForeignKey("reference_sets.id"), nullable=True
        ),
        sa.Column("frequency", sa.Double, nullable=False),
        sa.Column("currents", sa.Text, nullable=False),
        sa.Column("drops", sa.Text, nullable=False),
        *(_real(name) for name in ("maximum", "step", "dwell", "energy")),
        _text("confirmed"),
        sa.Column("points", sa.Integer, nullable=False, default=0),
        *_writer(),
        sa.CheckConstraint(_STATES, name="ck_bias_sweeps_status"),
    )
    op.create_table(
        "bias_points",
        _key("bias_sweep_id", "bias_sweeps"),
        _index(),
        *(_real(name) for name in ("setpoint", "applied", "raw_r", "raw_x")),
        *(_real(name) for name in ("corrected_r", "corrected_x", "ls", "rs", "q")),
        sqlite_with_rowid=False,
    )
    op.create_table(
        "bias_drops",
        _key("bias_sweep_id", "bias_sweeps"),
        _index(),
        sa.Column("drop_fraction", sa.Double, nullable=False),
        _real("drop_current"),
        _real("highest_current"),
        sqlite_with_rowid=False,
    )
    op.create_table(
        "rise_runs",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        *(_text(name) for name in ("dut", "meter", "supply")),
        *(_real(name) for name in ("current_asked", "ambient", "time_limit")),
        *(_real(name) for name in ("settle_window", "settle_tolerance", "target_rise")),
        *(_real(name) for name in ("r_cold", "t_cold", "held_current")),
        sa.Column("settled", sa.Boolean, nullable=True),
        sa.Column("steps", sa.Text, nullable=False, default="[]"),
        sa.Column("readings", sa.Integer, nullable=False, default=0),
        *_writer(),
        sa.CheckConstraint(_STATES, name="ck_rise_runs_status"),
    )
    op.create_table(
        "rise_readings",
        _key("rise_run_id", "rise_runs"),
        _index(),
        *(_real(name) for name in ("elapsed", "resistance", "rise")),
        sqlite_with_rowid=False,
    )


def downgrade() -> None:
    for table in ("rise_readings", "rise_runs", "bias_drops", "bias_points", "bias_sweeps"):
        op.drop_table(table)
    op.drop_column("measurements", "bias_current")
