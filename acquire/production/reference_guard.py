"""Whether a station may judge units with a reference set: its age, meter, fixture and check.

A reference set past the plan's maximum age, captured on another meter or fixture, or failing its
own check stops the station until new references are captured; an operator's override (a reason,
given on the command line) lets it go on, and the reason is recorded on every unit tested under it.
"""

from __future__ import annotations

from datetime import UTC, datetime
from typing import Any

from acquire.display import format_duration
from acquire.sweep_setup import newest_reference

#: What the operator is told to do when the references stop the station.
CAPTURE_HINT = (
    "Capture new references on this fixture (`acquire reference capture`), then press Enter"
)


def reference_blocks(
    refs: Any,
    meter_name: str,
    fixture: str,
    max_age: float | None,
    now: datetime | None = None,
    problems: list[str] | None = None,
) -> list[str]:
    """Why ``refs`` may not be used for production units now (empty when it may).

    ``max_age`` in seconds (None: no limit); ``meter_name`` the meter's identity as the reference
    set records it; ``fixture`` the plan's fixture ('' accepts any). ``problems`` are the set's
    own check errors when the caller has them already (:func:`check_problems`).
    """
    if refs is None:
        where = f" for fixture {fixture!r}" if fixture else ""
        return [f"there is no reference set{where} in the store"]
    out = []
    if max_age is not None:
        if refs.captured_at is None:
            out.append("the reference set does not say when it was captured")
        else:
            age = ((now or datetime.now(UTC)) - refs.captured_at).total_seconds()
            if age > max_age:
                out.append(
                    f"the reference set is {format_duration(age)} old; the plan allows "
                    f"{format_duration(max_age)}"
                )
    if meter_name and refs.meter and refs.meter != meter_name:
        out.append(f"the reference set was captured on another meter ({refs.meter})")
    if fixture and refs.fixture != fixture:
        out.append(
            f"the reference set was captured on fixture {refs.fixture or '(not named)'!r}, "
            f"the plan uses {fixture!r}"
        )
    return out + (check_problems(refs) if problems is None else problems)


def check_problems(refs: Any, frequencies: Any = None) -> list[str]:
    """The reference set's own check errors, one line each (none for no set), and whether its
    grid covers ``frequencies`` (Hz; the plan's), since nothing is extrapolated."""
    if refs is None:
        return []
    out = [
        f"reference {f.standard}: {' '.join(f.message.split())}"
        for f in refs.check()
        if f.severity == "error"
    ]
    if frequencies is not None and len(frequencies):
        from acquire.errors import CompensationError
        from acquire.plan import FrequencyPlan
        from acquire.sweep import check_coverage

        try:
            check_coverage(FrequencyPlan(frequencies), refs)
        except CompensationError as exc:
            out.append(str(exc))
    return out


def newest_for_fixture(store: Any, fixture: str) -> tuple[int | None, Any]:
    """The newest stored reference set captured on ``fixture`` (any fixture when ''), or
    (None, None) when there is none."""
    infos = [i for i in store.list_reference_sets() if not fixture or i.fixture == fixture]
    if not infos:
        return None, None
    newest = newest_reference(infos)
    return newest.id, store.load_reference_set(newest.id)
