"""Sweep a part across frequency with the meter, live, and store every point.

The meter measures the part's complex impedance Z = R + jX at each frequency of a plan (log or
linear from --start to --stop, or a --list, or a --file of frequencies). Each reading is
corrected with a stored reference set (--reference: open, short and load readings of the
fixture captured with `acquire reference capture`), so the leads and clips of the fixture are
removed from the result; without one, the raw readings are shown and stored.

Shown live: Ls and Rs (inductance and resistance of the series equivalent circuit) and
Q = X/R (quality factor) against log frequency, by default; --show picks others among Ls, Rs, Cs,
Lp, Rp, Cp (parallel equivalents), Q, D = 1/Q (dissipation factor), Z (|Z|), theta (phase in
degrees), X, G and B (conductance and susceptance). A coil's self-resonance, where its reactance
turns from inductive to capacitive, is marked on the plots.

Every point goes to the results store as it arrives. Ctrl-C, or a fault on the meter, ends the
sweep with the completed points saved and marked interrupted; the command says where.

Safety: measure only discharged parts that are not connected to any supply; an inductor that
carried DC bias stores energy. Mains-powered fixtures must be set up as local codes, the meter
maker's instructions and licensed practice require.
"""

from __future__ import annotations

import argparse
import os
import sys

from acquire.commands.options import add_dialect, add_resource, add_store

HELP = "sweep a part across frequency with the live view and store the points"

QUANTITIES = ("Ls", "Rs", "Cs", "Lp", "Rp", "Cp", "Q", "D", "Z", "theta", "X", "G", "B")


def add_plan_arguments(parser: argparse.ArgumentParser) -> None:
    """The frequency plan options (shared with `acquire reference capture`)."""
    g = parser.add_argument_group("frequency plan (a span, a --list or a --file)")
    g.add_argument("--start", help="lowest frequency, e.g. 100Hz (default 100Hz)")
    g.add_argument("--stop", help="highest frequency, e.g. 10MHz (default 10MHz)")
    g.add_argument("--points", type=int, help="number of frequencies in the span (default 201)")
    g.add_argument(
        "--spacing", choices=("log", "linear"), default="log", help="spacing of the span"
    )
    g.add_argument("--list", dest="values", help='explicit frequencies, e.g. "1k, 10k, 100kHz"')
    g.add_argument("--file", help="text file of frequencies (commas, spaces or lines; # comments)")


def plan_from_args(args: argparse.Namespace):
    """The plan the options describe; the default span is 100 Hz to 10 MHz, 201 points."""
    from acquire.plan import make_plan

    if not (args.values or args.file):
        start = args.start or "100Hz"
        stop = args.stop or "10MHz"
        return make_plan(start=start, stop=stop, points=args.points, spacing=args.spacing)
    if args.points:
        from acquire.errors import InputError

        raise InputError("--points goes with --start and --stop, not with --list or --file")
    return make_plan(start=args.start, stop=args.stop, values=args.values, file=args.file)


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_resource(parser)
    add_dialect(parser)
    add_store(parser)
    add_plan_arguments(parser)
    parser.add_argument(
        "--reference",
        help="reference set to correct with: its id, its name, or 'latest' (see `acquire "
        "reference list`); without it the raw readings are shown and stored",
    )
    parser.add_argument(
        "--max-reference-age",
        type=_hours,
        default=os.environ.get("ACQUIRE_MAX_REFERENCE_AGE", "8"),
        metavar="HOURS",
        help="warn when the reference set is older than this (default 8, env "
        "ACQUIRE_MAX_REFERENCE_AGE)",
    )
    parser.add_argument("--fixture", default="", help="name of the fixture the part sits in")
    parser.add_argument("--dut", default="", help="name or serial of the part measured")
    parser.add_argument(
        "--show",
        default="Ls,Rs,Q",
        help=f"quantities to plot, comma-separated, among {', '.join(QUANTITIES)} "
        "(default Ls,Rs,Q)",
    )
    parser.add_argument("--level", help="test-signal level, e.g. 1V or 100mV")
    parser.add_argument("--speed", choices=("fast", "medium", "slow"), help="measurement speed")
    parser.add_argument("--averaging", type=int, help="readings averaged per point")
    parser.add_argument("--csv", help="also write the sweep to this CSV file")
    parser.add_argument(
        "--no-live", action="store_true", help="print plain progress lines instead of the live view"
    )


def _hours(text: str) -> float:
    """A number of hours (argparse converts the option and its default from the environment)."""
    try:
        return float(text)
    except ValueError:
        raise argparse.ArgumentTypeError(
            f"{text!r} is not a number of hours (give e.g. 8, on the command line or in "
            "ACQUIRE_MAX_REFERENCE_AGE; 0 turns the age warning off)"
        ) from None


def parse_show(text: str) -> tuple[str, ...]:
    from acquire.errors import InputError

    names = tuple(n.strip() for n in text.split(",") if n.strip())
    lookup = {q.lower(): q for q in QUANTITIES}
    out = []
    for n in names:
        if n.lower() not in lookup:
            raise InputError(f"--show: unknown quantity {n!r}; choose from {', '.join(QUANTITIES)}")
        out.append(lookup[n.lower()])
    if not out:
        raise InputError("--show needs at least one quantity, e.g. Ls,Rs,Q")
    return tuple(out)


def run(args: argparse.Namespace) -> int:
    from rich.console import Console

    from acquire.capture import dut_warnings
    from acquire.commands.reference import find_reference_set
    from acquire.csvout import write_sweep_csv
    from acquire.dashboard import open_view, summary
    from acquire.plan import check_range
    from acquire.store import open_store
    from acquire.sweep import check_coverage, run_sweep
    from acquire.units import parse_quantity
    from drivers.meter import ImpedanceMeter

    plan = plan_from_args(args)
    show = parse_show(args.show)
    if args.csv:
        check_csv_destination(args.csv)
    level = parse_quantity(args.level, "V") if args.level else None
    console = Console()
    with open_store(args.store) as store:
        ref_id, refs = (None, None)
        if args.reference:
            ref_id, refs = find_reference_set(store, args.reference)
        with ImpedanceMeter.open(
            args.resource, dialect=args.dialect, backend=args.backend
        ) as meter:
            if level is not None or args.speed or args.averaging:
                meter.configure(level=level, speed=args.speed, averaging=args.averaging)
            check_range(plan, tuple(meter.frequency_range))
            if refs is not None:
                check_coverage(plan, refs)
            identity = meter.identify()
            state = prepare_state(plan, identity, refs, ref_id, args.fixture, args.dut, show)
            warn_about_references(state, refs, str(identity), args.fixture, args.max_reference_age)
            writer = begin(store, meter, identity, args.fixture, args.dut, ref_id, plan, show, args)
            state.destination = f"sweep {writer.id} in {store.url}"
            with open_view(state, live=not args.no_live, console=console) as view:
                outcome = run_sweep(meter, plan, refs, writer, state, on_progress=view.update)
        if refs is not None:
            for w in dut_warnings(refs, outcome.frequency, outcome.raw):
                state.warn(w)
        console.print(summary(state))
        if args.csv:
            path = write_sweep_csv(
                args.csv, outcome.frequency, outcome.raw, outcome.corrected, show
            )
            console.print(f"CSV written to {path}", soft_wrap=True)
        line = outcome.message(store.url)
    if not outcome.interrupted:
        console.print(line, soft_wrap=True)
        return 0
    print(f"acquire sweep: {line}", file=sys.stderr)
    return 130 if isinstance(outcome.error, KeyboardInterrupt) else 2


def check_csv_destination(path: str) -> None:
    """Refuse a CSV path whose folder is missing or not writable, before anything is measured."""
    import os
    from pathlib import Path

    from acquire.errors import InputError

    folder = Path(path).expanduser().resolve().parent
    if not folder.is_dir():
        raise InputError(f"--csv {path}: the folder {folder} does not exist; create it first")
    if not os.access(folder, os.W_OK):
        raise InputError(f"--csv {path}: the folder {folder} is not writable; choose another")


def prepare_state(plan, identity, refs, ref_id, fixture, dut, show):
    """A sweep state for the view, with the meter and the reference set described."""
    from acquire.progress import SweepState

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
        quantities=show,
        corrected_too=refs is not None,
    )


def warn_about_references(state, refs, meter_name: str, fixture: str, max_hours: float) -> None:
    """Put the reference set's warnings (age, meter, fixture, checks) on the view."""
    from acquire.capture import reference_warnings

    if refs is None:
        return
    max_age = None if max_hours is None or max_hours <= 0 else max_hours * 3600.0
    for w in reference_warnings(refs, meter_name, fixture, max_age):
        state.warn(w)


def begin(store, meter, identity, fixture, dut, ref_id, plan, show, args=None):
    """Record the meter and fixture and open a sweep in the store; returns its writer."""
    meter_id = store.record_meter(
        identity.manufacturer,
        identity.model,
        identity.serial,
        identity.firmware,
        dialect=getattr(getattr(meter, "dialect", None), "name", ""),
    )
    fixture_id = store.record_fixture(fixture) if fixture else None
    settings = {
        "plan": plan.describe(),
        "spacing": plan.spacing,
        "start_hz": plan.start,
        "stop_hz": plan.stop,
        "points": len(plan),
        "show": list(show),
    }
    for key in ("level", "speed", "averaging"):
        value = getattr(args, key, None) if args is not None else None
        if value is not None:
            settings[key] = value
    return store.begin_sweep(
        dut=dut,
        meter_id=meter_id,
        fixture_id=fixture_id,
        reference_set_id=ref_id,
        settings=settings,
    )
