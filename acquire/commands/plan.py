"""Check a production test plan and show, step by step, what a test station will do with it.

A test plan is a TOML file: the part's identity, the fixture and how old its open/short/load
references may be, the meter settings, the frequencies (all measured in one list sweep) and the
DC resistance step, each with the quantities judged and their limits (nominal ± tolerance, or a
minimum and/or maximum; Ls and Lp are the series and parallel inductance, Rs and Rp the
resistances, Q = |X|/R the quality factor, D = 1/Q, Rdc the winding's DC resistance corrected to
20 °C), the decision rule, the bins, and the serial and retest policies. acquire/examples/README.md
explains every key; `acquire plan example` prints the example plan to copy, and
`acquire plan example --choke` a power choke's: Ls under a DC bias (a step's `bias`, never above
the plan's `max_bias` under [bias]) and a minimum or maximum on the saturation current, the bias
current at which Ls has dropped by a stated percentage ([[saturation]]).

The decision rule follows ILAC-G8:09/2019: simple acceptance judges the value against the
tolerance limits; guarded acceptance narrows them at each end by a guard band w = factor × U,
U the expanded measurement uncertainty (k = 2), so a unit near a limit is not passed on a
reading the meter cannot vouch for. A bin is a class a passing unit is sorted into (for example
a tighter tolerance); the first bin whose checks all pass takes the unit.

A malformed plan is refused with one line naming the file, the key (or the line, for a TOML
syntax error) and what to change; the exit code is then 2.

    acquire plan example > my-plan.toml
    acquire plan example --choke > my-choke-plan.toml
    acquire plan check my-plan.toml
    acquire plan check my-plan.toml --json
"""

from __future__ import annotations

import argparse

HELP = "check a production test plan and show what a station will do with it"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    actions = parser.add_subparsers(dest="action", metavar="ACTION", required=True)
    check = actions.add_parser(
        "check",
        help="check a plan file and describe its steps",
        description="Check a test plan file and print, step by step, what a station will do.",
    )
    check.add_argument("file", metavar="FILE", help="the test plan (TOML)")
    check.add_argument(
        "--json", action="store_true", help="print the checked plan as JSON (SI units)"
    )
    example = actions.add_parser(
        "example",
        help="print the example test plan (for the demo coil) to copy",
        description="Print the example test plan; redirect it to a file and edit it. With "
        "--choke, the plan of a power choke measured under DC bias: a biased choke stores "
        "½·L·I² and a current broken while it flows arcs; follow the meter and fixture makers' "
        "instructions, local codes and licensed practice.",
    )
    example.add_argument(
        "--choke",
        action="store_true",
        help="the power-choke plan instead: Ls at 0 A and under bias, a saturation-current limit",
    )


def run(args: argparse.Namespace) -> int:
    from acquire.production.plan_file import describe_plan, example_plan_path, load_plan

    if args.action == "example":
        kind = "choke" if args.choke else "coil"
        print(example_plan_path(kind).read_text(encoding="utf-8"), end="")
        return 0
    plan = load_plan(args.file)
    if args.json:
        from acquire.commands.options import print_json
        from acquire.production.plan_text import plan_summary

        print_json(plan_summary(plan), indent=2)
        return 0
    for line in describe_plan(plan):
        print(line)
    frequencies = len(plan.frequencies)
    dc = " and DC" if plan.needs_dc_resistance else ""
    if plan.needs_bias:
        dc += f", under bias up to {plan.bias.maximum:g} A"
    print(
        f"plan is valid: {_count(len(plan.checks), 'check')} at "
        f"{_count(frequencies, 'frequency', 'frequencies')}{dc}, {_count(len(plan.bins), 'bin')}"
    )
    return 0


def _count(n: int, one: str, many: str | None = None) -> str:
    return f"{n} {one if n == 1 else (many or one + 's')}"
