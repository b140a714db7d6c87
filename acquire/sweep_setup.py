"""Getting a sweep ready: find the reference set, describe it for the view, open it in the store.

Shared by ``acquire sweep`` and the demo; nothing here knows about the command line. Each
function takes plain values (a store, a meter's identity, a plan, names) and returns plain ones.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from typing import Any

from acquire.errors import CompensationError, InputError
from acquire.plan import FrequencyPlan
from acquire.sweep_state import SweepState
from acquire.sweep_uncertainty import PointUncertainty

#: How many of a refused reference set's problems the refusal names.
PROBLEMS_NAMED = 2


class ReferenceRefused(CompensationError):
    """A reference set fails its own check and no reason to use it anyway was given."""

    def __init__(self, message: str, problems: Sequence[str]) -> None:
        super().__init__(message)
        self.problems = list(problems)


def reference_problems(refs: Any) -> list[str]:
    """The error-severity findings of ``refs.check()``, one line each ('' for None)."""
    if refs is None:
        return []
    return [
        " ".join(f"{f.standard}: {f.message}".split())
        for f in refs.check()
        if f.severity == "error"
    ]


def usable_reference(refs: Any, ref_id: int | None, override: str | None = None) -> str:
    """Refuse ``refs`` when its check finds errors, unless ``override`` gives a reason.

    Returns the reason that let a failing set through ('' when the set passes, or there is
    none), which is what the sweep records as ``reference_override``. Raises
    :class:`ReferenceRefused` naming the first problems otherwise.
    """
    problems = reference_problems(refs)
    if not problems:
        return ""
    reason = " ".join((override or "").split())
    if reason:
        return reason
    named = "; ".join(problems[:PROBLEMS_NAMED])
    more = f" (and {len(problems) - PROBLEMS_NAMED} more)" if len(problems) > PROBLEMS_NAMED else ""
    label = f"reference set {ref_id}" if ref_id is not None else "the reference set"
    raise ReferenceRefused(
        f"{label} fails its check: {named}{more}; capture it again with `acquire reference "
        "capture`, or give a reason to use it anyway",
        problems,
    )


def newest_reference(infos: Sequence[Any]) -> Any:
    """The newest of stored reference sets' infos: by save time (else capture time), then id."""
    oldest = datetime(1970, 1, 1, tzinfo=UTC)
    return max(infos, key=lambda info: (info.saved_at or info.captured_at or oldest, info.id))


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
    newest = newest_reference(pool)
    return newest.id, store.load_reference_set(newest.id)


def prepare_state(
    plan: FrequencyPlan,
    identity: Any,
    refs: Any,
    ref_id: int | None,
    fixture: str,
    dut: str,
    show: Sequence[str],
    override: str = "",
) -> SweepState:
    """A sweep state for the view, with the meter and the reference set described.

    ``override`` is the reason a failing reference set is used anyway (from
    :func:`usable_reference`), shown on the view.
    """
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
        reference_override=override,
        quantities=tuple(show),
        corrected_too=refs is not None,
    )


def warn_about_references(
    state: SweepState, refs: Any, meter_name: str, fixture: str, max_hours: float | None
) -> None:
    """Put the reference set's warnings (age, meter, fixture, checks) on the view."""
    if refs is None:
        return
    from acquire.capture import reference_warnings

    max_age = None if max_hours is None or max_hours <= 0 else max_hours * 3600.0
    for w in reference_warnings(refs, meter_name, fixture, max_age):
        state.warn(w)


def uncertainty_model(meter: Any, state: SweepState, show: bool) -> PointUncertainty:
    """How the sweep's points get their uncertainty (from ``meter``'s dialect and settings),
    with the view told what it rests on and whether to show ``± U`` beside the values."""
    model = PointUncertainty.for_meter(meter, state.quantities)
    state.show_uncertainty = show
    state.uncertainty_note = model.note()
    return model


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
    references: Any = None,
    override: str | None = None,
) -> Any:
    """Record the meter and fixture and open a sweep in the store; returns its writer.

    A reference set that fails its check is refused (:class:`ReferenceRefused`, before anything
    is written) unless ``override`` gives a reason, which is then kept in the sweep's settings
    as ``reference_override``. ``references`` is the set with id ``ref_id`` (loaded from the
    store when not given).

    ``measurement`` holds the meter settings given for the sweep (``level`` as the operator
    wrote it, ``speed``, ``averaging``); those that are not None are kept in its settings.
    """
    if ref_id is not None and references is None:
        references = store.load_reference_set(ref_id)
    reason = usable_reference(references, ref_id, override)
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
    if reason:
        settings["reference_override"] = reason
    return store.begin_sweep(
        dut=dut,
        meter_id=meter_id,
        fixture_id=fixture_id,
        reference_set_id=ref_id,
        settings=settings,
    )


def review_readings(state: SweepState, refs: Any) -> None:
    """After a sweep: put on the view what the readings say about the fixture and the part.

    Where the fixture limits accuracy (with a reference set), and whether the readings look like
    an empty fixture (:func:`acquire.open_fixture.open_fixture`).
    """
    from acquire.open_fixture import open_fixture

    f, raw, _ = state.points()
    if refs is not None:
        from acquire.capture import dut_warnings

        for w in dut_warnings(refs, f, raw):
            state.warn(w)
    state.open_fixture = open_fixture(f, raw, refs)
