"""The check-standard tables of the newest schema revision (0006), added to the store's metadata
by :func:`acquire.store.schema.build_metadata`."""

from __future__ import annotations

from sqlalchemy import Column, ForeignKey, Index, Integer, MetaData, String, Table

from acquire.store.columns import UtcDateTime, _id, _real, _text


def check_tables(md: MetaData) -> None:
    """Check standards, each check's values (one row per quantity) and the acknowledgements.

    A check result's ``check_id`` (a UUID) groups the quantities measured in one check;
    ``quantity`` is the plan's check key (``"Ls@10000"``), ``value`` and ``uncertainty`` (U,
    k = 2) are SI, NULL when not finite; ``rules`` is '' or the run rules the value broke when it
    was stored, joined by "; ". An acknowledgement names what it acknowledged (the reasons the
    station was stopped, as text) and the ``check_id`` of the newest check then (NULL: none).
    """
    Table(
        "check_standards",
        md,
        _id(),
        Column("key", String(64), nullable=False, unique=True),
        _text("name"),
        Column("created_at", UtcDateTime, nullable=False),
    )
    Table(
        "check_results",
        md,
        _id(),
        Column("standard_id", Integer, ForeignKey("check_standards.id"), nullable=False),
        Column("check_id", String(36), nullable=False),
        Column("checked_at", UtcDateTime, nullable=False),
        _text("station"),
        _text("plan_hash"),
        _text("quantity"),
        _text("si_unit"),
        _real("value"),
        _real("uncertainty"),
        _text("rules"),
        Index("ix_check_results_standard", "standard_id", "checked_at", "id"),
    )
    Table(
        "check_acknowledgements",
        md,
        _id(),
        Column("standard_id", Integer, ForeignKey("check_standards.id"), nullable=False),
        Column("made_at", UtcDateTime, nullable=False),
        _text("made_by"),
        _text("reason"),
        _text("acknowledged"),
        Column("check_id", String(36), nullable=True),
    )
