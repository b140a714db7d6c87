"""Whether a station's check standard lets it judge units: its newest check's rules and age.

A plan with a ``[check_standard]`` names the standard the station is checked with. The station
stops, as it does for stale references, when the standard has never been checked, when its
newest check is older than the plan's ``max_age``, or when that check broke a run rule
(:mod:`acquire.msa.check_standard`). An engineer's acknowledgement with a reason
(``acquire verify acknowledge``) lets it go on: the acknowledgement is in force from when it is
made until the standard's next check, for at most ``max_age``, and its id is recorded on every
unit tested meanwhile. The operator's ``--use-stale-references`` does not lift these stops.
"""

from __future__ import annotations

from collections.abc import Callable, Mapping
from datetime import UTC, datetime
from typing import Any

from acquire.display import format_duration
from acquire.production.plan import CheckStandardPlan
from acquire.production.plan_values import age_seconds

#: What the operator is told to do when the check standard stops the station.
CHECK_HINT = (
    "Measure the check standard (`acquire verify`) or have an engineer acknowledge it "
    "(`acquire verify acknowledge`), then press Enter"
)


def read_section(reader: Any, table: Mapping[str, Any]) -> CheckStandardPlan:
    """A plan's ``[check_standard]`` table (``name``, ``max_age``), read by the plan file's
    ``reader`` (:class:`acquire.production.plan_values.TableReader`); raises its PlanError."""
    name = reader.name(table, "name", "check_standard")
    if not name:
        raise reader.fail(
            "check_standard.name", "the check standard has no name", 'add name = "..."'
        )
    max_age = None
    if "max_age" in table:
        path = "check_standard.max_age"
        max_age = reader.quantity(table["max_age"], age_seconds, path, '"12h" or 12 (hours)')
        if max_age <= 0:
            raise reader.fail(path, "the age must be above 0", 'write e.g. "12h"')
    return CheckStandardPlan(name=name, max_age=max_age)


def in_force(summary: Any, max_age: float | None, now: datetime | None = None) -> Any:
    """The acknowledgement of ``summary`` (a :class:`~acquire.store.check_results.CheckSummary`)
    in force at ``now``, else None: made after the newest check and at most ``max_age`` s ago."""
    ack = summary.acknowledgement
    if ack is None:
        return None
    if summary.last_checked is not None and ack.made_at <= summary.last_checked:
        return None
    if max_age is not None:
        age = ((now or datetime.now(UTC)) - ack.made_at).total_seconds()
        if age > max_age:
            return None
    return ack


def standing_blocks(summary: Any, max_age: float | None, now: datetime | None = None) -> list[str]:
    """Why the standard would stop a station now, ignoring any acknowledgement (empty: none)."""
    name = summary.standard
    if summary.last_checked is None:
        return [f"check standard {name!r} has never been checked"]
    out = []
    if max_age is not None:
        age = ((now or datetime.now(UTC)) - summary.last_checked).total_seconds()
        if age > max_age:
            out.append(
                f"check standard {name!r} was last checked {format_duration(age)} ago; the "
                f"plan allows {format_duration(max_age)}"
            )
    if summary.broken:
        rules = ", ".join(f"{quantity} {rule}" for quantity, rule in summary.broken)
        out.append(f"check standard {name!r}: its last check broke a run rule ({rules})")
    return out


def check_blocks(summary: Any, max_age: float | None, now: datetime | None = None) -> list[str]:
    """Why the standard stops a station now: :func:`standing_blocks` unless an acknowledgement
    is in force."""
    if in_force(summary, max_age, now) is not None:
        return []
    return standing_blocks(summary, max_age, now)


class CheckGuard:
    """A station's view of its check standard: ``read()`` gives the standard's
    :class:`~acquire.store.check_results.CheckSummary` from the store; :meth:`refresh` reads it
    again (at the start and whenever the operator presses Enter on a stopped station)."""

    def __init__(self, read: Callable[[], Any], max_age: float | None) -> None:
        self._read = read
        self.max_age = max_age
        self.summary = read()

    def refresh(self) -> None:
        self.summary = self._read()

    def blocks(self, now: datetime | None = None) -> list[str]:
        return check_blocks(self.summary, self.max_age, now)

    def acknowledgement_id(self, now: datetime | None = None) -> int | None:
        ack = in_force(self.summary, self.max_age, now)
        return None if ack is None else int(ack.id)


def guard_blocks(guard: CheckGuard | None) -> list[str]:
    """``guard``'s blocks (none without a guard)."""
    return [] if guard is None else guard.blocks()


def guard_acknowledgement(guard: CheckGuard | None) -> int | None:
    """The id of the acknowledgement in force (None without a guard or one in force)."""
    return None if guard is None else guard.acknowledgement_id()
