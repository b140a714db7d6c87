"""Ask an impedance meter who it is and check that the dialect fits it.

Connects to the meter at --resource (a VISA resource string such as
TCPIP0::192.168.1.20::5025::SOCKET, USB0::...::INSTR or GPIB0::17::INSTR), prepares it as the
dialect says, and prints the meter's IEEE 488.2 identity (manufacturer, model, serial number,
firmware), what the dialect allows (frequency range, list mode, which optional operations it
has) and anything left on the meter's error queue.

A dialect is a TOML file naming the meter's SCPI commands and what its replies mean (see
drivers/dialects/template.toml and the how-to in DEVELOPERS.md). Running `identify` with a
new dialect is the first check when you write one: with --measure FREQ it also takes one
reading at that frequency (Hz, SI prefixes allowed: 1k, 100kHz) and shows it as R + jX in ohm.

Example, against the simulated meter started with `acquire sim`:

    acquire identify --resource TCPIP0::127.0.0.1::5025::SOCKET --measure 1k
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_dialect, add_resource

HELP = "show a meter's identity and what its dialect allows"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_resource(parser)
    add_dialect(parser)
    parser.add_argument(
        "--timeout",
        type=float,
        default=None,
        help="seconds to wait for each reply (default: the dialect's)",
    )
    parser.add_argument(
        "--measure",
        metavar="FREQ",
        default=None,
        help="also take one reading at this frequency, e.g. 1k or 100kHz",
    )


def run(args: argparse.Namespace) -> int:
    from acquire.units import format_si, parse_quantity
    from drivers.dialect import OPTIONAL
    from drivers.meter import ImpedanceMeter

    frequency = None if args.measure is None else parse_quantity(args.measure, "Hz")
    with ImpedanceMeter.open(
        args.resource, dialect=args.dialect, backend=args.backend, timeout=args.timeout
    ) as meter:
        identity = meter.identify()
        d = meter.dialect
        fmin, fmax = meter.frequency_range
        print(f"meter       {identity}")
        print(f"resource    {meter.resource} ({args.backend})")
        print(f"dialect     {d.name} ({d.path})")
        print(f"frequency   {format_si(fmin, 'Hz')} to {format_si(fmax, 'Hz')}")
        lists = f"up to {d.list_max_points} points per list" if d.has_list else "none"
        print(f"list mode   {lists}")
        print(f"reading     {d.pair[0]}, {d.pair[1]} ({d.transfer})")
        present = [op for op in OPTIONAL if meter.has(op)]
        missing = [op for op in OPTIONAL if not meter.has(op)]
        print(f"has         {', '.join(present) or '-'}")
        if missing:
            print(f"lacks       {', '.join(missing)}")
        if frequency is not None:
            z = meter.measure(frequency)
            print(
                f"reading at {format_si(frequency, 'Hz')}: R = {format_si(z.real, 'Ω')}, "
                f"X = {format_si(z.imag, 'Ω')}"
            )
        errors = meter.errors()
        print(f"errors      {'; '.join(str(e) for e in errors) if errors else 'none'}")
    return 0
