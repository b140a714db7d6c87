"""What `acquire bias-sweep` and `acquire temperature-rise` share: the bias and safety options,
where the bias comes from, the stored-energy check before any bias flows, the output files and
how a run's end becomes an exit status.

SAFETY. A choke carrying a current I stores ½·L·I²; breaking that current arcs and can destroy
the meter's input and hurt the operator. Follow the meter and fixture makers' instructions,
local codes and licensed practice; these checks are a second line of protection, not the first.
"""

from __future__ import annotations

import argparse
import sys
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from typing import Any


def add_outputs(parser: argparse.ArgumentParser, picture: str) -> None:
    """--csv and --picture: the run written to files at its end (both commands)."""
    parser.add_argument("--csv", metavar="FILE", help="also write the run as CSV at its end")
    parser.add_argument("--picture", metavar="FILE.png", help=f"also draw it as a PNG: {picture}")


def measuring_needs(args: argparse.Namespace, command: str, *required: str) -> None:
    """Refuse to measure without a resource or a required option, saying what to give."""
    from acquire.errors import InputError

    if not args.resource:
        raise InputError(
            "measuring needs --resource (or ACQUIRE_RESOURCE); to read stored runs give an "
            f"action first: acquire {command} list, show ID or export ID"
        )
    for name in required:
        if getattr(args, name.lstrip("-").replace("-", "_")) is None:
            raise InputError(f"measuring needs {name}")


def check_outputs(args: argparse.Namespace, store: Any) -> None:
    """Refuse a --csv or --picture path before measuring (never the store's own file)."""
    from acquire.destination import check_destination

    if args.csv:
        check_destination(args.csv, store, "--csv")
    if args.picture:
        check_destination(args.picture, store, "--picture")


def write_outputs(args: argparse.Namespace, result: Any, bias: bool, out: Any) -> None:
    """Write the run to the --csv and --picture files asked for, saying where."""
    from pathlib import Path

    from acquire.report import bias_export, bias_pictures

    if args.csv:
        write = bias_export.write_bias_csv if bias else bias_export.write_rise_csv
        print(f"CSV written to {write(result, args.csv)}", file=out)
    if args.picture:
        draw = bias_pictures.bias_png if bias else bias_pictures.rise_png
        path = Path(args.picture)
        path.write_bytes(draw(result))
        print(f"picture written to {path}", file=out)


def add_bias_arguments(parser: argparse.ArgumentParser) -> None:
    """The options on where the bias comes from and how it is kept safe (both commands)."""
    g = parser.add_argument_group("bias and safety")
    g.add_argument(
        "--max-bias", help="largest bias allowed, e.g. 6A (default: the supply's own limit)"
    )
    g.add_argument(
        "--step", default="0.5A", help="largest change of the bias at a time (default 0.5A)"
    )
    g.add_argument(
        "--dwell", default="0.05s", help="wait after each change of the bias (default 0.05s)"
    )
    g.add_argument(
        "--bias-source",
        metavar="RESOURCE",
        help="VISA resource of a DC current source giving the bias (default: the meter's own)",
    )
    g.add_argument(
        "--bias-source-dialect",
        default="simulated-source",
        help="the current source's dialect: a shipped name or a TOML path (default "
        "simulated-source)",
    )
    g.add_argument(
        "--unattended",
        action="store_true",
        help="do not ask for confirmation above 0.1 J stored (recorded with the results)",
    )


def bias_options(args: argparse.Namespace) -> tuple[float, float, float | None]:
    """--step (A), --dwell (s) and --max-bias (A, None when not given), checked."""
    from acquire.errors import InputError
    from acquire.units import parse_quantity

    step = parse_quantity(args.step, "A")
    dwell = parse_quantity(args.dwell, "s")
    if not step > 0:
        raise InputError("--step must be above 0 A")
    if dwell < 0:
        raise InputError("--dwell must be 0 s or more")
    asked = None if args.max_bias is None else parse_quantity(args.max_bias, "A")
    if asked is not None and asked <= 0:
        raise InputError("--max-bias must be above 0 A")
    return step, dwell, asked


def allowed_maximum(asked: float | None, supply: Any, largest: float) -> float:
    """The largest bias allowed; refuses (before any bias is sent) a ``largest`` above it."""
    from acquire.bias.ramp import largest_allowed
    from acquire.errors import BiasError

    maximum = largest_allowed(asked, float(supply.limit))
    if largest > maximum:
        which = (
            f"--max-bias {asked:g} A"
            if asked is not None and asked <= supply.limit
            else f"the supply's limit of {supply.limit:g} A"
        )
        raise BiasError(
            f"a bias of {largest:g} A was asked, above {which}; nothing was sent. Lower it, or "
            "raise --max-bias if the part, the fixture and the supply are rated for it"
        )
    return maximum


@contextmanager
def bias_supply(args: argparse.Namespace, meter: Any) -> Iterator[tuple[Any, str]]:
    """The supply of the bias and its description: --bias-source, else the meter's own."""
    if not args.bias_source:
        yield meter.bias(), "the meter's own bias"
        return
    from drivers.bias import CurrentSource

    with CurrentSource.open(
        args.bias_source, dialect=args.bias_source_dialect, backend=args.backend
    ) as source:
        yield source, f"current source {source.identify()}"


def zero_bias_inductance(meter: Any, frequency: float, refs: Any) -> float:
    """Ls (H) at zero bias, for the stored-energy check before any bias flows."""
    import numpy as np

    from acquire.impedance import quantities

    f = np.array([frequency])
    z = meter.sweep(f)
    if refs is not None:
        z = refs.correct(f, z)
    return float(quantities(f, z)["Ls"][0])


def check_energy(
    inductance: float,
    current: float,
    unattended: bool,
    out: Any = None,
    ask: Callable[[str], str] = input,
    terminal: bool | None = None,
) -> tuple[float, str]:
    """Show the energy stored at the largest bias; above the threshold ask, on a terminal,
    to type "yes". The energy (J) and how going ahead was agreed."""
    from acquire.bias.energy import CONFIRM_ABOVE, stored_energy
    from acquire.errors import BiasError
    from acquire.units import format_si

    out = out or sys.stdout
    energy = float(stored_energy(max(inductance, 0.0), current))
    print(
        f"stored energy at {current:.3g} A: {format_si(energy, 'J')} (½·L·I², L = "
        f"{format_si(inductance, 'H')} at zero bias). Never disconnect the part while bias flows.",
        file=out,
    )
    if energy <= CONFIRM_ABOVE:
        return energy, "below threshold"
    if unattended:
        print(f"above {CONFIRM_ABOVE:g} J: going ahead unattended (--unattended)", file=out)
        return energy, "unattended"
    if terminal is None:
        terminal = sys.stdin.isatty()
    if not terminal:
        raise BiasError(
            f"the part stores {format_si(energy, 'J')} at {current:.3g} A, above "
            f"{CONFIRM_ABOVE:g} J, and there is no terminal to confirm on; run it on a "
            "terminal, or give --unattended for an unattended station"
        )
    out.flush()
    if ask(f'above {CONFIRM_ABOVE:g} J: type "yes" to go ahead: ').strip().lower() != "yes":
        raise BiasError("not confirmed; no bias was sent")
    return energy, "operator"


def ending(error: BaseException | None, command: str, kept: str) -> int:
    """The exit code for how a run ended, with one line on stderr when it ended early; an
    error that is not the user's is raised (after the bias was brought down and the readings
    kept)."""
    from acquire.errors import AcquireError
    from acquire.signals import stop_reason
    from drivers.errors import BiasError as SupplyError
    from drivers.errors import InstrumentError

    if error is None:
        return 0
    after = kept
    if not isinstance(error, SupplyError):  # a supply error may mean the ramp-down failed
        after += "; the bias was ramped to zero and switched off"
    if isinstance(error, KeyboardInterrupt):
        print(f"acquire {command}: {stop_reason(error)}; {after}", file=sys.stderr)
        return 130
    if isinstance(error, AcquireError | InstrumentError | OSError):
        print(f"acquire {command}: error: {error}; {after}", file=sys.stderr)
        return 2
    raise error
