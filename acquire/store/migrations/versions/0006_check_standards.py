"""Check standards: their results, the acknowledgements that let a station go on, and a unit's
acknowledgement.

New tables ``check_standards`` (a standard by name, keyed by the SHA-256 of its name),
``check_results`` (one row per quantity of each check: time, station, plan hash, value, U, the
run rules broken) and ``check_acknowledgements`` (who acknowledged a stopped station, why, and
what). ``units`` gains ``check_acknowledgement_id`` (the acknowledgement in force when the unit
was tested; NULL for none, and for every unit stored before). Every existing row is kept.

The tables are written out here, frozen, rather than taken from :mod:`acquire.store.schema`,
which follows the newest revision.

Revision ID: 0006
Revises: 0005
"""

from __future__ import annotations

import sqlalchemy as sa
from alembic import op

from acquire.store.schema import UtcDateTime

revision = "0006"
down_revision = "0005"
branch_labels = None
depends_on = None


def _text(name: str) -> sa.Column:
    return sa.Column(name, sa.Text, nullable=False, default="")


def _id() -> sa.Column:
    return sa.Column("id", sa.Integer, primary_key=True, autoincrement=True)


def _standard() -> sa.Column:
    return sa.Column("standard_id", sa.Integer, sa.ForeignKey("check_standards.id"), nullable=False)


def upgrade() -> None:
    op.create_table(
        "check_standards",
        _id(),
        sa.Column("key", sa.String(64), nullable=False, unique=True),
        _text("name"),
        sa.Column("created_at", UtcDateTime, nullable=False),
    )
    op.create_table(
        "check_results",
        _id(),
        _standard(),
        sa.Column("check_id", sa.String(36), nullable=False),
        sa.Column("checked_at", UtcDateTime, nullable=False),
        *(_text(name) for name in ("station", "plan_hash", "quantity", "si_unit")),
        sa.Column("value", sa.Double, nullable=True),
        sa.Column("uncertainty", sa.Double, nullable=True),
        _text("rules"),
        sa.Index("ix_check_results_standard", "standard_id", "checked_at", "id"),
    )
    op.create_table(
        "check_acknowledgements",
        _id(),
        _standard(),
        sa.Column("made_at", UtcDateTime, nullable=False),
        *(_text(name) for name in ("made_by", "reason", "acknowledged")),
        sa.Column("check_id", sa.String(36), nullable=True),
    )
    if op.get_bind().dialect.name == "sqlite":
        # SQLite adds a column with its reference in one ALTER TABLE (a NULL default is allowed;
        # sqlite.org/lang_altertable.html); Alembic would add the constraint apart, which SQLite
        # cannot do without copying the table.
        op.execute(
            "ALTER TABLE units ADD COLUMN check_acknowledgement_id INTEGER "
            "REFERENCES check_acknowledgements (id)"
        )
    else:
        op.add_column(
            "units",
            sa.Column(
                "check_acknowledgement_id",
                sa.Integer,
                sa.ForeignKey("check_acknowledgements.id"),
                nullable=True,
            ),
        )


def downgrade() -> None:
    op.drop_column("units", "check_acknowledgement_id")
    for table in ("check_acknowledgements", "check_results", "check_standards"):
        op.drop_table(table)
