"""Measure a choke's inductance under DC bias and find its saturation current.

The bias current steps from --start to --stop (--points steps, zero-bias point first); at each
step the meter reads the part at --frequency, and Ls, Rs and Q (series inductance, resistance
and quality factor) are shown live, L against the bias current. The saturation current at each
--drop (the current at which Ls has fallen by that fraction from its zero-bias value) is
interpolated linearly between the two measured points around it, never beyond the largest
current measured: "above 6 A" when the drop was not reached. Choose a frequency well below the
part's self-resonance (10 kHz to 100 kHz for most power chokes).

The bias comes from the meter itself, or from a DC current source given with --bias-source
(its own VISA resource and --bias-source-dialect). --reference corrects every reading with a
stored reference set; its open and short were captured at zero bias, so the leads are removed
but not any effect the bias has on the fixture.

SAFETY. An inductor carrying a current I stores the energy ½·L·I². Breaking that current (a
clip pulled off, a lead that comes loose, a part changed under bias) makes an arc and a voltage
spike that can destroy the meter's input and hurt the operator. This command:
- refuses a bias above --max-bias or above the supply's own limit, before anything is sent;
- shows the energy the part stores at the largest bias before it starts, and above 0.1 J asks
  you to type "yes" (--unattended skips the question for unattended stations and is recorded);
- ramps the bias down to zero in steps and switches it off at the end, on Ctrl-C, SIGTERM, a
  meter fault or any error.
Never disconnect or touch a part while bias flows, and wait for the command to end. Follow the
meter and fixture makers' instructions, local codes and licensed practice; this tool is a second
line of protection, not the first.
"""

from __future__ import annotations

import argparse
import sys
from typing import Any

from acquire.commands.bias_common import add_bias_arguments, add_outputs
from acquire.commands.options import add_dialect, add_resource, add_store

HELP = "step a choke through DC bias currents, Ls live, and find its saturation current (safely)"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from acquire.commands.bias_store import add_actions

    add_resource(parser, required=False)
    add_dialect(parser)
    add_store(parser)
    parser.add_argument("--start", default="0A", help="lowest bias current (default 0A)")
    parser.add_argument("--stop", help="highest bias current, e.g. 6A (needed to measure)")
    parser.add_argument(
        "--points", type=int, default=25, help="bias steps from --start to --stop (default 25)"
    )
    parser.add_argument(
        "--frequency", default="100kHz", help="test frequency, e.g. 10kHz (default 100kHz)"
    )
    parser.add_argument(
        "--drop",
        default="10%,20%,30%",
        help="drops of Ls to find the saturation current at (default 10%%,20%%,30%%)",
    )
    add_bias_arguments(parser)
    parser.add_argument("--repeats", type=int, default=1, help="readings averaged per step")
    parser.add_argument(
        "--reference",
        help="reference set to correct with (id, name or 'latest'); captured at zero bias",
    )
    parser.add_argument("--dut", default="", help="name or serial of the part measured")
    parser.add_argument("--fixture", default="", help="name of the fixture the part sits in")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    parser.add_argument(
        "--no-live", action="store_true", help="print a plain line per step, not the live view"
    )
    add_outputs(parser, "Ls and Q against the bias current")
    add_actions(parser)


def run(args: argparse.Namespace) -> int:
    if getattr(args, "action", None):
        from acquire.commands.bias_store import run_action

        return run_action(args)
    from acquire.commands.bias_common import (
        allowed_maximum,
        bias_options,
        bias_supply,
        check_energy,
        check_outputs,
        ending,
        measuring_needs,
        write_outputs,
        zero_bias_inductance,
    )

    measuring_needs(args, "bias-sweep", "--stop")
    from acquire.bias.live import BiasProgress, open_bias_view
    from acquire.bias.records import BiasSettings
    from acquire.bias.sweep_run import bias_currents, sweep_bias
    from acquire.display import text_console
    from acquire.errors import InputError
    from acquire.store import open_store
    from acquire.units import parse_quantity
    from drivers.meter import ImpedanceMeter

    frequency = parse_quantity(args.frequency, "Hz")
    drops = tuple(parse_fraction_list(args.drop))
    if args.repeats < 1:
        raise InputError("--repeats must be 1 or more (readings averaged per step)")
    currents = bias_currents(parse_quantity(args.start, "A"), parse_quantity(args.stop, "A"),
                             args.points)  # fmt: skip
    step, dwell, asked_max = bias_options(args)
    console = text_console()
    out = sys.stderr if args.json else sys.stdout
    with open_store(args.store) as store:
        check_outputs(args, store)
        refs, ref_id = None, None
        if args.reference:
            from acquire.sweep_setup import find_reference_set, usable_reference

            ref_id, refs = find_reference_set(store, args.reference)
            usable_reference(refs, ref_id)
        with ImpedanceMeter.open(
            args.resource, dialect=args.dialect, backend=args.backend
        ) as meter:
            identity = str(meter.identify())
            with bias_supply(args, meter) as (supply, supply_name):
                maximum = allowed_maximum(asked_max, supply, float(currents[-1]))
                l0 = zero_bias_inductance(meter, frequency, refs)
                energy, confirmed = check_energy(l0, float(currents[-1]), args.unattended, out)
                settings = BiasSettings(
                    currents=currents, frequency=frequency, drops=drops, maximum=maximum,
                    step=step, dwell=dwell, energy=energy, confirmed=confirmed,
                    supply=supply_name, dut=args.dut, fixture=args.fixture, meter=identity,
                    reference_set_id=ref_id,
                )  # fmt: skip
                writer = begin_writer(store, settings)
                progress = BiasProgress(title(settings, refs is not None), drops, currents.size,
                                        float(currents[-1]), args.dut)  # fmt: skip
                live = not (args.no_live or args.json)
                view_console = console if not args.json else text_console(file=sys.stderr)
                with open_bias_view(progress, live, view_console) as view:
                    outcome = sweep_bias(meter, supply, settings, refs, writer, view.add,
                                         args.repeats)  # fmt: skip
    result = outcome.result
    if args.json:
        from acquire.commands.options import print_json

        print_json(sweep_document(result), indent=2)
    else:
        for line in summary_lines(result):
            print(line)
    print(f"stored as bias sweep {writer.id} in {store.url}", file=out)
    write_outputs(args, result, True, out)
    return ending(outcome.error, "bias-sweep", f"{result.curve.ls.size} points kept")


def parse_fraction_list(text: str) -> list[float]:
    from acquire.errors import InputError
    from acquire.units import parse_fraction

    items = [t.strip() for t in text.split(",") if t.strip()]
    if not items:
        raise InputError("--drop needs at least one drop, e.g. 10%,20%")
    drops = [parse_fraction(t) for t in items]
    for text_item, d in zip(items, drops, strict=True):
        if not 0 < d < 1:
            raise InputError(f"--drop {text_item}: a drop lies between 0 and 100 %")
    return drops


def begin_writer(store: Any, settings: Any) -> Any:
    """The store's writer for this bias sweep (each point stored as it is measured)."""
    return store.begin_bias_sweep(settings)


def title(settings: Any, corrected: bool) -> str:
    c = settings.currents
    refs = "corrected (references captured at zero bias)" if corrected else "raw readings"
    return (
        f"bias sweep: {c.size} points, {c[0]:.3g} A to {c[-1]:.3g} A at "
        f"{settings.frequency:g} Hz, {refs}; max {settings.maximum:.3g} A, {settings.supply}"
    )


def summary_lines(result: Any) -> list[str]:
    """What the command prints at the end: L(0), each drop current, how it ended."""
    from acquire.units import format_si

    curve = result.curve
    lines = []
    if curve.ls.size:
        lines.append(f"Ls at zero bias: {format_si(float(curve.ls[0]), 'H')}")
        last = int(curve.ls.size - 1)
        lines.append(
            f"Ls at {curve.applied[last]:.3g} A: {format_si(float(curve.ls[last]), 'H')} "
            f"({100 * (1 - curve.ls[last] / curve.ls[0]):.1f} % below)"
        )
    for drop in result.drops:
        lines.append(f"saturation current at {100 * drop.drop:g} % drop: {drop.text()}")
    if result.drops:
        lines.append(
            "(interpolated linearly between the two measured points around each drop; never "
            "beyond the largest current measured)"
        )
    lines.append(f"status: {result.status}" + (f" ({result.note})" if result.note else ""))
    return lines


def sweep_document(result: Any) -> dict[str, Any]:
    """The result as JSON-ready data (SI units)."""
    s, c = result.settings, result.curve
    return {
        "status": result.status,
        "note": result.note,
        "started": result.started,
        "ended": result.ended,
        "settings": {
            "frequency_hz": s.frequency,
            "currents_a": [float(v) for v in s.currents],
            "drops": list(s.drops),
            "maximum_a": s.maximum,
            "step_a": s.step,
            "dwell_s": s.dwell,
            "energy_j": s.energy,
            "confirmed": s.confirmed,
            "supply": s.supply,
            "dut": s.dut,
            "fixture": s.fixture,
            "meter": s.meter,
            "reference_set_id": s.reference_set_id,
            "references_captured_at": "zero bias" if s.reference_set_id is not None else None,
        },
        "points": [
            {
                "setpoint_a": float(c.setpoint[i]),
                "applied_a": float(c.applied[i]),
                "ls_h": float(c.ls[i]),
                "rs_ohm": float(c.rs[i]),
                "q": float(c.q[i]),
            }
            for i in range(c.ls.size)
        ],
        "drops": [
            {"drop": d.drop, "current_a": d.current, "highest_a": d.highest, "text": d.text()}
            for d in result.drops
        ],
    }
