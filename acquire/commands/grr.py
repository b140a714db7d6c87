"""Gauge repeatability and reproducibility (gauge R&R): how much of the spread a station reports
comes from the station and its operators, and how much from the parts.

`acquire grr analyse` takes a stored study (its number) or a CSV file with the columns
part,operator,trial,value (a header row; the value's unit may be given in brackets, e.g.
`value [uH]`; lines starting with # are comments and `# quantity: Ls@100kHz` names the
quantity). The study must be crossed and balanced: every operator measures every part the same
number of times (at least 2 parts, 2 operators and 2 trials; 10 x 3 x 3 is usual).

Trade terms: repeatability (EV) is the scatter of one operator measuring one part again;
reproducibility (AV) the scatter between operators (with the operator-by-part interaction);
GRR = sqrt(EV² + AV²); part variation (PV) the spread of the parts themselves; total variation
TV = sqrt(GRR² + PV²). %GRR of total variation = 100·GRR/TV; %GRR of tolerance =
100·6·GRR/(USL - LSL) (6 standard deviations, or --spread 5.15); ndc, the number of distinct
categories the station can tell apart = floor(1.41·PV/GRR). The analysis is the ANOVA method of
the AIAG Measurement Systems Analysis manual (4th edition, 2010), with the average-and-range
method beside it. The interaction is pooled into repeatability when its p-value is above 0.25
(common practice; --pool-above sets it). Bands in common use: under 10 % acceptable, 10 % to 30 %
may be acceptable depending on the application, over 30 % unacceptable.
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_store, print_json

HELP = "gauge R&R: analyse a crossed study (ANOVA and average-and-range methods)"

ANALYSE_DESCRIPTION = """\
Analyse a gauge R&R study: STUDY is a stored study's number, or FILE.csv a file with the columns
part,operator,trial,value. --tolerance is the width USL - LSL, with its unit (20uH) or as a
plain number in the value's SI unit (henry, ohm, ...); a stored study's own tolerance is used
when none is given. --pictures writes the components of variation, the range and average charts
by operator, and the measurements by part and by operator as PNG files into FOLDER.
"""


def _run_action():
    """The `run` action's module (a guided study on the station), when this build has it."""
    try:
        import acquire.commands.grr_run as runner
    except ModuleNotFoundError as exc:
        if exc.name != "acquire.commands.grr_run":
            raise
        return None
    return runner


def add_arguments(parser: argparse.ArgumentParser) -> None:
    actions = parser.add_subparsers(dest="action", metavar="ACTION", required=True)
    an = actions.add_parser(
        "analyse",
        help="analyse a stored study or a CSV file",
        description=ANALYSE_DESCRIPTION,
        formatter_class=argparse.RawDescriptionHelpFormatter,
    )
    an.add_argument("study", metavar="STUDY|FILE.csv", help="a stored study's number or a CSV file")
    an.add_argument("--tolerance", help="USL - LSL, e.g. 20uH (a plain number: SI unit)")
    an.add_argument("--spread", type=float, default=6.0, metavar="K",
                    help="standard deviations in the spread compared with the tolerance "
                    "(default 6; 5.15 is the older convention)")  # fmt: skip
    an.add_argument("--pool-above", type=float, default=0.25, metavar="P",
                    help="pool the interaction when its p-value is above P (default 0.25, "
                    "common practice; 1 never pools)")  # fmt: skip
    an.add_argument("--json", action="store_true", help="print the result as JSON")
    an.add_argument("--pictures", metavar="FOLDER", help="write the PNG pictures into FOLDER")
    add_store(an)
    an.set_defaults(_action=_analyse)
    runner = _run_action()
    if runner is not None:
        run_parser = actions.add_parser(
            "run",
            help="guide a study through the station and store it",
            description=runner.__doc__,
            formatter_class=argparse.RawDescriptionHelpFormatter,
        )
        runner.add_run_arguments(run_parser)
        run_parser.set_defaults(_action=runner.run_study)


def run(args: argparse.Namespace) -> int:
    return int(args._action(args) or 0)


def _load(args: argparse.Namespace):
    """(data, stored tolerance or None, description) of the study or file named."""
    from acquire.errors import InputError
    from acquire.msa.grr_data import read_grr_csv

    given = args.study
    if given.lower().endswith(".csv"):
        return read_grr_csv(given), None, given
    if not given.strip().isdigit():
        raise InputError(f"{given!r}: give a stored study's number or a file ending in .csv")
    from acquire.commands.options import open_existing_store

    with open_existing_store(args.store) as store:
        loader = getattr(store, "load_grr_study", None)
        if loader is None:
            raise InputError("this store keeps no gauge R&R studies; analyse a CSV file instead")
        info, data = loader(int(given))
    return data, info.tolerance, f"study {info.id} {info.name}"


def _analyse(args: argparse.Namespace) -> int:
    import math
    from pathlib import Path

    from rich.console import Console
    from rich.text import Text

    from acquire.errors import InputError
    from acquire.msa.grr_report import analyse, print_text, to_json
    from acquire.units import parse_quantity

    if not (math.isfinite(args.spread) and args.spread > 0):
        raise InputError("--spread must be a positive number of standard deviations (6 or 5.15)")
    if not (0.0 <= args.pool_above <= 1.0):
        raise InputError("--pool-above must be a p-value from 0 to 1 (0.25 is usual)")
    data, stored_tolerance, source = _load(args)
    tolerance = stored_tolerance
    if args.tolerance is not None:
        tolerance = parse_quantity(args.tolerance, data.unit or None)
    result = analyse(data, tolerance, args.spread, args.pool_above, source)
    written = _pictures(args.pictures, args.store, result) if args.pictures else []
    if args.json:
        print_json({**to_json(result), "pictures": [str(p) for p in written]}, allow_nan=False)
        return 0
    console = Console(highlight=False, emoji=False)
    if not console.is_terminal:
        console = Console(highlight=False, emoji=False, width=160)
    print_text(result, console)
    for path in written:
        console.print(Text(f"wrote {Path(path)}"))
    return 0


def _pictures(folder: str, store_url: str, result) -> list:
    """Write the pictures into ``folder`` (made if missing); never over the store's file."""
    from types import SimpleNamespace

    from acquire.destination import check_destination, check_folder
    from acquire.msa.grr_pictures import grr_figures
    from acquire.store.url import parse_store_url

    # the store's own file, for the destination checks, without opening the store
    store = SimpleNamespace(path=parse_store_url(store_url).path)
    where = check_folder(folder, store, "--pictures")
    where.mkdir(parents=True, exist_ok=True)
    written = []
    for name, png in grr_figures(result):
        target = check_destination(where / name, store, "--pictures")
        target.write_bytes(png)
        written.append(target)
    return written
