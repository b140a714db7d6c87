"""Capture, list, show and check reference sets: the fixture's open, short and load readings.

A fixture's leads and clips add series resistance and inductance and a stray capacitance and
conductance across the part. Measuring the fixture three ways removes them from later readings:
OPEN (fixture empty: gives the stray admittance), SHORT (fixture shorted where the part sits:
gives the series residual) and, for the best accuracy, LOAD (a standard of known impedance,
such as a 100 ohm resistor, in the fixture: corrects what the first two leave). The set is
captured over a frequency plan; sweeps then correct each reading with it (`acquire sweep
--reference ID`).

  capture   guided capture on a named fixture: for each standard you are told what to do, press
            Enter, the meter measures, and a reading that does not look like its standard (a
            "short" that reads like an open fixture) is refused with a chance to retry
  list      the stored sets with their age, fixture and meter
  show      one set: its metadata and readings at a few frequencies
  check     judge a stored set again; exit code 1 when it has errors
  export    write a stored set to a checked JSON file (its SHA-256 digest inside), for another
            store or a bench without one
  import    read such a file into the store (a damaged or hand-edited file is refused)

Safety: measure only discharged parts that are not connected to any supply; an inductor that
carried DC bias stores energy and can kick when its current is broken. Mains-powered fixtures
must be set up as local codes, the meter maker's instructions and licensed practice require.
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_dialect, add_plan_arguments, add_resource, add_store

HELP = "capture, list, show, check, export and import fixture reference sets (open, short, load)"

CAPTURE_DESCRIPTION = """\
Guided capture of open, short and (with --load-value) load references on a fixture, over a
frequency plan, saved in the store. For each standard you are told what to do to the fixture;
press Enter to measure. A reading that does not look like its standard is refused, with a
chance to measure again.

Safety: discharge parts before handling them; an inductor that carried DC bias stores energy.
Mains-powered fixtures and bias supplies: follow local codes, the meter maker's instructions
and licensed practice.
"""


def add_arguments(parser: argparse.ArgumentParser) -> None:
    actions = parser.add_subparsers(dest="action", metavar="ACTION", required=True)
    cap = actions.add_parser(
        "capture",
        help="guided capture of open/short/load on a fixture",
        description=CAPTURE_DESCRIPTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    add_resource(cap)
    add_dialect(cap)
    add_store(cap)
    add_plan_arguments(cap)
    cap.add_argument("--fixture", required=True, help="name of the fixture (e.g. bench-clips)")
    cap.add_argument(
        "--standards",
        help="standards to capture, comma-separated, among open, short, load (default "
        "open,short, or open,short,load when --load-value is given)",
    )
    cap.add_argument(
        "--load-value",
        help="the load standard's true resistance, e.g. 100ohm (needed for load)",
    )
    cap.add_argument(
        "--load-reactance",
        default="0",
        help="the load standard's true reactance in ohm (default 0)",
    )
    cap.add_argument("--name", help="a name for the set (default: fixture and date)")
    cap.add_argument("--temperature", type=float, help="fixture temperature in °C, if known")
    cap.add_argument("--notes", default="", help="free text kept with the set")
    cap.add_argument("--attempts", type=int, default=3, help="readings allowed per standard")
    cap.add_argument(
        "--repeats",
        type=int,
        default=3,
        metavar="N",
        help="read each standard N times and keep the mean and its scatter (the scatter is the "
        "standard's Type A uncertainty, carried into every corrected point; default 3)",
    )
    lst = actions.add_parser("list", help="list the stored reference sets")
    add_store(lst)
    show = actions.add_parser("show", help="show one stored reference set")
    add_store(show)
    show.add_argument("set", metavar="ID", help="id or name of the set, or 'latest'")
    chk = actions.add_parser("check", help="judge a stored reference set")
    add_store(chk)
    chk.add_argument("set", metavar="ID", help="id or name of the set, or 'latest'")
    exp = actions.add_parser("export", help="write a stored reference set to a JSON file")
    add_store(exp)
    exp.add_argument("set", metavar="ID", help="id or name of the set, or 'latest'")
    exp.add_argument("file", metavar="FILE", help="the JSON file to write (replaced if it exists)")
    imp = actions.add_parser("import", help="read a reference-set JSON file into the store")
    add_store(imp)
    imp.add_argument("file", metavar="FILE", help="a file written by `acquire reference export`")
    imp.add_argument("--name", help="a name for the set (default: fixture, date and 'imported')")


def run(args: argparse.Namespace) -> int:
    actions = {"capture": _capture, "list": _list, "show": _show, "check": _check}
    actions.update({"export": _export, "import": _import})
    return actions[args.action](args)


def _capture(args: argparse.Namespace) -> int:
    from acquire.capture import SAFETY, ConsoleOperator, capture_references
    from acquire.commands.options import plan_from_args
    from acquire.display import text_console
    from acquire.errors import InputError
    from acquire.store import open_store
    from acquire.units import parse_quantity
    from drivers.meter import ImpedanceMeter

    plan = plan_from_args(args)
    if args.repeats < 1:
        raise InputError("--repeats must be 1 or more (readings of each standard)")
    chosen = args.standards or ("open,short,load" if args.load_value else "open,short")
    standards = [s.strip().lower() for s in chosen.split(",") if s.strip()]
    load_true = None
    if "load" in standards:
        if not args.load_value:
            raise InputError("capturing a load needs --load-value (the standard's true resistance)")
        load_true = complex(
            parse_quantity(args.load_value, "ohm"), parse_quantity(args.load_reactance, "ohm")
        )
    console = text_console()
    console.print(SAFETY, style="yellow")
    with open_store(args.store) as store:
        with ImpedanceMeter.open(
            args.resource, dialect=args.dialect, backend=args.backend
        ) as meter:
            identity = meter.identify()
            console.print(f"meter: {identity}")
            refs = capture_references(
                meter,
                plan,
                ConsoleOperator(say=console.print),
                standards=standards,
                load_true=load_true,
                fixture=args.fixture,
                meter_name=str(identity),
                temperature=args.temperature,
                notes=args.notes,
                attempts=args.attempts,
                repeats=args.repeats,
            )
            meter_id = store.record_meter(
                identity.manufacturer,
                identity.model,
                identity.serial,
                identity.firmware,
                dialect=meter.dialect.name,
            )
        fixture_id = store.record_fixture(args.fixture)
        name = args.name or f"{args.fixture} {refs.captured_at:%Y-%m-%d %H:%M}"
        ref_id = store.save_reference_set(refs, name=name, meter_id=meter_id, fixture_id=fixture_id)
        console.print(
            f"saved reference set {ref_id} ({name!r}, {refs.method}, {refs.frequency.size} "
            f"points) in {store.url}; each standard read "
            + ("once" if args.repeats == 1 else f"{args.repeats} times"),
            soft_wrap=True,
        )
    return 0


def _list(args: argparse.Namespace) -> int:
    from datetime import UTC, datetime

    from rich.table import Table

    from acquire.commands.options import open_existing_store
    from acquire.display import format_duration, text_console
    from acquire.store.quick_read import list_reference_sets

    console = text_console()
    listed = list_reference_sets(args.store)  # read only, without SQLAlchemy, when it can be
    if listed is None:
        with open_existing_store(args.store) as store:
            listed = store.url, store.list_reference_sets()
    url, infos = listed
    if not infos:
        console.print(f"no reference sets in {url}")
        return 0
    console.print(f"reference sets in {url}", soft_wrap=True)
    table = Table()
    for col in ("id", "name", "fixture", "standards", "captured (UTC)", "age"):
        table.add_column(col, justify="right" if col in ("id", "age") else "left")
    now = datetime.now(UTC)
    for info in infos:
        when = info.captured_at
        table.add_row(
            str(info.id),
            info.name,
            info.fixture,
            "-".join(info.standards),
            f"{when:%Y-%m-%d %H:%M}" if when else "—",
            format_duration((now - when).total_seconds()) if when else "—",
        )
    console.print(table)
    return 0


def _show(args: argparse.Namespace) -> int:
    from rich.table import Table

    from acquire.commands.options import open_existing_store
    from acquire.display import text_console
    from acquire.impedance import quantities
    from acquire.resonance import summary_frequencies
    from acquire.sweep_setup import find_reference_set
    from acquire.units import format_si

    console = text_console()
    with open_existing_store(args.store) as store:
        ref_id, refs = find_reference_set(store, args.set)
    f = refs.frequency
    console.print(
        f"reference set {ref_id}: {refs.method} on fixture {refs.fixture or '(unnamed)'}, "
        f"{f.size} points from {format_si(f[0], 'Hz')} to {format_si(f[-1], 'Hz')}"
    )
    when = f"{refs.captured_at:%Y-%m-%d %H:%M:%S} UTC" if refs.captured_at else "unknown"
    console.print(f"captured {when} on {refs.meter or 'an unrecorded meter'}")
    if refs.temperature is not None:
        console.print(f"temperature {refs.temperature:g} °C")
    if refs.notes:
        console.print(f"notes: {refs.notes}")
    picks = summary_frequencies(f)
    table = Table(title="readings (|Z| and phase)", title_justify="left")
    table.add_column("f", justify="right")
    present = [s for s in ("open", "short", "load") if getattr(refs, s) is not None]
    for s in present:
        table.add_column(f"{s} |Z|", justify="right")
        table.add_column(f"{s} θ", justify="right")
    for i in picks:
        row = [format_si(float(f[i]), "Hz")]
        for s in present:
            q = quantities(f[i : i + 1], getattr(refs, s)[i : i + 1])
            row += [format_si(float(q["Z"][0]), "Ω"), f"{float(q['theta'][0]):.2f}°"]
        table.add_row(*row)
    console.print(table)
    return 0


def _check(args: argparse.Namespace) -> int:
    from acquire.commands.options import open_existing_store
    from acquire.display import text_console
    from acquire.sweep_setup import find_reference_set

    console = text_console()
    with open_existing_store(args.store) as store:
        ref_id, refs = find_reference_set(store, args.set)
    findings = refs.check()
    if not findings:
        console.print(f"reference set {ref_id} ({refs.method}): no problems found")
        return 0
    for finding in findings:
        style = "red" if finding.severity == "error" else "yellow"
        console.print(f"{finding.severity}: {finding.standard}: {finding.message}", style=style)
    errors = sum(1 for finding in findings if finding.severity == "error")
    warnings = len(findings) - errors
    console.print(
        f"reference set {ref_id}: {errors} error{'' if errors == 1 else 's'}, "
        f"{warnings} warning{'' if warnings == 1 else 's'}"
    )
    return 1 if errors else 0


def _export(args: argparse.Namespace) -> int:
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.destination import check_destination
    from acquire.display import text_console
    from acquire.sweep_setup import find_reference_set

    with open_existing_store(args.store) as store:
        path = check_destination(args.file, store, "reference export")
        ref_id, refs = find_reference_set(store, args.set)
    refs.save(path)
    text_console().print(
        Text(f"reference set {ref_id} ({refs.method}, {refs.frequency.size} points) written to "
             f"{path}"),
        soft_wrap=True,
    )  # fmt: skip
    return 0


def _import(args: argparse.Namespace) -> int:
    from rich.text import Text

    from acquire.compensation.reference_set import ReferenceSet
    from acquire.display import text_console
    from acquire.errors import InputError
    from acquire.store import open_store

    try:
        refs = ReferenceSet.read(args.file)
    except (ValueError, OverflowError) as exc:
        # A number too large for a float64 (1e400, or a 400-digit integer) is refused here.
        raise InputError(
            f"{args.file} is damaged or not a reference-set file ({exc}); restore a copy or "
            "export it again"
        ) from None
    name = args.name if args.name is not None else _imported_name(refs, args.file)
    if not " ".join(name.split()):
        raise InputError("--name needs some text (or leave it out for a name made up for you)")
    with open_store(args.store) as store:
        created = store.created
        fixture_id = store.record_fixture(refs.fixture) if refs.fixture else None
        ref_id = store.save_reference_set(refs, name=name, fixture_id=fixture_id)
        url = store.url
    findings = refs.check()
    errors = sum(1 for finding in findings if finding.severity == "error")
    console = text_console()
    if created:
        console.print(Text(f"made a new results store at {url}"), soft_wrap=True)
    console.print(
        Text(f"imported reference set {ref_id} ({name!r}, {refs.method}, "
             f"{refs.frequency.size} points) into {url}"),
        soft_wrap=True,
    )  # fmt: skip
    if errors:
        console.print(
            Text(f"warning: it fails its check ({errors} error{'' if errors == 1 else 's'}); "
                 f"`acquire reference check {ref_id}` says what", style="yellow"),
            soft_wrap=True,
        )  # fmt: skip
    return 0


def _imported_name(refs, file: str) -> str:
    from pathlib import Path

    when = f" {refs.captured_at:%Y-%m-%d %H:%M}" if refs.captured_at else ""
    return f"{refs.fixture or Path(file).stem}{when} (imported)"
