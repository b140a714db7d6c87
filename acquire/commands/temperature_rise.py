"""Measure how much a DC current warms a winding, by its resistance; or find the current for a rise.

The winding's DC resistance is read cold, with no current and the winding at the --ambient
temperature (let the part rest at room temperature first). Then --current is held through it
and the DC resistance is read every --interval until the rise has settled (its straight-line
trend over the last --settle-window changes it by at most --settle-tolerance; make the window
at least the part's thermal time constant) or --time-limit passes. The rise reported is that
line's value at the end, less noisy than one reading. The rise follows by
the resistance method for copper windings: T = R/R_cold · (234.5 + T_cold) − 234.5 (IEC 60076-2,
234.5 °C being where copper's resistance extrapolates to zero).

With --rise (e.g. 40K) the command searches the current that warms the winding by that much:
it starts at --current, and from each settled rise tries the current the I² law suggests, never
above --max-bias, until the settled rise is within --rise-tolerance of the target. If the
largest allowed current cannot reach it, it says so. The rated current of a choke is the lower
of this temperature-rise current and its saturation current (`acquire bias-sweep`).

SAFETY. A warm winding can burn; a choke carrying a current I stores ½·L·I², and breaking that
current arcs and can destroy the meter's input and hurt the operator. This command refuses a
current above --max-bias or the supply's limit before anything is sent, shows the stored energy
and above 0.1 J asks to type "yes" (--unattended skips it), and ramps the current down to zero
and switches it off at the end, on Ctrl-C, SIGTERM, a meter fault or any error. Never
disconnect the part while current flows. Follow the meter and fixture makers' instructions,
local codes and licensed practice.
"""

from __future__ import annotations

import argparse
import sys
from typing import Any

from acquire.commands.bias_common import add_bias_arguments, add_outputs
from acquire.commands.options import add_dialect, add_resource, add_store

HELP = "hold a DC current through a winding and measure its temperature rise; --rise finds it"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    from acquire.commands.bias_store import add_rise_actions

    add_resource(parser, required=False)
    add_dialect(parser)
    add_store(parser)
    parser.add_argument(
        "--current", help="current to hold (with --rise: the first tried), e.g. 3A (needed)"
    )
    parser.add_argument(
        "--ambient", help="ambient temperature, °C (the winding's when cold; needed)"
    )
    parser.add_argument("--rise", help="search the current giving this rise, e.g. 40K")
    parser.add_argument(
        "--rise-tolerance", default="1K", help="how close the --rise search gets (default 1K)"
    )
    parser.add_argument(
        "--interval", default="5s", help="time between resistance readings (default 5s)"
    )
    parser.add_argument(
        "--settle-window", default="300s", help="window the rise must be steady over (300s)"
    )
    parser.add_argument(
        "--settle-tolerance", default="0.5K", help="largest trend over the window (0.5K)"
    )
    parser.add_argument(
        "--time-limit", default="3600s", help="longest each current is held (default 3600s)"
    )
    parser.add_argument(
        "--frequency",
        default="10kHz",
        help="frequency of the zero-bias Ls reading for the stored energy (default 10kHz)",
    )
    add_bias_arguments(parser)
    parser.add_argument("--dut", default="", help="name or serial of the part measured")
    parser.add_argument("--json", action="store_true", help="print the result as JSON")
    add_outputs(parser, "the rise against time")
    add_rise_actions(parser)


def parse_kelvin(text: str, option: str) -> float:
    """A temperature difference: ``40K`` or ``40`` (kelvin)."""
    from acquire.errors import InputError
    from acquire.units import parse_quantity

    body = text.strip()
    body = body[:-1] if body.endswith("K") else body
    try:
        return parse_quantity(body)
    except InputError:
        raise InputError(
            f"{option} {text!r} is not a temperature difference: write e.g. 40K"
        ) from None


def run(args: argparse.Namespace) -> int:
    if getattr(args, "action", None):
        from acquire.commands.bias_store import run_action

        return run_action(args)
    from acquire.commands.bias_common import measuring_needs

    measuring_needs(args, "temperature-rise", "--current", "--ambient")
    from acquire.bias.records import RiseSettings
    from acquire.bias.rise_run import measure_rise
    from acquire.commands.bias_common import (
        allowed_maximum,
        bias_options,
        bias_supply,
        check_energy,
        check_outputs,
        ending,
        write_outputs,
        zero_bias_inductance,
    )
    from acquire.errors import InputError
    from acquire.store import open_store
    from acquire.units import parse_quantity, parse_temperature

    current = parse_quantity(args.current, "A")
    ambient = parse_temperature(args.ambient)
    target = None if args.rise is None else parse_kelvin(args.rise, "--rise")
    seconds = {o: parse_quantity(getattr(args, o), "s") for o in
               ("interval", "settle_window", "time_limit")}  # fmt: skip
    tolerance = parse_kelvin(args.settle_tolerance, "--settle-tolerance")
    rise_tolerance = parse_kelvin(args.rise_tolerance, "--rise-tolerance")
    if not current > 0:
        raise InputError("--current must be above 0 A")
    if min(seconds.values()) <= 0 or tolerance <= 0 or rise_tolerance <= 0:
        raise InputError("--interval, --settle-window, --time-limit and tolerances must be above 0")
    step, dwell, asked_max = bias_options(args)
    frequency = parse_quantity(args.frequency, "Hz")
    out = sys.stderr if args.json else sys.stdout
    from drivers.meter import ImpedanceMeter

    with open_store(args.store) as store:  # noqa: SIM117
        check_outputs(args, store)
        with ImpedanceMeter.open(
            args.resource, dialect=args.dialect, backend=args.backend
        ) as meter:
            identity = str(meter.identify())
            with bias_supply(args, meter) as (supply, supply_name):
                maximum = allowed_maximum(asked_max, supply, current)
                largest = maximum if target is not None else current
                l0 = zero_bias_inductance(meter, frequency, None)
                check_energy(l0, largest, args.unattended, out)
                settings = RiseSettings(
                    current=current, ambient=ambient, time_limit=seconds["time_limit"],
                    settle_window=seconds["settle_window"], settle_tolerance=tolerance,
                    target_rise=target, dut=args.dut, meter=identity, supply=supply_name,
                )  # fmt: skip
                writer = begin_writer(store, settings)

                def show(reading) -> None:
                    print(f"t {reading.t:7.1f} s  {reading.current:.3g} A  R "
                          f"{reading.resistance:.6g} ohm  rise {reading.rise:6.2f} K",
                          file=out, flush=True)  # fmt: skip

                outcome = measure_rise(
                    meter, supply, settings, maximum=maximum, step=step, dwell=dwell,
                    interval=seconds["interval"], rise_tolerance=rise_tolerance, writer=writer,
                    on_reading=show,
                )  # fmt: skip
    result = outcome.result
    if args.json:
        from acquire.commands.options import print_json

        print_json(rise_document(result), indent=2)
    else:
        for line in summary_lines(result):
            print(line)
    print(f"stored as temperature-rise run {writer.id} in {store.url}", file=out)
    write_outputs(args, result, False, out)
    code = ending(outcome.error, "temperature-rise", f"{result.times.size} readings kept")
    return 1 if code == 0 and result.note else code


def begin_writer(store: Any, settings: Any) -> Any:
    """The store's writer for this run (each reading stored as it is taken)."""
    return store.begin_rise_run(settings)


def summary_lines(result: Any) -> list[str]:
    s = result.settings
    lines = [f"cold resistance: {result.r_cold:.6g} ohm at {s.ambient:g} °C (no current)"]
    if result.final_rise is not None:
        state = "settled" if result.settled else "not settled"
        lines.append(
            f"rise at {result.current:.3g} A: {result.final_rise:.1f} K ({state}, resistance "
            "method, copper)"
        )
    if s.target_rise is not None and result.steps:
        tried = ", ".join(f"{i:.3g} A -> {r:.1f} K" for i, r in result.steps)
        lines.append(f"currents tried: {tried}")
        if not result.note and result.status == "complete":
            lines.append(
                f"temperature-rise current for {s.target_rise:g} K: {result.current:.3g} A"
            )
    lines.append(f"status: {result.status}" + (f" ({result.note})" if result.note else ""))
    return lines


def rise_document(result: Any) -> dict[str, Any]:
    s = result.settings
    found = s.target_rise is not None and not result.note and result.status == "complete"
    return {
        "status": result.status,
        "note": result.note,
        "ambient_c": s.ambient,
        "target_rise_k": s.target_rise,
        "r_cold_ohm": result.r_cold,
        "current_a": result.current,
        "settled": result.settled,
        "final_rise_k": result.final_rise,
        "rise_current_a": result.current if found else None,
        "steps": [{"current_a": i, "rise_k": r} for i, r in result.steps],
        "readings": [
            {"t_s": float(t), "r_ohm": float(r), "rise_k": float(k)}
            for t, r, k in zip(result.times, result.resistance, result.rise, strict=True)
        ],
    }
