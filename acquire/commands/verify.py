"""Check the station with its check standard: measure it, store the result, chart it.

A check standard is a reference coil kept with the station. Put it in the fixture and run
`acquire verify --standard NAME --plan FILE`: it is measured as a unit is (the plan's meter
settings, frequencies and checks, corrected with the station's references: the newest set of the
plan's fixture, or --reference), each checked quantity's value and expanded uncertainty are
stored against the standard, and each is charted: an individuals and moving-range chart whose
limits come from the standard's first 20 results (until then "limits being established: n of
20 results") and the run rules on the results after them (Western Electric, 1956; Nelson, 1984).
The terminal shows the last results with where each lies between the limits and the rules it
broke; --picture FILE draws one quantity's chart as a PNG (--quantity chooses which).

A plan whose [check_standard] names the standard stops its station while the newest check broke
a run rule or is older than the plan's max_age, until the standard is checked again or an
engineer acknowledges it: `acquire verify acknowledge --standard NAME --reason TEXT [--by NAME]`.
The acknowledgement is recorded on every unit tested under it. `acquire verify list` shows the
standards; `acquire verify chart --standard NAME` shows one without measuring.

Exit codes: 0 when the check breaks no rule, 1 when it breaks one, 2 on an error.

Safety: measure only a discharged standard that is not connected to any supply; mains-powered
fixtures must be set up as local codes, the meter maker's instructions and licensed practice
require.
"""

from __future__ import annotations

import argparse
import getpass
import os

from acquire.commands.options import add_dialect, add_resource, add_store

HELP = "measure the station's check standard and chart it; acknowledge a stopped station"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_resource(parser, required=False)
    add_dialect(parser)
    add_store(parser)
    parser.add_argument("--standard", help="the check standard's name (default: the plan's)")
    parser.add_argument("--plan", help="test plan file (TOML) whose settings and checks are used")
    parser.add_argument(
        "--station",
        default=os.environ.get("ACQUIRE_STATION", ""),
        help="name of this station (env ACQUIRE_STATION)",
    )
    parser.add_argument("--reference", help="reference set: id or name (default: the newest)")
    parser.add_argument("--temperature", help="winding temperature, e.g. 23C, for a per-lot plan")
    _chart_options(parser, None)
    actions = parser.add_subparsers(
        dest="action",
        metavar="[ACTION]",
        required=False,
        title="actions (without one, the command measures the standard)",
    )
    ack = actions.add_parser(
        "acknowledge", help="let a stopped station go on, with a reason recorded on its units"
    )
    ack.add_argument("--reason", required=True, help="why the station may go on")
    ack.add_argument("--by", help="who acknowledges (default: the login name)")
    lst = actions.add_parser("list", help="list the check standards in the store")
    chart = actions.add_parser("chart", help="show a standard's chart without measuring")
    for sub in (ack, lst, chart):
        sub.add_argument("--store", default=argparse.SUPPRESS, help="results store URL")
    for sub in (ack, chart):
        sub.add_argument("--standard", default=argparse.SUPPRESS, help="the standard's name")
        sub.add_argument("--plan", default=argparse.SUPPRESS, help="test plan (for its max_age)")
    _chart_options(chart, argparse.SUPPRESS)


def _chart_options(parser: argparse.ArgumentParser, default: object) -> None:
    parser.add_argument("--picture", metavar="FILE.png", default=default, help="write a PNG chart")
    parser.add_argument(
        "--quantity",
        default=default,
        help="the quantity --picture draws, as the plan names it (e.g. Ls@10000; default: first)",
    )
    parser.add_argument(
        "--last", type=int, default=10 if default is None else default, help="results shown"
    )


def run(args: argparse.Namespace) -> int:
    action = getattr(args, "action", None)
    if action == "acknowledge":
        return _acknowledge(args)
    if action == "list":
        return _list(args)
    if action == "chart":
        return _chart(args)
    return _measure(args)


def _name(text: str | None, option: str) -> str:
    from acquire.errors import InputError

    name = " ".join(str(text or "").split())
    if not name or not name.isprintable():
        raise InputError(f"{option} needs a printable name, not {text!r}")
    return name


def _plan(args: argparse.Namespace, required: bool):
    from acquire.errors import InputError
    from acquire.production.plan_file import load_plan

    if not args.plan:
        if required:
            raise InputError("give --plan FILE: the check standard is measured as its plan says")
        return None
    return load_plan(args.plan)


def _standard(args: argparse.Namespace, plan) -> str:
    from acquire.errors import InputError

    given = args.standard or (plan.check_standard.name if plan and plan.check_standard else None)
    if not given:
        raise InputError(
            'give --standard NAME (or name it in the plan: [check_standard] name = "...")'
        )
    return _name(given, "--standard")


def _max_age(plan) -> float | None:
    return plan.check_standard.max_age if plan and plan.check_standard else None


def _temperature(plan, text: str | None) -> float | None:
    from acquire.errors import InputError
    from acquire.units import parse_temperature

    if plan.temperature.source == "fixed":
        return plan.temperature.value
    if plan.temperature.source != "per-lot":
        return None
    if text is None:
        raise InputError("the plan takes the winding temperature per lot: give --temperature")
    return parse_temperature(text)


def _measure(args: argparse.Namespace) -> int:
    import numpy as np

    from acquire.display import text_console
    from acquire.errors import InputError
    from acquire.msa.check_standard import check_values
    from acquire.production.measure import apply_settings, measure_unit
    from acquire.production.reference_guard import (
        CAPTURE_HINT,
        check_problems,
        newest_for_fixture,
        reference_blocks,
    )
    from acquire.store import open_store
    from acquire.sweep_setup import find_reference_set
    from drivers.meter import ImpedanceMeter

    if not args.resource:
        raise InputError("give --resource (or ACQUIRE_RESOURCE): the meter to measure with")
    plan = _plan(args, required=True)
    standard = _standard(args, plan)
    station = " ".join(str(args.station).split())
    temperature = _temperature(plan, args.temperature)
    console = text_console()
    with open_store(args.store) as store:
        if args.reference:
            _, refs = find_reference_set(store, args.reference)
        else:
            _, refs = newest_for_fixture(store, plan.fixture)
        with ImpedanceMeter.open(
            args.resource, dialect=args.dialect, backend=args.backend
        ) as meter:
            identity = str(meter.identify())
            problems = check_problems(refs, plan.frequencies) if refs is not None else None
            found = reference_blocks(
                refs, identity, plan.fixture, plan.max_reference_age, problems=problems
            )
            if found:
                raise InputError(
                    f"{'; '.join(found)}: the standard is measured with the station's own "
                    f"references. {CAPTURE_HINT.split(', then')[0]}, then check again"
                )
            apply_settings(meter, plan)
            measured = measure_unit(meter, plan, refs, temperature)
        if measured.error:
            raise InputError(f"the check was not stored: {measured.error}; measure it again")
        history: dict[str, list[float]] = {}
        for row in store.check_history(standard):
            history.setdefault(row.quantity, []).append(row.value)
        values = check_values(plan, measured, {k: np.array(v) for k, v in history.items()})
        store.save_check(standard, values, station, plan.hash)
        console.print(
            f"check standard {standard!r} measured at station {station or '(not named)'!r} "
            f"with plan {plan.title!r}: stored",
            soft_wrap=True,
        )
        broke = any(v.rules for v in values)
        _show(console, store, standard, args, _max_age(plan))
    return 1 if broke else 0


def _show(console, store, standard: str, args: argparse.Namespace, max_age) -> None:
    """Print the standard's charts and state; write the picture asked for."""
    from acquire.msa.check_standard import standard_charts

    charts = standard_charts(store.check_history(standard))
    summary = store.check_summary(standard)
    if not charts:
        console.print(f"check standard {standard!r} has no stored check", soft_wrap=True)
    for chart in charts:
        for line in table_of(chart, max(int(args.last or 10), 1)):
            console.print(line, soft_wrap=True)
    for line in state_lines(summary, max_age):
        console.print(line, soft_wrap=True)
    if getattr(args, "picture", None):
        _picture(console, charts, standard, args.picture, getattr(args, "quantity", None))


def _picture(console, charts, standard: str, path: str, quantity: str | None) -> None:
    from pathlib import Path

    from acquire.errors import InputError
    from acquire.msa.check_pictures import check_png

    if not charts:
        raise InputError(f"check standard {standard!r} has no stored check to draw")
    picked = [c for c in charts if c.quantity == quantity] if quantity else charts[:1]
    chosen = picked[0] if picked else None
    if chosen is None:
        known = ", ".join(c.quantity for c in charts)
        raise InputError(f"--quantity {quantity!r} was not checked; choose one of {known}")
    Path(path).write_bytes(check_png(chosen, standard))
    console.print(f"chart of {chosen.quantity} written to {path}", soft_wrap=True)


def _acknowledge(args: argparse.Namespace) -> int:
    from acquire.commands.options import open_existing_store
    from acquire.display import format_duration, text_console
    from acquire.errors import InputError
    from acquire.production.check_guard import standing_blocks

    plan = _plan(args, required=False)
    standard = _standard(args, plan)
    reason = " ".join(args.reason.split())
    if not reason:
        raise InputError('--reason needs text, e.g. "standard re-seated, recheck at 14:00"')
    by = _name(args.by or os.environ.get("ACQUIRE_USER") or getpass.getuser(), "--by")
    max_age = _max_age(plan)
    console = text_console()
    with open_existing_store(args.store) as store:
        summary = store.check_summary(standard)
        found = standing_blocks(summary, max_age)
        if not found:
            more = "" if plan else " (give --plan to count the plan's maximum age too)"
            raise InputError(
                f"nothing to acknowledge: check standard {standard!r} stops no station{more}"
            )
        ack = store.acknowledge_check(standard, by, reason, "; ".join(found), summary.last_check_id)
    lasts = f"for at most {format_duration(max_age)}" if max_age else "with no time limit"
    console.print(
        f"acknowledgement {ack.id} recorded by {by!r} for check standard {standard!r}: "
        f"{'; '.join(found)}. Reason: {reason}. It lets the station go on until the standard's "
        f"next check ({lasts}); every unit tested meanwhile records it.",
        soft_wrap=True,
    )
    return 0


def _list(args: argparse.Namespace) -> int:
    from acquire.commands.options import open_existing_store
    from acquire.display import text_console

    console = text_console()
    with open_existing_store(args.store) as store:
        found = store.list_check_standards()
    if not found:
        console.print("no check standards in the store", soft_wrap=True)
    for name, checks, last in found:
        when = "never" if last is None else f"{last:%Y-%m-%d %H:%M} UTC"
        console.print(f"{name!r}: {checks} checks, last {when}", soft_wrap=True)
    return 0


def _chart(args: argparse.Namespace) -> int:
    from acquire.commands.options import open_existing_store
    from acquire.display import text_console

    plan = _plan(args, required=False)
    standard = _standard(args, plan)
    console = text_console()
    with open_existing_store(args.store) as store:
        _show(console, store, standard, args, _max_age(plan))
    return 0


def table_of(chart, last: int) -> list[str]:
    """A quantity's limits and its ``last`` results: time, value ± U, position, rules."""
    from acquire.display import format_measured, format_value
    from acquire.msa.check_standard import establishing_text, position_strip

    name = chart.quantity.split("@", 1)[0]
    held = chart.chart
    head = establishing_text(chart.valid, chart.baseline)
    if held is not None:
        head = (
            f"limits from the first {chart.baseline} results: center "
            f"{format_value(name, held.center)}, limits {format_value(name, held.lcl)} to "
            f"{format_value(name, held.ucl)} (3 sigma, sigma = average moving range / 1.128 = "
            f"{format_value(name, held.sigma)})"
        )
    lines = [f"{chart.quantity}: {head}", f"{'#':>5}  {'checked (UTC)':16}  {'value ± U':26}  "
             f"{'LCL  center  UCL':^25}  rules broken"]  # fmt: skip
    n = len(chart.values)
    for i in range(max(n - last, 0), n):
        value = chart.values[i]
        shown = format_measured(name, value, chart.uncertainty[i])
        strip = position_strip(value, held) if held is not None else ""
        rules = ", ".join(chart.rules[i]) or "-"
        lines.append(
            f"{i + 1:>5}  {chart.times[i]:%Y-%m-%d %H:%M}  {shown:26}  {strip:25}  {rules}"
        )
    return lines


def state_lines(summary, max_age: float | None) -> list[str]:
    """Whether the standard stops a station whose plan names it, and what to do."""
    from acquire.display import format_duration
    from acquire.production.check_guard import in_force, standing_blocks

    name = summary.standard
    found = standing_blocks(summary, max_age)
    ack = in_force(summary, max_age)
    if not found:
        due = f" (checks older than {format_duration(max_age)} stop it)" if max_age else ""
        return [f"check standard {name!r} lets its station run{due}"]
    if ack is not None:
        return [
            f"check standard {name!r}: {'; '.join(found)}; acknowledgement {ack.id} by "
            f"{ack.made_by!r} lets its station run (reason: {ack.reason})"
        ]
    return [
        f"STOPPED: a station whose plan names check standard {name!r} is stopped: "
        f"{'; '.join(found)}",
        f"An engineer may let it go on: acquire verify acknowledge --standard {name!r} "
        '--reason "..."',
    ]
