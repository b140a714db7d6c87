"""`acquire grr run`: guide a crossed gauge R&R study through the station and store it.

Gauge R&R (repeatability and reproducibility) asks how much of the spread of a station's
readings comes from the measuring itself: repeatability is the spread when one operator measures
the same part again, reproducibility the spread between operators. In a crossed study each of
--operators operators measures each of --parts parts --trials times; the parts should span the
production's spread. Number the parts 1..N on labels the operators cannot see while measuring.

Trial by trial, each operator in turn is asked for the parts one by one in an order of their
own, drawn at random from --seed (recorded with the study, so the order can be shown again). At
each prompt the operator seats the named part in the fixture and presses Enter; the part is
measured with the plan's settings and the station's references (the newest of the plan's
fixture, or --reference), and the studied check's value (--check, default the plan's first) is
stored at once with its expanded uncertainty (k = 2), who measured it and when. When standard
input is not a terminal, one line is read per prompt (the names first, when
--operator-names is not given). Ctrl-C or the end of input ends the study as interrupted, with
every measurement taken so far kept. A study cannot be resumed: start a new one.

At the end the study's id is printed with the command that analyses it (`acquire grr analyse`).

Safety: measure only discharged parts that are not connected to any supply; an inductor that
carried DC bias stores energy. Mains-powered fixtures must be set up as local codes, the meter
maker's instructions and licensed practice require.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable

from acquire.commands.options import DEFAULT_STORE, add_dialect, add_resource, add_store

HELP = "guide a gauge R&R study: operators measure parts in a random order, stored"


def add_run_arguments(parser: argparse.ArgumentParser) -> None:
    """The options of `acquire grr run`."""
    add_resource(parser)
    add_dialect(parser)
    add_store(parser)
    parser.add_argument("--plan", required=True, help="test plan file (TOML) to measure with")
    parser.add_argument("--parts", type=int, default=10, help="how many parts (default 10)")
    parser.add_argument(
        "--operators", type=int, help="how many operators (default: as many as names given)"
    )
    parser.add_argument("--trials", type=int, default=3, help="trials per part (default 3)")
    parser.add_argument(
        "--operator-names",
        metavar="NAMES",
        help="the operators' names, comma-separated, e.g. Ana,Ben,Chen (else asked at the start)",
    )
    parser.add_argument(
        "--check",
        metavar="KEY",
        help="the plan's check to study, e.g. Ls@100000 (default: the plan's first check)",
    )
    parser.add_argument("--seed", type=int, help="seed of the random measuring order")
    parser.add_argument("--name", help="the study's name (default: plan and check)")
    parser.add_argument(
        "--tolerance",
        help="tolerance width (upper minus lower limit) the study is judged against, with its "
        "unit, e.g. 20uH (default: the check's limits when it has both)",
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
    parser.add_argument("--station", default="", help="name of this station, recorded")


def _tolerance(text: str | None, check) -> float | None:
    from acquire.errors import InputError
    from acquire.units import parse_quantity

    if text is None:
        low, high = check.limit.low, check.limit.high
        return None if low is None or high is None else float(high - low)
    value = parse_quantity(text, check.unit or None)
    if not value > 0:
        raise InputError(f"--tolerance must be above 0, not {text!r}")
    return value


def _reader(interactive: bool, echo: Callable[[str], None]) -> Callable[[str], str | None]:
    def ask(prompt: str) -> str | None:
        if interactive:
            try:
                return input(f"{prompt}: ")
            except EOFError:
                return None
        echo(prompt)
        line = sys.stdin.readline()
        return line.rstrip("\r\n") if line else None

    return ask


def _names(args: argparse.Namespace, ask: Callable[[str], str | None]) -> tuple[str, ...]:
    from acquire.errors import InputError
    from acquire.msa.study import check_names, operator_names

    if args.operator_names is not None:
        return operator_names(args.operator_names, args.operators)
    if args.operators is None:
        raise InputError("give --operators N, or the names with --operator-names Ana,Ben,Chen")
    if args.operators < 1:
        raise InputError(f"--operators must be at least 1, not {args.operators}")
    names = []
    for i in range(1, args.operators + 1):
        line = ask(f"name of operator {i} of {args.operators}")
        if line is None:
            raise InputError("the input ended before every operator was named")
        names.append(" ".join(line.split()))
    check_names(tuple(names), args.operators)
    return tuple(names)


def _seat(meter) -> Callable[[int, str], None] | None:
    """On the simulated meter, a way to say who seats which part; None on a real meter."""
    if not meter.has("next_unit"):
        return None
    from drivers.errors import InstrumentError
    from drivers.simulator.seating import seating_message

    def seat(part: int, operator: str) -> None:
        reply = meter.session.query(seating_message(part, operator))
        errors = meter.errors()
        if reply.strip() != "1" or errors:
            raise InstrumentError(f"the simulated meter did not seat part {part}: {errors}")

    return seat


def run_study(args: argparse.Namespace) -> int:
    from acquire.display import text_console
    from acquire.errors import InputError
    from acquire.msa.study import GuidedStudy, new_seed, studied_check, study_order
    from acquire.production.measure import apply_settings
    from acquire.production.plan_file import load_plan
    from acquire.production.reference_guard import newest_for_fixture, reference_blocks
    from acquire.store import open_store
    from acquire.store.grr_studies import GrrStudySettings
    from acquire.sweep_setup import find_reference_set
    from acquire.units import parse_temperature
    from drivers.meter import ImpedanceMeter

    console = text_console(highlight=False)

    def show(text: str) -> None:
        console.print(text, soft_wrap=True)

    plan = load_plan(args.plan)
    check = studied_check(plan, args.check)
    tolerance = _tolerance(args.tolerance, check)
    interactive = sys.stdin.isatty()
    if not interactive and hasattr(sys.stdin, "reconfigure"):
        sys.stdin.reconfigure(errors="replace")
    ask = _reader(interactive, show)
    names = _names(args, ask)
    seed = new_seed() if args.seed is None else int(args.seed)
    if seed < 0:
        raise InputError(f"--seed must be 0 or more, not {seed}")
    order = study_order(args.parts, names, args.trials, seed)
    temperature = plan.temperature.value if plan.temperature.source == "fixed" else None
    if args.temperature is not None:
        temperature = parse_temperature(args.temperature)
    with open_store(args.store) as store:
        found = (
            find_reference_set(store, args.reference)
            if args.reference
            else newest_for_fixture(store, plan.fixture)
        )
        ref_id, refs = found
        with ImpedanceMeter.open(
            args.resource, dialect=args.dialect, backend=args.backend
        ) as meter:
            apply_settings(meter, plan)
            identity = meter.identify()
            blocks = reference_blocks(refs, str(identity), plan.fixture, plan.max_reference_age)
            if blocks:
                raise InputError(
                    f"{'; '.join(blocks)}: capture new references on this fixture "
                    "(`acquire reference capture`) before the study"
                )
            settings = GrrStudySettings(
                name=args.name or f"{plan.title} {check.key}",
                quantity=check.key,
                unit=check.unit,
                parts=args.parts,
                operator_names=names,
                trials=args.trials,
                seed=seed,
                tolerance=tolerance,
                plan_id=store.record_plan(plan.text, plan.title),
                plan_hash=plan.hash,
                station=args.station,
                meter=str(identity),
                reference_set_id=ref_id,
            )
            writer = store.begin_grr_study(settings)
            show(
                f"gauge R&R study {writer.id}: {args.parts} parts, {len(names)} operators "
                f"({', '.join(names)}), {args.trials} trials, {check.key}; seed {seed}"
            )
            study = GuidedStudy(
                meter, plan, check, refs, writer, ask, show, seat=_seat(meter),
                temperature=temperature,
            )  # fmt: skip
            try:
                outcome = study.run(order)
            except BaseException as exc:
                from acquire.store.run_rows import stop_note

                writer.finish("failed", stop_note(exc))
                raise
            writer.finish(outcome.status, outcome.note)
    where = "" if args.store == DEFAULT_STORE else f" --store {args.store}"
    ended = "complete" if outcome.status == "complete" else f"interrupted ({outcome.note})"
    show(f"study {writer.id} {ended}: {outcome.measured} of {len(order)} measurements stored")
    show(f"analyse it: acquire grr analyse {writer.id}{where}")
    if outcome.status == "complete":
        return 0
    return 130 if outcome.note.startswith("stopped") else 1
