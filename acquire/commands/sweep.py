"""Sweep a part across frequency with the meter, live, and store every point.

The meter measures the part's complex impedance Z = R + jX at each frequency of a plan (log or
linear from --start to --stop, or a --list, or a --file of frequencies). Each reading is
corrected with a stored reference set (--reference: open, short and load readings of the
fixture captured with `acquire reference capture`), so the leads and clips of the fixture are
removed from the result; without one, the raw readings are shown and stored. A reference set
that fails its own check (`acquire reference check`: open and short swapped, a short that reads
open, ...) is refused; --use-despite-problems REASON uses it anyway and keeps the reason with
the sweep. When most readings look like an empty fixture (nothing connected), the end of the
sweep says so.

Shown live: Ls and Rs (inductance and resistance of the series equivalent circuit) and
Q = X/R (quality factor) against log frequency, by default; --show picks others among Ls, Rs, Cs,
Lp, Rp, Cp (parallel equivalents), Q, D = 1/Q (dissipation factor), Z (|Z|), theta (phase in
degrees), X, G and B (conductance and susceptance). A coil's self-resonance, where its reactance
turns from inductive to capacitive, is marked on the plots.

Each point carries its expanded uncertainty (k = 2: about 95 % coverage) for R, X and the
quantities derived from them, from the meter's stated accuracy (the dialect's [accuracy]
table) and the scatter of repeated readings; --uncertainty shows it as ± U beside the values.
A value past what the tool can measure (its uncertainty as large as the value, or a negative
Rs or Q, which a passive part cannot have) is flagged and shown as "beyond accuracy", never as
a number, in the live view, the summary, the CSV file and the store.

Every point goes to the results store as it arrives. Ctrl-C, or a fault on the meter, ends the
sweep with the completed points saved and marked interrupted; the command says where.

Without measuring, a first word acts on the stored sweeps: `acquire sweep list` (with
--dut, --status, --since, --fixture), `acquire sweep show ID`, `acquire sweep export ID --csv
FILE | --json FILE | --touchstone FILE`, and `acquire sweep close [ID]` for sweeps whose
writing process died (each has its own --help).

Safety: measure only discharged parts that are not connected to any supply; an inductor that
carried DC bias stores energy. Mains-powered fixtures must be set up as local codes, the meter
maker's instructions and licensed practice require.
"""

from __future__ import annotations

import argparse
import os
import sys
from collections.abc import Callable

from acquire.commands.options import add_dialect, add_plan_arguments, add_resource, add_store

HELP = "sweep a part across frequency, live, and store the points; list, show, export stored sweeps"

QUANTITIES = ("Ls", "Rs", "Cs", "Lp", "Rp", "Cp", "Q", "D", "Z", "theta", "X", "G", "B")


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from acquire.commands.sweep_store import add_actions

    add_resource(parser, required=False)
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
    parser.add_argument(
        "--use-despite-problems",
        metavar="REASON",
        help="use a reference set that fails its check anyway; the reason is stored with the "
        "sweep and shown on the view (the corrected values may be wrong)",
    )
    parser.add_argument(
        "--uncertainty",
        action="store_true",
        help="show each value with its expanded uncertainty (k = 2) as ± U in the live view, "
        "the progress lines and the summary (the store and the CSV file always carry it)",
    )
    parser.add_argument(
        "--repeats",
        type=int,
        default=1,
        metavar="N",
        help="read every point N times and keep the mean, with the scatter of the readings as "
        "its Type A uncertainty (default 1: one reading, the meter's stated repeatability)",
    )
    parser.add_argument("--csv", help="also write the sweep to this CSV file")
    parser.add_argument(
        "--no-live", action="store_true", help="print plain progress lines instead of the live view"
    )
    add_actions(parser)


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
    if getattr(args, "action", None):
        from acquire.commands.sweep_store import run_action

        return run_action(args)
    if not args.resource:
        from acquire.errors import InputError

        raise InputError(
            "measuring needs --resource (or ACQUIRE_RESOURCE); to read stored sweeps give an "
            "action first: list, show, export or close"
        )
    return _measure(args)


def _measure(args: argparse.Namespace) -> int:
    from datetime import UTC, datetime

    from acquire.commands.options import plan_from_args
    from acquire.errors import InputError
    from acquire.plan import check_range
    from acquire.store.sqlite_sweeps import open_sweep_store
    from acquire.sweep import check_coverage, run_sweep
    from acquire.sweep_setup import (
        begin,
        find_reference_set,
        prepare_state,
        review_readings,
        uncertainty_model,
        warn_about_references,
    )
    from acquire.sweep_summary import summary
    from acquire.units import parse_quantity
    from drivers.meter import ImpedanceMeter

    plan = plan_from_args(args)
    show = parse_show(args.show)
    if args.repeats < 1:
        raise InputError("--repeats must be 1 or more (readings per point)")
    if args.csv:
        check_csv_destination(args.csv)
    override = _override(args.use_despite_problems)
    level = parse_quantity(args.level, "V") if args.level else None
    console = _console()
    with open_sweep_store(args.store) as store:
        if args.csv:
            from acquire.destination import check_destination

            check_destination(args.csv, store, "--csv")
        ref_id, refs = (None, None)
        if args.reference:
            ref_id, refs = find_reference_set(store, args.reference)
        used = _usable(refs, ref_id, override)
        if override and not used:
            what = (
                "no reference set is used" if refs is None else "the reference set passes its check"
            )
            console.print(
                f"note: {what}, so --use-despite-problems is not needed and nothing is recorded",
                soft_wrap=True,
            )
        with ImpedanceMeter.open(
            args.resource, dialect=args.dialect, backend=args.backend
        ) as meter:
            if level is not None or args.speed or args.averaging is not None:
                meter.configure(level=level, speed=args.speed, averaging=args.averaging)
            check_range(plan, meter.frequency_range)
            if refs is not None:
                check_coverage(plan, refs)
            identity = meter.identify()
            state = prepare_state(plan, identity, refs, ref_id, args.fixture, args.dut, show, used)
            warn_about_references(state, refs, str(identity), args.fixture, args.max_reference_age)
            model = uncertainty_model(meter, state, args.uncertainty)
            measurement = {
                "level": args.level,
                "speed": args.speed,
                "averaging": args.averaging,
                "repeats": args.repeats if args.repeats > 1 else None,
                "uncertainty": model.describe(),
            }
            writer = begin(store, meter, identity, args.fixture, args.dut, ref_id, plan, show,
                           measurement, references=refs, override=used)  # fmt: skip
            state.destination = f"sweep {writer.id} in {store.url}"
            started = datetime.now(UTC)
            with _view(state, not args.no_live, console) as view:
                outcome = run_sweep(
                    meter, plan, refs, writer, state, on_progress=_harmless(view.update),
                    uncertainty=model, repeats=args.repeats,
                )  # fmt: skip
                review_readings(state, refs)
        console.print(summary(state))
        if args.csv:
            from acquire.csvout import write_sweep_csv

            about = csv_heading(state, args, started, outcome)
            path = write_sweep_csv(
                args.csv, outcome.frequency, outcome.raw, outcome.corrected, show, about,
                cov=outcome.cov, flags=outcome.flags,
            )  # fmt: skip
            console.print(f"CSV written to {path}", soft_wrap=True)
        line = outcome.message(store.url)
    if state.open_fixture:
        line += "; but the readings look like an open fixture (nothing connected)"
    if not outcome.interrupted:
        console.print(line, soft_wrap=True)
        return 0
    print(f"acquire sweep: {line}", file=sys.stderr)
    return 130 if isinstance(outcome.error, KeyboardInterrupt) else 2


def _console():
    """Where the command prints: off a terminal, a console that prints rich's plain text
    without loading rich (:mod:`acquire.plain_console`); else rich's."""
    from acquire.plain_console import plain_console

    console = plain_console()
    if console is not None:
        return console
    from acquire.display import text_console

    return text_console()


def _view(state, live: bool, console):
    """The live view on a terminal unless --no-live, else plain progress lines (as
    :func:`acquire.dashboard.open_view` chooses, without loading rich for the lines)."""
    if not live or not console.is_terminal:
        from acquire.sweep_text import PlainProgress

        return PlainProgress(state, console.file)
    from acquire.dashboard import open_view

    return open_view(state, live=True, console=console)


def _harmless(update: Callable[[], None]) -> Callable[[], None]:
    """``update``, made unable to stop the sweep: a progress line that cannot be written (a
    terminal gone, a closed pipe) turns the progress display off; measuring and storing go on,
    so a sweep whose points all arrive is stored complete."""
    failed: list[Exception] = []

    def update_or_stay_quiet() -> None:
        if failed:
            return
        try:
            update()
        except (OSError, ValueError) as exc:  # ValueError: a closed file, an encoding
            failed.append(exc)

    return update_or_stay_quiet


def _override(text: str | None) -> str:
    """The reason given with --use-despite-problems, on one line; refuses an empty one."""
    from acquire.errors import InputError

    if text is None:
        return ""
    reason = " ".join(text.split())
    if not reason:
        raise InputError('--use-despite-problems needs a reason, e.g. "open re-taken tomorrow"')
    return reason


def _usable(refs, ref_id, override: str) -> str:
    """The override a failing set is used with, or a refusal that names the option."""
    from acquire.sweep_setup import ReferenceRefused, usable_reference

    try:
        return usable_reference(refs, ref_id, override)
    except ReferenceRefused as exc:
        raise ReferenceRefused(f"{exc} with --use-despite-problems REASON", exc.problems) from None


def csv_heading(state, args: argparse.Namespace, started, outcome) -> dict[str, str]:
    """What the CSV file says about the sweep in its comment lines."""
    status = outcome.status + (f" ({outcome.reason})" if outcome.reason else "")
    about = {
        "dut": args.dut or "(not named)",
        "meter": state.meter,
        "fixture": args.fixture or "(not named)",
        "reference set": state.reference or "none (raw readings, fixture not removed)",
        "time": started.isoformat(timespec="seconds"),
        "status": status,
    }
    if state.reference_override:
        about["reference override"] = state.reference_override
    if state.uncertainty_note:
        about["uncertainty"] = state.uncertainty_note.removeprefix("uncertainty: ")
    if state.flagged:
        about["flagged"] = next(w for w in state.all_warnings() if "beyond" in w)
    if state.open_fixture:
        about["warning"] = state.open_fixture
    if state.destination:
        about["stored as"] = state.destination
    return about


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
