"""The demo's production lot: a few dozen simulated coils through the station loop.

Each serial gets a new unit drawn from the demo coil's production spread (the simulated meter's
``SIMulate:UNIT:NEXT``), so some fall outside the shipped example plan's limits; one unit meets a
meter fault, is recorded as "error" and is scanned again, as an operator would. The lot's yield
and bin counts come back from the store at the end.
"""

from __future__ import annotations

from collections.abc import Iterator
from typing import Any

from rich.console import Console

#: Units in the demo's lot, and the one that meets a meter fault (its position, from 1).
LOT_SIZE, FAULTY_UNIT = 30, 17
#: The demo lot's name and its serials' form (the example plan's pattern).
LOT = "DEMO-LOT-1"


def demo_serials(count: int = LOT_SIZE) -> Iterator[str]:
    """EXAMPLE-0001, EXAMPLE-0002, ..."""
    for i in range(1, count + 1):
        yield f"EXAMPLE-{i:04d}"


def production_lot(run: Any) -> None:
    """Run :data:`LOT_SIZE` simulated units through the station with the example plan."""
    from acquire.production.measure import apply_settings
    from acquire.production.outbox import Outbox, RecordKeeper, default_outbox_path
    from acquire.production.plan_file import example_plan_path, load_plan
    from acquire.production.screen import StationScreen
    from acquire.production.station import Station, StationContext

    if run.references is None or run.outcome is None or run.outcome.interrupted:
        return
    plan = load_plan(example_plan_path())
    console: Console = run.console
    console.print(
        f"\n[bold]Production lot[/] {LOT}: {LOT_SIZE} simulated coils through the station with "
        f"the example plan {plan.title} ({example_plan_path().name}; `acquire plan check` "
        "shows it step by step)"
    )
    store = run.store
    ident = run.identity
    run.sim.insert(run.dut)
    apply_settings(run.meter, plan)
    context = StationContext(
        plan=plan,
        lot=LOT,
        operator="demo",
        station="demo-station",
        meter_name=str(ident),
        plan_id=store.record_plan(plan.text, plan.title),
        meter_id=store.record_meter(
            ident.manufacturer,
            ident.model,
            ident.serial,
            ident.firmware,
            dialect=run.meter.dialect.name,
        ),  # fmt: skip
        fixture_id=store.record_fixture(plan.fixture) if plan.fixture else None,
        temperature=plan.temperature.value,
    )
    screen: Any = StationScreen(console, interactive=False, bell=False)  # plain lines, no bell
    station: Station  # made below; the publisher's states read its blocks
    publisher = _publisher(run, context.station)
    if publisher is not None:
        screen = _watched(screen, publisher, plan, str(ident), lambda: station)
    with Outbox(default_outbox_path(run.store_url, context.station)) as outbox:
        keeper = RecordKeeper(store, outbox)
        station = Station(
            run.meter, context, keeper, screen, (run.reference_id, run.references),
            lambda: (run.reference_id, run.references),
            history=lambda serial: [u.outcome for u in store.unit_attempts(serial)],
        )  # fmt: skip
        for n, serial in enumerate(demo_serials(), start=1):
            if n == FAULTY_UNIT:
                run.sim.inject("error", -350)
            shown = station.test(serial)
            if n == FAULTY_UNIT:
                run.sim.clear_faults()
                if shown is not None and shown.outcome == "error":
                    console.print(f"(demo) the operator scans {serial} again to retry")
                    station.test(serial)
        if publisher is not None:
            screen.end(station.status(), "end of the demo lot")
            console.print(publisher.farewell() or _published(publisher), markup=False)
        console.print(screen.summary(station.status()))
    lot_report(console, store)


def _publisher(run: Any, station: str) -> Any:
    """The lot's MQTT publisher (``run.publish``: URL and line), or None."""
    if run.publish is None:
        return None
    from acquire.publish.publisher import start_publisher

    url, line = run.publish
    publisher = start_publisher(url, line, run.store_url, station)
    run.console.print(
        f"publishing the lot's units and the station's status to {publisher.target.shown} "
        f"({publisher.topics.unit}, {publisher.topics.status})",
        markup=False,
        soft_wrap=True,
    )
    return publisher


def _watched(screen: Any, publisher: Any, plan: Any, meter: str, station: Any) -> Any:
    """``screen`` telling ``publisher`` every status it shows (as `acquire station` does)."""
    from acquire.production.station_watch import StationFacts, WatchedScreen, describe
    from acquire.store.schema import utc_now

    facts = StationFacts(plan.hash, meter, plan.fixture, utc_now())
    return WatchedScreen(
        screen, lambda status: describe(status, facts, station().blocks, []), [publisher]
    )


def _published(publisher: Any) -> str:
    return f"{publisher.sent} units published to {publisher.target.shown}"


def lot_report(console: Console, store: Any) -> None:
    """The lot's yield per serial and its bin counts, read back from the store."""
    y = store.lot_yield(LOT)
    units = store.lot_units(LOT)
    latest = units.sort_values(["serial", "attempt"]).groupby("serial").tail(1)
    counts = latest["bin"].replace("", "(error)").value_counts()
    bins = " · ".join(f"{name} {count}" for name, count in sorted(counts.items()))
    console.print(
        f"in the store: lot {LOT}, {y.serials} units in {y.attempts} attempts; bins {bins}; "
        f"first-pass yield {y.first_pass_yield:.1%}, final yield {y.final_yield:.1%}",
        markup=False,
        soft_wrap=True,
    )
