"""A production lot (or any selection of stored units) in numbers, and its units as CSV.

Prints how many units (serial numbers) and test attempts the selection holds, the first-pass
yield (serials whose first attempt passed) and the final yield (serials whose latest attempt
passed), the bins and the failing checks of each serial's latest attempt, and per judged
quantity the mean, the standard deviation, min and max of every attempt's readings with the
process capability indices:

  Cp  = (USL - LSL) / 6σ            Cpk = min(USL - mean, mean - LSL) / 3σ

USL and LSL are the test plan's tolerance limits (not the guard-banded acceptance limits). Cp
and Cpk use the within sigma, the mean moving range of the readings in test order divided by
d2 = 1.128; Pp and Ppk the same formulas with the overall standard deviation. With one limit only
Cp and Pp are not defined and Cpk, Ppk use that side (NIST/SEMATECH e-Handbook of Statistical
Methods, 6.1.6 and 6.3.2).

Select units by LOT and/or --since/--until (the time a unit was finished; ISO 8601 such as
2026-03-02 or 2026-03-02T14:00, without an offset in UTC, as the lists print times), --station
and --plan (a test plan's name as stored, or the first characters of its hash). LOT may be left
out when another filter is given. --csv-long writes a row per measurement, --csv-wide a row per
unit attempt with a column per quantity (its unit in brackets) and one for its uncertainty.
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_store, print_json

HELP = "a lot's yields, bins and capability (Cp, Cpk, Pp, Ppk); its units as CSV"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("lot", nargs="?", help="lot name (may be omitted with another filter)")
    parser.add_argument("--since", help="units finished at or after this time (ISO 8601, UTC)")
    parser.add_argument("--until", help="units finished before this time (ISO 8601, UTC)")
    parser.add_argument("--station", help="units of this station only")
    parser.add_argument("--plan", help="units tested with this plan (name, or hash prefix)")
    parser.add_argument("--json", action="store_true", help="print the statistics as JSON")
    parser.add_argument("--csv-long", metavar="FILE", help="write a row per measurement")
    parser.add_argument("--csv-wide", metavar="FILE", help="write a row per unit attempt")
    add_store(parser)


def filter_from_args(args: argparse.Namespace):
    """The LotFilter the arguments describe; refuses an empty one."""
    from acquire.commands.options import lot_filter_from_args
    from acquire.errors import InputError

    chosen = lot_filter_from_args(args, args.lot)
    if chosen.empty:
        raise InputError("give a LOT, or select units with --since, --until, --station or --plan")
    return chosen


def show(value: float | None, unit: str) -> str:
    """A value for people: SI prefixes with a unit, plain digits without one."""
    import math

    from acquire.units import format_si

    if value is None or math.isnan(value):
        return "—"
    if unit:
        return format_si(value, unit)
    return f"{value:.4g}"


def index(value: float) -> str:
    import math

    return "—" if math.isnan(value) else f"{value:.2f}"


def quantity_label(parameter: str, frequency: float | None) -> str:
    from acquire.units import format_si

    if frequency is None:
        return f"{parameter} (DC)"
    return f"{parameter} @ {format_si(frequency, 'Hz')}"


def limits_text(low: float | None, high: float | None, unit: str) -> str:
    if low is None and high is None:
        return "—"
    if low is None:
        return f"≤ {show(high, unit)}"
    if high is None:
        return f"≥ {show(low, unit)}"
    return f"{show(low, unit)} … {show(high, unit)}"


def print_text(stats, console) -> None:
    from rich.table import Table
    from rich.text import Text

    from acquire.report.statistics import COUNTING_NOTE, SIGMA_NOTE, key_name

    selection = ", ".join(f"{k} {v}" for k, v in stats.filter.describe().items())
    console.print(Text(f"selection: {selection}"))
    console.print(
        Text(
            f"{stats.units} units in {stats.attempts} attempts; first-pass yield "
            f"{_percent(stats.first_pass_yield)} ({stats.first_pass}), final yield "
            f"{_percent(stats.yield_)} ({stats.passed})"
        )
    )
    bins = " · ".join(f"{name or '(no bin)'} {n}" for name, n in stats.bins.items())
    console.print(Text(f"bins (latest attempt per serial): {bins or 'none'}"))
    failing = " · ".join(f"{key_name(key)}: {n}" for key, n in stats.failing.items())
    console.print(Text(f"failing checks (latest attempt per serial): {failing or 'none'}"))
    table = Table(title=None, show_edge=False)
    for name in ("quantity", "n", "mean", "std", "min", "max", "tolerance"):
        table.add_column(name, justify="left" if name in ("quantity", "tolerance") else "right")
    for name in ("Cp", "Cpk", "Pp", "Ppk"):
        table.add_column(name, justify="right")
    for q in stats.quantities:
        u = q.unit
        table.add_row(
            Text(quantity_label(q.parameter, q.frequency)),
            f"{q.valid}" if q.valid == q.count else f"{q.valid}/{q.count}",
            show(q.mean, u),
            show(q.std, u),
            show(q.minimum, u),
            show(q.maximum, u),
            Text(limits_text(q.tolerance_low, q.tolerance_high, u)),
            *(index(v) for v in (q.cp, q.cpk, q.pp, q.ppk)),
        )
    if stats.quantities:
        console.print(table)
    else:
        console.print("no measurements in the selection")
    console.print(Text(SIGMA_NOTE))
    console.print(Text(COUNTING_NOTE))


def _percent(value: float) -> str:
    import math

    return "—" if math.isnan(value) else f"{value:.1%}"


def run(args: argparse.Namespace) -> int:
    from rich.console import Console
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.destination import check_destination
    from acquire.report.lot_export import units_long, units_wide, write_csv
    from acquire.report.statistics import lot_statistics

    chosen = filter_from_args(args)
    with open_existing_store(args.store) as store:
        for option, target in (("--csv-long", args.csv_long), ("--csv-wide", args.csv_wide)):
            if target:
                check_destination(target, store, option)
        stats = lot_statistics(store, chosen)
        heading = {"store": store.url, **chosen.describe(), "units": str(stats.units)}
        heading["values"] = "SI units as the column 'unit' or the header's brackets say"
        heading["uncertainty"] = "expanded uncertainty U (k = 2)"
        written = []
        if args.csv_long:
            frame = units_long(store, chosen)
            written.append(write_csv(frame, args.csv_long, {**heading, "layout": "long"}))
        if args.csv_wide:
            frame = units_wide(store, chosen)
            written.append(write_csv(frame, args.csv_wide, {**heading, "layout": "wide"}))
    if args.json:
        document = {"command": "lot", **stats.to_json()}
        print_json(document, allow_nan=False)
        return 0
    console = Console(highlight=False, emoji=False)
    if not console.is_terminal:
        console = Console(highlight=False, emoji=False, width=160)
    print_text(stats, console)
    for path in written:
        console.print(Text(f"wrote {path}"))
    return 0
