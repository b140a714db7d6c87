"""Fit a coil's equivalent circuit to a measured sweep, from the store or from a CSV file.

The model: inductance L in series with the winding resistance R(f), both in parallel with the
self-capacitance Cp; optionally a magnetic core's loss as a loss tangent tan δ (the core's
complex permeability µ''/µ'). The winding's resistance follows one of these laws:
constant; the round wire's exact skin effect, Rdc·(ka/2)·J0(ka)/J1(ka) with the frequency fw
where the skin depth equals the wire's radius and a proximity factor (its imaginary part is the
wire's internal inductance); or R(f) = Rdc·(1 + (f/fc)²)^(n/2), flat below the corner fc and
rising as f^n above it (n = 1/2, "skin", or fitted, "power"). By default the fit weighs the
constant and the round-wire law by the data (--law picks one).

Printed: L, Rdc (resistance at DC), the corner fc and exponent n, Cp, the self-resonant frequency
(SRF, where the phase crosses zero and the coil turns capacitive), the maximum of Q = X/R and
where it occurs, the residual (how far the fitted circuit is from the readings, as a fraction of
|Z|) and each value's 1σ uncertainty. A value the sweep cannot support is printed as "not
determined" with the reason: without a self-resonance inside the sweep there is no Cp.

SOURCE is a sweep id in the results store (see --store), or a CSV file with a frequency column
and R and X columns (headers such as "frequency [Hz]", "corrected R [ohm]", "corrected X
[ohm]", or "f", "R", "X"). The corrected readings are fitted; --raw fits the uncorrected ones,
fixture included. The corrected readings' expanded uncertainties (the store's U of R and X,
or a CSV file's "U(R) [ohm]" and "U(X) [ohm]" columns) are used when every point has them: their
halves are each point's standard uncertainty. Neither says which part is the meter's noise and
which its systematic error, so the fit counts all of it both ways, as independent noise and as a
systematic error correlated across the sweep: the safe side (up to √2 more than with the split
known). Without them the fit estimates the noise from the scatter and says so. Give the coil's
geometry (as for `acquire predict`) to print the prediction
beside the fit.
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_store, print_json
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
        choices=("auto", "constant", "wire", "skin", "power"),
        default="auto",
        help="resistance law: constant R, wire (the round wire's exact skin effect), skin "
        "(corner law with n = 1/2), power (n fitted); default auto (constant or wire, by the data)",
    )
    parser.add_argument(
        "--core-loss",
        choices=("auto", "yes", "no"),
        default="auto",
        help="include a core loss tangent (default: when the data needs it)",
    )
    parser.add_argument("--plain", action="store_true", help="plain text instead of tables")
    parser.add_argument(
        "--json", action="store_true", help="print the fitted quantities as JSON (see the docs)"
    )
    add_geometry_arguments(parser, required=False)


def read_store_sweep(store_url: str, sweep_id: int, raw: bool = False):
    """Sweep ``sweep_id`` of the results store, through the store's public API."""
    import numpy as np

    from acquire.coil.sweepfile import SweepSource
    from acquire.commands.options import open_existing_store
    from acquire.errors import InputError

    with open_existing_store(store_url) as store:
        info = store.sweep_info(sweep_id)
        points = store.sweep_points(sweep_id)
    from acquire.coil.sweepfile import half_expanded

    prefix = "raw" if raw else "corrected"
    r = points[f"{prefix}_r"].to_numpy(dtype=float)
    x = points[f"{prefix}_x"].to_numpy(dtype=float)
    sigma = None
    if not raw and "u_r" in points and "u_x" in points:
        sigma = half_expanded(
            points["u_r"].to_numpy(dtype=float), points["u_x"].to_numpy(dtype=float), r + 1j * x
        )
    if not raw and points.shape[0] and np.all(np.isnan(r)):
        raise InputError(
            f"sweep {sweep_id} was stored without a reference set, so it has no corrected "
            "readings: pass --raw to fit the raw ones (fixture included)"
        )
    dut = f" of {info.dut}" if info.dut else ""
    status = "" if info.status == "complete" else f" ({info.status})"
    description = (
        f"sweep {sweep_id}{dut} in {store_url}{status}: {len(r)} points, {prefix} readings"
    )
    frequency = points["frequency"].to_numpy(dtype=float)
    return SweepSource(frequency, r + 1j * x, description, sigma)


def read_sweep(source: str, store_url: str, raw: bool = False):
    """A sweep id (digits) from the store, else a CSV file path."""
    from acquire.coil.sweepfile import read_csv_sweep

    text = source.strip()
    if text.isdigit():
        return read_store_sweep(store_url, int(text), raw)
    return read_csv_sweep(text, raw)


def fit_json(fit) -> dict:
    """The fit as the JSON document shared with `acquire predict --json`."""
    quantities = []
    for v in fit.values:
        method = "equivalent-circuit fit: weighted least squares, averaged over circuits"
        if v.value is not None and v.sigma is None:
            method += "; no uncertainty stated"
        if v.note:
            method = f"{method}; {v.note}"
        quantities.append(
            {
                "name": v.key,
                "label": v.label,
                "value": v.value,
                "unit": v.unit,
                "relative_accuracy": v.relative_sigma,
                "lower_bound": v.lower_bound,
                "method": method,
                "standard_uncertainty": v.sigma,
            }
        )
    return {"command": "fit", "quantities": quantities, "notes": list(fit.notes)}


def run(args: argparse.Namespace) -> int:
    from acquire.coil import compare, compare_text, fit_sweep, predict
    from acquire.coil.report import fit_table, fit_text
    from acquire.commands.predict import geometry_from_args

    geometry = geometry_from_args(args)
    source = read_sweep(args.source, args.store, raw=args.raw)
    fit = fit_sweep(
        source.frequency,
        source.impedance,
        sigma=source.sigma,
        resistance_law=None if args.law == "auto" else args.law,
        core_loss={"auto": None, "yes": True, "no": False}[args.core_loss],
    )
    if args.json:
        print_json(fit_json(fit))
        return 0
    prediction = predict(geometry) if geometry is not None else None
    if args.plain:
        print(source.description)
        print(fit_text(fit))
        if prediction is not None:
            print()
            print(compare_text(prediction, fit))
        return 0
    from rich.console import Console

    console = Console()
    console.print(source.description, markup=False, emoji=False)  # names as the user typed them
    console.print(fit_table(fit))
    if prediction is not None:
        console.print(compare(prediction, fit))
    return 0
