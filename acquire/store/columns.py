"""The column kinds every table of the store is built from, and the UTC time type."""

from __future__ import annotations

from datetime import UTC

from sqlalchemy import Column, DateTime, Double, ForeignKey, Integer, String, Text, TypeDecorator

#: Bias-sweep, temperature-rise run and gauge R&R study states as stored.
RUN_STATES = ("running", "complete", "interrupted", "failed")


class UtcDateTime(TypeDecorator):
    """A timezone-aware datetime stored as UTC (naive UTC text on SQLite, timestamptz on PG)."""

    impl = DateTime(timezone=True)
    cache_ok = True

    def process_bind_param(self, value, dialect):
        if value is None:
            return None
        if value.tzinfo is None:
            raise ValueError("times given to the store must be timezone-aware (use UTC)")
        value = value.astimezone(UTC)
        return value.replace(tzinfo=None) if dialect.name == "sqlite" else value

    def process_result_value(self, value, dialect):
        if value is None:
            return None
        if value.tzinfo is None:
            return value.replace(tzinfo=UTC)
        return value.astimezone(UTC)


def _id() -> Column:
    return Column("id", Integer, primary_key=True, autoincrement=True)


def _ref(name: str, table: str, index: bool = False) -> Column:
    return Column(name, Integer, ForeignKey(f"{table}.id"), nullable=True, index=index)


def _text(name: str) -> Column:
    return Column(name, Text, nullable=False, default="")


def _real(name: str) -> Column:
    return Column(name, Double, nullable=True)


def _writer_columns() -> list[Column]:
    """Status, note, times and the writing process of a run, as a sweep has them."""
    return [
        Column("status", String(16), nullable=False),
        _text("note"),
        Column("started_at", UtcDateTime, nullable=False),
        Column("finished_at", UtcDateTime, nullable=True),
        Column("last_write_at", UtcDateTime, nullable=True),
        Column("writer_host", Text, nullable=True),
        Column("writer_pid", Integer, nullable=True),
    ]
