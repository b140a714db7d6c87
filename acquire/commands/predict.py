"""Predict what a coil should measure from its geometry, before winding or measuring it.

Give the winding (turns, former diameter, winding length), the wire (American Wire Gauge with
--awg, or bare copper diameter with --wire), the number of layers, the total length of both
leads and the temperature. Every length needs its unit (30mm, 0.03m, 4.5cm): a bare 30 is
refused, since millimetres and metres differ a thousandfold. Temperatures are in °C (23, 23C,
23°C) or kelvin (296.15K).

Printed, each with the published method used and its accuracy:

  L     low-frequency inductance. One layer: the winding as a current sheet with Nagaoka's
        coefficient (computed exactly), minus Rosa's corrections for round wire (ks for the
        wire's own field, km for the gaps between turns). Where the pitch exceeds 5 % of the
        diameter, Rosa's corrections fail and the turns are summed one by one instead, with no
        accuracy stated (the helix's pitch adds to L). Several layers: a turn-by-turn sum of
        coaxial-circle mutual inductances, with Wheeler's multilayer formula beside it.
  C     self-capacitance of a single-layer winding (Medhurst's measured table, about 5 %): the
        capacitance that, in parallel with L, makes the coil self-resonate.
  SRF   self-resonant frequency 1/(2π√(LC)): above it the coil looks like a capacitor. A rough
        guide with no accuracy stated: at its own resonance a winding is not a lumped L and C.
  Rdc   DC resistance of the copper (International Annealed Copper Standard, corrected for
        temperature), over the wire length of every turn plus the leads.
  Rac   AC resistance at --frequency: skin effect (current crowding into a surface layer one
        skin depth thick) in an isolated round wire, exact. The other turns' fields add
        proximity loss, so a real coil measures more: this is a lower bound.

Pitch is the axial distance between turn centres (winding length / turns per layer); the wire
must fit in it. Example:

  acquire predict --turns 150 --diameter 30mm --length 45mm --awg 30 --leads 100mm --temperature 23
"""

from __future__ import annotations

import argparse

HELP = "predict L, Rdc, AC resistance, self-capacitance and self-resonance from a coil's geometry"

DEFAULT_FREQUENCIES = "1k, 100k, 1M"


def add_geometry_arguments(parser: argparse.ArgumentParser, required: bool = True) -> None:
    """The coil geometry options (shared with `acquire fit`, where they are optional)."""
    g = parser.add_argument_group("coil geometry" + ("" if required else " (for a comparison)"))
    g.add_argument("--turns", required=required, help="number of turns")
    g.add_argument(
        "--diameter", required=required, help="former diameter (inside of the winding), e.g. 30mm"
    )
    g.add_argument("--length", required=required, help="winding length, e.g. 45mm")
    wire = g.add_mutually_exclusive_group(required=required)
    wire.add_argument("--awg", help="wire gauge, American Wire Gauge (e.g. 30, or 4/0)")
    wire.add_argument("--wire", help="bare copper diameter, e.g. 0.25mm")
    g.add_argument(
        "--wire-outer",
        help="overall diameter of the insulated wire (sets turn centres and layer spacing; "
        "default: the bare diameter)",
    )
    g.add_argument("--layers", type=int, default=1, help="layers of winding (default 1)")
    g.add_argument("--leads", default="0", help="total length of both leads (default 0)")
    g.add_argument(
        "--temperature", default="20", help="copper temperature: 23, 23C, 296.15K (default 20 °C)"
    )


def geometry_from_args(args: argparse.Namespace):
    """The :class:`CoilGeometry` the options describe, or None when no geometry was given."""
    from acquire.coil import CoilGeometry, awg_diameter
    from acquire.errors import InputError, ModelError
    from acquire.units import parse_length, parse_quantity, parse_temperature

    if args.turns is None and args.diameter is None and args.length is None:
        return None
    missing = [
        name
        for name, value in (("--turns", args.turns), ("--diameter", args.diameter),
                            ("--length", args.length))
        if value is None
    ]  # fmt: skip
    if args.awg is None and args.wire is None:
        missing.append("--awg or --wire")
    if missing:
        raise InputError(f"the geometry also needs {', '.join(missing)}")
    if args.awg is not None:
        try:
            wire = awg_diameter(args.awg)
        except ModelError as exc:
            raise InputError(str(exc)) from None
    else:
        wire = parse_length(args.wire)
    outer = parse_length(args.wire_outer) if args.wire_outer else None
    return CoilGeometry(
        turns=parse_quantity(args.turns),
        former_diameter=parse_length(args.diameter),
        length=parse_length(args.length),
        wire_diameter=wire,
        layers=args.layers,
        lead_length=parse_length(args.leads),
        temperature=parse_temperature(args.temperature),
        wire_outer_diameter=outer,
    )


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_geometry_arguments(parser, required=True)
    parser.add_argument(
        "--frequency",
        default=DEFAULT_FREQUENCIES,
        help=f'frequencies for the AC resistance, e.g. "10k, 1M" (default "{DEFAULT_FREQUENCIES}")',
    )
    out = parser.add_mutually_exclusive_group()
    out.add_argument("--plain", action="store_true", help="plain text instead of a table")
    out.add_argument(
        "--json",
        action="store_true",
        help="JSON: each quantity's value, unit, relative accuracy or lower bound, and method",
    )


def run(args: argparse.Namespace) -> int:
    from acquire.coil import predict
    from acquire.coil.report import prediction_json, prediction_table, prediction_text
    from acquire.units import parse_list

    geometry = geometry_from_args(args)
    frequencies = tuple(parse_list(args.frequency, "Hz"))
    prediction = predict(geometry, frequencies)
    if args.json:
        from acquire.commands.options import print_json

        print_json(prediction_json(prediction), indent=2)
    elif args.plain:
        print(prediction_text(prediction))
    else:
        from rich.console import Console

        Console().print(prediction_table(prediction))
    return 0
