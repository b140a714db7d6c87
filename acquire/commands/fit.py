"""Fit a coil's equivalent circuit to a measured sweep, from the store or from a CSV file.

The model: inductance L in series with the winding resistance R(f), both in parallel with the
self-capacitance Cp; optionally a magnetic core's loss as a loss tangent tan δ (the core's
complex permeability µ''/µ'). R(f) = Rdc·(1 + (f/fc)²)^(n/2): flat below the corner frequency
fc, rising as f^n above it (n = 1/2 for skin effect, more where the neighbouring turns add
proximity loss). The fit picks the simplest law the data needs.

Printed: L, Rdc (resistance at DC), the corner fc and exponent n, Cp, the self-resonant frequency
(SRF, where the phase crosses zero and the coil turns capacitive), the maximum of Q = X/R and
where it occurs, the residual (how far the fitted circuit is from the readings, as a fraction of
|Z|) and each value's 1σ uncertainty. A value the sweep cannot support is printed as "not
determined" with the reason: without a self-resonance inside the sweep there is no Cp.

SOURCE is a sweep id in the results store (see --store), or a CSV file with a frequency column
and R and X columns (headers such as "frequency [Hz]", "corrected R [ohm]", "corrected X
[ohm]", or "f", "R", "X"). The corrected readings are fitted; --raw fits the uncorrected ones,
fixture included. Give the coil's geometry (as for `acquire predict`) to print the prediction
beside the fit.
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_store
from acquire.commands.predict import add_geometry_arguments

HELP = "fit L, R(f), Cp and the self-resonance to a stored or CSV sweep"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument("source", help="sweep id in the store, or a CSV file of a sweep")
    add_store(parser)
    parser.add_argument(
        "--raw", action="store_true", help="fit the raw readings (fixture not removed)"
    )
    parser.add_argument(
        "--law",
        choices=("auto", "constant", "skin", "power"),
        default="auto",
        help="resistance law: constant R, skin (n = 1/2), power (n fitted); default auto",
    )
    parser.add_argument(
        "--core-loss",
        choices=("auto", "yes", "no"),
        default="auto",
        help="include a core loss tangent (default: when the data needs it)",
    )
    parser.add_argument("--plain", action="store_true", help="plain text instead of tables")
    add_geometry_arguments(parser, required=False)


def run(args: argparse.Namespace) -> int:
    from acquire.coil import compare, compare_text, fit_sweep, predict
    from acquire.coil.sweepfile import read_sweep
    from acquire.commands.predict import geometry_from_args

    geometry = geometry_from_args(args)
    source = read_sweep(args.source, args.store, raw=args.raw)
    fit = fit_sweep(
        source.frequency,
        source.impedance,
        resistance_law=None if args.law == "auto" else args.law,
        core_loss={"auto": None, "yes": True, "no": False}[args.core_loss],
    )
    prediction = predict(geometry) if geometry is not None else None
    if args.plain:
        print(source.description)
        print(fit.text())
        if prediction is not None:
            print()
            print(compare_text(prediction, fit))
        return 0
    from rich.console import Console

    console = Console()
    console.print(source.description)
    console.print(fit.table())
    if prediction is not None:
        console.print(compare(prediction, fit))
    return 0
