"""The layout of the first released store (which marked itself ``schema_version`` 2).

A store made by that release has exactly these tables and no Alembic version table;
:mod:`acquire.store.migrate` recognises it and stamps it with this revision instead of running it.
The tables are written out here, frozen, rather than taken from :mod:`acquire.store.schema`,
which follows the newest revision.

Revision ID: 0001
Revises: none
"""

from __future__ import annotations

from datetime import UTC, datetime

import sqlalchemy as sa
from alembic import op

from acquire.store.schema import UtcDateTime

revision = "0001"
down_revision = None
branch_labels = None
depends_on = None


def _id() -> sa.Column:
    return sa.Column("id", sa.Integer, primary_key=True, autoincrement=True)


def _ref(name: str, table: str) -> sa.Column:
    return sa.Column(name, sa.Integer, sa.ForeignKey(f"{table}.id"), nullable=True)


def _text(name: str) -> sa.Column:
    return sa.Column(name, sa.Text, nullable=False, default="")


def _real(name: str) -> sa.Column:
    return sa.Column(name, sa.Double, nullable=True)


def _stamp(name: str, nullable: bool = False) -> sa.Column:
    return sa.Column(name, UtcDateTime, nullable=nullable)


def tables() -> sa.MetaData:
    """The tables of revision 0001."""
    md = sa.MetaData()
    sa.Table(
        "schema_version",
        md,
        sa.Column("version", sa.Integer, primary_key=True, autoincrement=False),
        _stamp("applied_at"),
        _text("note"),
    )
    sa.Table(
        "meters",
        md,
        _id(),
        sa.Column("key", sa.String(64), nullable=False, unique=True),
        *(_text(n) for n in ("manufacturer", "model", "serial", "firmware", "dialect")),
        _stamp("first_seen"),
    )
    sa.Table(
        "fixtures",
        md,
        _id(),
        sa.Column("key", sa.String(64), nullable=False, unique=True),
        _text("name"),
        _text("notes"),
        _stamp("created_at"),
    )
    sa.Table(
        "reference_sets",
        md,
        _id(),
        _text("name"),
        _ref("fixture_id", "fixtures"),
        _ref("meter_id", "meters"),
        _text("fixture"),
        _text("meter"),
        _stamp("captured_at", nullable=True),
        _real("temperature"),
        _text("notes"),
        _text("method"),
        _text("standards"),
        sa.Column("points", sa.Integer, nullable=False),
        _stamp("saved_at"),
    )
    sa.Table(
        "reference_points",
        md,
        sa.Column(
            "reference_set_id", sa.Integer, sa.ForeignKey("reference_sets.id"), primary_key=True
        ),
        sa.Column("idx", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("frequency", sa.Double, nullable=False),
        *(_real(f"{s}_{p}") for s in ("open", "short", "load", "load_true") for p in "rx"),
        sqlite_with_rowid=False,
    )
    sa.Table(
        "sweeps",
        md,
        _id(),
        _text("dut"),
        _ref("meter_id", "meters"),
        _ref("fixture_id", "fixtures"),
        _ref("reference_set_id", "reference_sets"),
        sa.Column("settings", sa.JSON, nullable=True),
        sa.Column("status", sa.String(16), nullable=False),
        _text("note"),
        sa.Column("points", sa.Integer, nullable=False, default=0),
        _stamp("started_at"),
        _stamp("finished_at", nullable=True),
        _stamp("last_write_at", nullable=True),
        sa.Column("writer_host", sa.Text, nullable=True),
        sa.Column("writer_pid", sa.Integer, nullable=True),
        sa.CheckConstraint(
            "status IN ('running', 'complete', 'interrupted')", name="ck_sweeps_status"
        ),
    )
    sa.Table(
        "sweep_points",
        md,
        sa.Column("sweep_id", sa.Integer, sa.ForeignKey("sweeps.id"), primary_key=True),
        sa.Column("idx", sa.Integer, primary_key=True, autoincrement=False),
        sa.Column("frequency", sa.Double, nullable=False),
        *(_real(n) for n in ("raw_r", "raw_x", "corrected_r", "corrected_x")),
        sqlite_with_rowid=False,
    )
    sa.Table(
        "plans",
        md,
        _id(),
        sa.Column("hash", sa.String(64), nullable=False, unique=True),
        _text("name"),
        sa.Column("text", sa.Text, nullable=False),
        _stamp("created_at"),
    )
    sa.Table(
        "lots",
        md,
        _id(),
        sa.Column("key", sa.String(64), nullable=False, unique=True),
        _text("name"),
        _text("notes"),
        _stamp("created_at"),
    )
    sa.Table(
        "units",
        md,
        _id(),
        sa.Column("attempt_id", sa.String(36), nullable=False, unique=True),
        _text("serial"),
        sa.Column("serial_key", sa.String(64), nullable=False, index=True),
        sa.Column("attempt", sa.Integer, nullable=False, default=1),
        _text("station"),
        _text("operator"),
        _ref("plan_id", "plans"),
        _ref("reference_set_id", "reference_sets"),
        _ref("meter_id", "meters"),
        _ref("fixture_id", "fixtures"),
        _stamp("started_at", nullable=True),
        _stamp("finished_at", nullable=True),
        _text("outcome"),
        _text("bin"),
        _text("notes"),
        _stamp("saved_at"),
        _ref("lot_id", "lots"),
        sa.Index("ix_units_lot_id", "lot_id"),
    )
    sa.Table(
        "measurements",
        md,
        sa.Column("unit_id", sa.Integer, sa.ForeignKey("units.id"), primary_key=True),
        sa.Column("seq", sa.Integer, primary_key=True, autoincrement=False),
        _text("parameter"),
        _real("frequency"),
        _real("value"),
        _text("si_unit"),
        _real("low_limit"),
        _real("high_limit"),
        _text("verdict"),
        _ref("lot_id", "lots"),
        sa.Column("value_special", sa.String(4), nullable=False, default=""),
        sa.Index(
            "ix_measurements_lot_summary",
            "lot_id",
            "parameter",
            "frequency",
            "si_unit",
            "value",
            "verdict",
        ),
        sqlite_with_rowid=False,
    )
    return md


def upgrade() -> None:
    md = tables()
    md.create_all(op.get_bind())
    op.get_bind().execute(
        md.tables["schema_version"].insert(),
        {"version": 2, "applied_at": datetime.now(UTC), "note": "created"},
    )


def downgrade() -> None:
    tables().drop_all(op.get_bind())
