"""Getting a sweep ready: find the reference set, describe it for the view, open it in the store.

Shared by ``acquire sweep`` and the demo; nothing here knows about the command line. Each
function takes plain values (a store, a meter's identity, a plan, names) and returns plain ones.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import Any

from acquire.errors import InputError
from acquire.plan import FrequencyPlan
from acquire.sweep_state import SweepState


def find_reference_set(store: Any, key: str) -> tuple[int, Any]:
    """The (id, ReferenceSet) a user named: an id, a name (the newest of that name) or 'latest'."""
    infos = store.list_reference_sets()
    text = str(key).strip()
    if text.isdigit():
        ids = {info.id for info in infos}
        if int(text) not in ids:
            raise InputError(
                f"no reference set {text} in {store.url}; `acquire reference list` shows them"
            )
        return int(text), store.load_reference_set(int(text))
    latest = text.lower() == "latest"
    pool = infos if latest else [info for info in infos if info.name == text]
    if not pool:
        what = "no reference sets" if latest else f"no reference set named {text!r}"
        raise InputError(f"{what} in {store.url}; capture one with `acquire reference capture`")
    newest = max(pool, key=lambda info: (info.saved_at or info.captured_at or 0, info.id))
    return newest.id, store.load_reference_set(newest.id)


def prepare_state(
    plan: FrequencyPlan,
    identity: Any,
    refs: Any,
    ref_id: int | None,
    fixture: str,
    dut: str,
    show: Sequence[str],
) -> SweepState:
    """A sweep state for the view, with the meter and the reference set described."""
    reference = ""
    if refs is not None:
        where = f" on {refs.fixture}" if refs.fixture else ""
        reference = f"#{ref_id}{where} ({refs.method}, {refs.frequency.size} points)"
    return SweepState(
        plan,
        dut=dut,
        meter=str(identity),
        reference=reference,
        reference_captured_at=None if refs is None else refs.captured_at,
        quantities=tuple(show),
        corrected_too=refs is not None,
    )


def warn_about_references(
    state: SweepState, refs: Any, meter_name: str, fixture: str, max_hours: float | None
) -> None:
    """Put the reference set's warnings (age, meter, fixture, checks) on the view."""
    from acquire.capture import reference_warnings

    if refs is None:
        return
    max_age = None if max_hours is None or max_hours <= 0 else max_hours * 3600.0
    for w in reference_warnings(refs, meter_name, fixture, max_age):
        state.warn(w)


def begin(
    store: Any,
    meter: Any,
    identity: Any,
    fixture: str,
    dut: str,
    ref_id: int | None,
    plan: FrequencyPlan,
    show: Sequence[str],
    measurement: Mapping[str, Any] | None = None,
) -> Any:
    """Record the meter and fixture and open a sweep in the store; returns its writer.

    ``measurement`` holds the meter settings given for the sweep (``level`` as the operator
    wrote it, ``speed``, ``averaging``); those that are not None are kept in its settings.
    """
    meter_id = store.record_meter(
        identity.manufacturer,
        identity.model,
        identity.serial,
        identity.firmware,
        dialect=getattr(getattr(meter, "dialect", None), "name", ""),
    )
    fixture_id = store.record_fixture(fixture) if fixture else None
    settings: dict[str, Any] = {
        "plan": plan.describe(),
        "spacing": plan.spacing,
        "start_hz": plan.start,
        "stop_hz": plan.stop,
        "points": len(plan),
        "show": list(show),
    }
    for key, value in (measurement or {}).items():
        if value is not None:
            settings[key] = value
    return store.begin_sweep(
        dut=dut,
        meter_id=meter_id,
        fixture_id=fixture_id,
        reference_set_id=ref_id,
        settings=settings,
    )
