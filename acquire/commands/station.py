"""Run a production test station: scan a serial, measure, judge, bin, record; repeat.

The test plan (--plan, a TOML file: `acquire plan check FILE` shows what it does) says which
frequencies and quantities are judged against which limits, with which decision rule (simple or
guard-banded acceptance), how passing units are sorted into bins, which serials are valid, and
when a serial may be tested again. At the prompt the operator scans (or types) a serial and
presses Enter; when standard input is not a terminal, one serial per line is read until its end.

Each unit is measured in one list sweep plus its DC resistance, corrected with the newest
reference set of the plan's fixture (or --reference), judged, and recorded in one transaction
with the plan's text and hash, the meter, fixture, reference set, operator, station, attempt
number, outcome, bin, and every value with its expanded uncertainty (k = 2) and the limits
applied. A unit shows as recorded only once the store committed it; while the store cannot be
reached, units wait in a local outbox file beside the store (--outbox) and are written, once
each, when it is back. A meter fault makes the attempt's outcome "error"; scan the serial again
to retry. References older than the plan allows, or captured on another meter or fixture, stop
the station until new ones are captured (--use-stale-references REASON goes on anyway and
records the reason on every unit). A plan naming a check standard ([check_standard]) stops the
station while that standard's newest check is too old or broke a run rule, until it is measured
again (`acquire verify`) or an engineer acknowledges it (`acquire verify acknowledge`); the
acknowledgement is recorded on every unit tested under it. Ctrl-C or the end of input ends the
session with its summary.

A plan with checks under DC bias (a power choke's inductance at a bias, its saturation current)
is measured with the meter's own bias, or with a DC current source given by --bias-source. The
plan's max_bias must be within the supply's limit, or the station does not start.

Safety: measure only discharged parts that are not connected to any supply; an inductor that
carries DC bias stores ½·L·I², and a current broken while it flows arcs and can destroy the
meter's input and hurt the operator. The station ramps the bias to zero and switches it off after
each unit, before every prompt for a part, at the end, on Ctrl-C, SIGTERM, a meter fault or any
error; it shows the energy stored at the plan's largest bias and asks the operator to confirm
above 0.1 J (or when it is not yet known) unless --unattended is given, which every unit then
records. Never open the fixture while a bias flows. Mains-powered fixtures must be set up as
local codes, the meter maker's instructions and licensed practice require.
"""

from __future__ import annotations

import argparse
import os
import sys

from acquire.commands.options import add_dialect, add_resource, add_store
from acquire.commands.publish_options import add_publish

#: Seconds the station keeps trying to write waiting units to the store when a session ends.
FINAL_PATIENCE = 15.0

HELP = "production testing: scan serials, measure, judge, bin and record each unit"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_resource(parser)
    add_dialect(parser)
    add_store(parser)
    add_publish(parser)
    parser.add_argument("--plan", required=True, help="test plan file (TOML)")
    parser.add_argument("--lot", required=True, help="lot (batch) the units belong to")
    parser.add_argument("--operator", required=True, help="who is testing")
    parser.add_argument(
        "--station",
        default=os.environ.get("ACQUIRE_STATION"),
        required="ACQUIRE_STATION" not in os.environ,
        help="name of this station (env ACQUIRE_STATION)",
    )
    parser.add_argument(
        "--reference",
        help="reference set to correct with: its id or name (default: the newest captured on "
        "the plan's fixture)",
    )
    parser.add_argument(
        "--temperature",
        help="winding temperature for the DC resistance correction, e.g. 23C, when the plan "
        "takes it per lot",
    )
    parser.add_argument(
        "--use-stale-references",
        metavar="REASON",
        help="go on with references the station would stop for (too old, another meter or "
        "fixture, failing their check); the reason is recorded on every unit",
    )
    parser.add_argument(
        "--outbox",
        help="local file where units wait while the store is away (default: beside the store, "
        "acquire-outbox-<station>.db)",
    )
    parser.add_argument("--no-bell", action="store_true", help="do not ring on a fail")
    parser.add_argument(
        "--bias-source",
        metavar="RESOURCE",
        help="a DC current source for the plan's bias checks (default: the meter's own bias)",
    )
    parser.add_argument(
        "--bias-source-dialect",
        default="simulated-source",
        metavar="NAME",
        help="dialect of --bias-source: a shipped name or a file (default: simulated-source)",
    )
    parser.add_argument(
        "--unattended",
        action="store_true",
        help="run a plan with bias checks without asking to confirm the energy the part "
        "stores; recorded on every unit. Only where no one can touch the fixture while a bias "
        "flows",
    )


def _reason(text: str | None) -> str:
    from acquire.errors import InputError

    if text is None:
        return ""
    reason = " ".join(text.split())
    if not reason:
        raise InputError(
            '--use-stale-references needs a reason, e.g. "fixture unchanged, line down"'
        )
    return reason


def _name(text: str, option: str) -> str:
    from acquire.errors import InputError

    name = " ".join(str(text).split())
    if not name or not name.isprintable():
        raise InputError(f"{option} needs a printable name, not {text!r}")
    return name


def _temperature(plan, text: str | None, interactive: bool) -> float | None:
    from acquire.errors import InputError
    from acquire.units import parse_temperature

    source = plan.temperature.source
    if source == "fixed":
        if text is not None:
            raise InputError(
                "--temperature: the plan fixes the winding temperature at "
                f"{plan.temperature.value:g} °C; leave the option out"
            )
        return plan.temperature.value
    if source != "per-lot":
        return None
    if text is None and interactive:
        text = input("winding temperature for this lot (e.g. 23C): ")
    if text is None:
        raise InputError(
            "the plan takes the winding temperature per lot: give --temperature, e.g. 23C"
        )
    return parse_temperature(text)


def _check_uncertainty_known(plan, meter) -> None:
    """Guard bands need U, and U needs the meter's stated accuracy: refuse before any unit."""
    from acquire.errors import InputError

    if plan.decision.factor > 0 and getattr(meter.dialect, "accuracy", None) is None:
        raise InputError(
            f"the plan asks for guard-banded acceptance, but the dialect {meter.dialect.name!r} "
            "states no accuracy, so no value would have an uncertainty and every unit would "
            'fail: add an [accuracy] table to the dialect, or set rule = "simple" in the plan'
        )


def _bias_supply(plan, meter, source):
    """The bias supply of a plan with bias checks (None without): ``source`` (a DC current
    source) or the meter's own bias, refused when the plan's max_bias is above its limit."""
    from acquire.errors import BiasError

    if not plan.needs_bias:
        return None
    supply = source if source is not None else meter.bias()
    if plan.bias.maximum > supply.limit:
        raise BiasError(
            f"the plan's max_bias of {plan.bias.maximum:g} A is above the bias supply's limit of "
            f"{supply.limit:g} A; lower max_bias or use a supply rated for it"
        )
    return supply


def _check_guard(store, plan):
    """The station's check-standard guard, when the plan names a standard."""
    if plan.check_standard is None:
        return None
    from acquire.production.check_guard import CheckGuard

    name = plan.check_standard.name
    return CheckGuard(lambda: store.check_summary(name), plan.check_standard.max_age)


def _store_watchers(store) -> list:
    """Watchers that keep this station's state in the store, for the line overview page."""
    from acquire.production.state_keeper import StateKeeper

    return [StateKeeper(store)]


def _check_publish(args: argparse.Namespace) -> None:
    """Refuse a bad --publish URL or --line name before the station touches store or meter."""
    if args.publish:
        from acquire.commands.publish_options import line_name
        from acquire.publish.target import parse_publish_url

        parse_publish_url(args.publish)
        line_name(args.line)


def _publish_watchers(args: argparse.Namespace, store) -> list:
    """Watchers that publish this station's state and units (--publish)."""
    from acquire.commands.publish_options import publisher

    found = publisher(args.publish, args.line, args.store, _name(args.station or "", "--station"))
    return [] if found is None else [found]


def _state_of(station, facts):
    """How the station's shown status becomes the state its watchers are told."""
    from acquire.production.check_guard import guard_blocks
    from acquire.production.station_watch import describe

    return lambda status: describe(status, facts, station.blocks, guard_blocks(station.check))


def run(args: argparse.Namespace) -> int:
    from contextlib import ExitStack

    from acquire.display import text_console
    from acquire.production.measure import apply_settings
    from acquire.production.outbox import Outbox, RecordKeeper, default_outbox_path
    from acquire.production.plan_file import load_plan
    from acquire.production.reference_guard import newest_for_fixture
    from acquire.production.screen import StationScreen
    from acquire.production.station import Station, StationContext
    from acquire.production.station_watch import StationFacts, WatchedScreen
    from acquire.store import open_store
    from acquire.store.schema import utc_now
    from acquire.sweep_setup import find_reference_set
    from drivers.bias import CurrentSource
    from drivers.meter import ImpedanceMeter

    plan = load_plan(args.plan)
    lot, operator = _name(args.lot, "--lot"), _name(args.operator, "--operator")
    station_name = _name(args.station or "", "--station")
    _check_publish(args)
    override = _reason(args.use_stale_references)
    interactive = sys.stdin.isatty()
    if not interactive and hasattr(sys.stdin, "reconfigure"):
        sys.stdin.reconfigure(errors="replace")  # an undecodable line is a refused serial
    temperature = _temperature(plan, args.temperature, interactive)
    console = text_console()
    outbox_path = args.outbox or default_outbox_path(args.store, station_name)
    with open_store(args.store) as store, Outbox(outbox_path) as outbox:
        keeper = RecordKeeper(store, outbox)
        flushed = keeper.flush()
        if flushed:
            console.print(f"{flushed} units waiting in {outbox_path} were written to the store")

        def reload() -> tuple[int | None, object]:
            if args.reference:
                return find_reference_set(store, args.reference)
            return newest_for_fixture(store, plan.fixture)

        references = reload()
        with ExitStack() as bench:
            meter = bench.enter_context(
                ImpedanceMeter.open(args.resource, dialect=args.dialect, backend=args.backend)
            )
            source = None
            if args.bias_source and plan.needs_bias:
                source = bench.enter_context(
                    CurrentSource.open(args.bias_source, dialect=args.bias_source_dialect)
                )
            supply = _bias_supply(plan, meter, source)
            _check_uncertainty_known(plan, meter)
            apply_settings(meter, plan)
            identity = meter.identify()
            meter_id = store.record_meter(
                identity.manufacturer, identity.model, identity.serial, identity.firmware,
                dialect=meter.dialect.name,
            )  # fmt: skip
            context = StationContext(
                plan=plan,
                lot=lot,
                operator=operator,
                station=station_name,
                meter_name=str(identity),
                plan_id=store.record_plan(plan.text, plan.title),
                meter_id=meter_id,
                fixture_id=store.record_fixture(plan.fixture) if plan.fixture else None,
                temperature=temperature,
                override=override,
                supply=supply,
                unattended=args.unattended,
            )
            store.record_lot(lot)
            facts = StationFacts(
                plan_hash=plan.hash, meter=str(identity), fixture=plan.fixture,
                started_at=utc_now(),
            )  # fmt: skip
            publishers = _publish_watchers(args, store)
            watchers = _store_watchers(store) + publishers
            shown = StationScreen(console, interactive=interactive, bell=not args.no_bell)
            screen = WatchedScreen(shown, lambda status: station_state(status), watchers)
            station = Station(
                meter, context, keeper, screen, references, reload,
                history=lambda serial: [u.outcome for u in store.unit_attempts(serial)],
                check=_check_guard(store, plan),
            )  # fmt: skip
            station_state = _state_of(station, facts)
            earlier = store.lot_units(lot)
            earlier = earlier[earlier.station == station_name]
            if station.resume(earlier.itertuples()):
                station.message = (
                    f"lot {lot} goes on: {len(earlier)} attempts already recorded at this station"
                )
            try:
                final = station.run(interactive)
            except BaseException:
                ended = station.status()
                screen.end(ended, ended.message or "session ended by an error")
                raise
        if interactive:
            console.print()  # the summary starts below the prompt line it ended on
        if keeper.waiting:
            console.print(
                f"{keeper.waiting} units wait for the store: trying for up to "
                f"{FINAL_PATIENCE:g} s before the summary",
                soft_wrap=True,
            )
            keeper.flush_patiently(FINAL_PATIENCE)
            final = station.status()
        screen.end(final, final.message or "session ended")  # after the flush: those go out too
        console.print(screen.summary(final))
        if keeper.waiting:
            console.print(
                f"{keeper.waiting} units still wait in {outbox_path}: they are written the next "
                "time the station starts with the store reachable",
                soft_wrap=True,
            )
        for note in filter(None, (p.farewell() for p in publishers)):
            console.print(note, soft_wrap=True, markup=False)
    return 2 if final.blocked and not final.tested else 0
