"""The publish positions of the newest schema revision (0009), added to the store's metadata by
:func:`acquire.store.schema.build_metadata`."""

from __future__ import annotations

from sqlalchemy import Column, Integer, MetaData, Table, Text

from acquire.store.columns import UtcDateTime


def publish_tables(md: MetaData) -> None:
    """``publish_positions``: per station, the id of the newest unit of that station already
    acknowledged by the MQTT broker (``last_unit_id``; units are published in id order, so every
    unit of the station up to it has gone out) and when it last moved (``updated_at``, UTC)."""
    Table(
        "publish_positions",
        md,
        Column("station", Text, primary_key=True),
        Column("last_unit_id", Integer, nullable=False),
        Column("updated_at", UtcDateTime, nullable=False),
    )
