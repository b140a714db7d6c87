"""Gauge R&R studies: the study and one row per measurement.

New tables ``grr_studies`` (the study's name, the plan it measured with, the quantity and its
unit, how many parts, operators and trials, the operators' names, the tolerance, the seed of the
measuring order, station and meter, status and writing process) and ``grr_measurements`` (one
row per measurement: part, operator, trial, its place in the measuring order, value, expanded
uncertainty, time). Every existing row is kept.

The tables are written out here, frozen, rather than taken from :mod:`acquire.store.schema`,
which follows the newest revision.

Revision ID: 0007
Revises: 0006
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from acquire.store.schema import UtcDateTime

revision = "0007"
down_revision = "0006"
branch_labels = None
depends_on = None


def _text(name: str) -> sa.Column:
    return sa.Column(name, sa.Text, nullable=False, default="")


def upgrade() -> None:
    op.create_table(
        "grr_studies",
        sa.Column("id", sa.Integer, primary_key=True, autoincrement=True),
        _text("name"),
        sa.Column("plan_id", sa.Integer, sa.ForeignKey("plans.id"), nullable=True),
        _text("plan_hash"),
        _text("quantity"),
        _text("unit"),
        sa.Column("parts", sa.Integer, nullable=False),
        sa.Column("operators", sa.Integer, nullable=False),
        sa.Column("trials", sa.Integer, nullable=False),
        sa.Column("operator_names", sa.Text, nullable=False),
        sa.Column("tolerance", sa.Double, nullable=True),
        sa.Column("seed", sa.Text, nullable=False),
        _text("station"),
        _text("meter"),
        sa.Column(
            "reference_set_id", sa.Integer, sa.ForeignKey("reference_sets.id"), nullable=True
        ),
        sa.Column("measurements", sa.Integer, nullable=False, default=0),
        sa.Column("status", sa.String(16), nullable=False),
        _text("note"),
        sa.Column("started_at", UtcDateTime, nullable=False),
        sa.Column("finished_at", UtcDateTime, nullable=True),
        sa.Column("last_write_at", UtcDateTime, nullable=True),
        sa.Column("writer_host", sa.Text, nullable=True),
        sa.Column("writer_pid", sa.Integer, nullable=True),
        sa.CheckConstraint(
            "status IN ('running', 'complete', 'interrupted', 'failed')",
            name="ck_grr_studies_status",
        ),
    )
    op.create_table(
        "grr_measurements",
        sa.Column("grr_study_id", sa.Integer, sa.ForeignKey("grr_studies.id"), primary_key=True),
        sa.Column("idx", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("part", sa.Integer, nullable=False),
        sa.Column("operator", sa.Text, nullable=False),
        sa.Column("trial", sa.Integer, nullable=False),
        sa.Column("order_index", sa.Integer, nullable=False),
        sa.Column("value", sa.Double, nullable=True),
        sa.Column("uncertainty", sa.Double, nullable=True),
        sa.Column("measured_at", UtcDateTime, nullable=False),
        sqlite_with_rowid=False,
    )


def downgrade() -> None:
    for table in ("grr_measurements", "grr_studies"):
        op.drop_table(table)
