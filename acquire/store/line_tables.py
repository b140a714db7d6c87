"""The line's table of station states (revision 0010), added to the store's metadata by
:func:`acquire.store.schema.build_metadata`."""

from __future__ import annotations

from sqlalchemy import Column, Integer, MetaData, String, Table

from acquire.store.columns import UtcDateTime, _text


def line_tables(md: MetaData) -> None:
    """``station_states``: one row per station name, the newest state the station told.

    ``station_key`` is the SHA-256 of the name (names may be of any length); ``state`` is
    "running", "blocked" or "stopped", ``reason`` why it is blocked or stopped; ``tested`` and
    ``passed`` count serials of the session's lot at that station (latest attempt), ``waiting``
    units kept in the station's local outbox; ``references`` and ``check_standard`` are '' or
    the problem in words; ``host`` and ``pid`` the process that wrote the row. ``updated_at``
    is when the station wrote the state (UTC; again every few seconds while it runs): the line
    page calls a station that is not stopped silent when it is old.
    """
    Table(
        "station_states",
        md,
        Column("station_key", String(64), primary_key=True),
        _text("station"),
        Column("state", String(16), nullable=False),
        *(_text(name) for name in ("reason", "lot", "plan", "plan_hash", "operator")),
        *(_text(name) for name in ("meter", "fixture")),
        *(Column(name, Integer, nullable=False) for name in ("tested", "passed", "waiting")),
        _text("references"),
        _text("check_standard"),
        Column("started_at", UtcDateTime, nullable=False),
        Column("updated_at", UtcDateTime, nullable=False),
        _text("host"),
        Column("pid", Integer, nullable=False),
    )
