"""Write a report of stored work: a lot's pictures and statistics, and sweeps' pictures.

The report is a folder (--out) holding one PNG per picture and report.html, a single page that
embeds every picture (it needs no other file and loads nothing from the network; mail it or
archive it as it is).

For a lot (--lot, or units chosen by --since/--until/--station/--plan): the counts, first-pass
and final yields and bins; a table per quantity with mean, standard deviation, min, max, Cp,
Cpk, Pp and Ppk; and per judged quantity a histogram with the plan's tolerance limits (solid
lines) and the acceptance limits applied after the guard band (dashed lines), and an
individuals and moving-range control chart in test order, points breaking a run rule ringed
and numbered. For each --sweep: Ls, Rs, Q, |Z| and phase against frequency, raw and corrected,
with the fitted equivalent circuit and the self-resonance.

Times (--since, --until) are ISO 8601, e.g. 2026-03-02 or 2026-03-02T08:00; a time without a
zone is taken as UTC, the zone the store keeps.
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_store

HELP = "write a lot's and sweeps' pictures and statistics as an HTML page and PNG files"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    g = parser.add_argument_group("a lot, or units chosen by time, station or plan")
    g.add_argument("--lot", help="the lot's name")
    g.add_argument("--since", help="units finished at or after this time (ISO 8601, UTC)")
    g.add_argument("--until", help="units finished before this time (ISO 8601, UTC)")
    g.add_argument("--station", help="units tested at this station")
    g.add_argument("--plan", help="units tested with this plan (hash prefix or name)")
    parser.add_argument(
        "--sweep",
        type=int,
        nargs="+",
        action="extend",
        default=[],
        metavar="ID",
        help="stored sweep id(s) to draw (several are overlaid); `acquire sweep list` shows them",
    )
    parser.add_argument("--out", required=True, help="folder for report.html and the PNGs")
    parser.add_argument("--title", help="the page's title (default: what the report shows)")
    add_store(parser)


def lot_filter(args: argparse.Namespace):
    """The units the options choose, or None when none of the lot options is given."""
    from acquire.commands.options import lot_filter_from_args

    chosen = lot_filter_from_args(args, args.lot)
    return None if chosen.empty else chosen


def run(args: argparse.Namespace) -> int:
    from acquire.commands.options import open_existing_store
    from acquire.destination import check_folder
    from acquire.errors import InputError
    from acquire.report.lot_pictures import selection_name
    from acquire.report.page import lot_section, sweep_section, write_report

    chosen = lot_filter(args)
    if chosen is None and not args.sweep:
        raise InputError(
            "say what to report: --lot LOT (or --since/--station/--plan) or --sweep ID"
        )
    sections = []
    shown = []
    with open_existing_store(args.store) as store:
        check_folder(args.out, store, "--out")
        if chosen is not None:
            sections.append(lot_section(store, chosen))
            shown.append(selection_name(chosen))
        if args.sweep:
            sections.append(sweep_section(store, args.sweep))
            shown.append(sections[-1][0])
    title = args.title or "Report: " + "; ".join(shown)
    page = write_report(args.out, title, sections)
    pictures = sum(len(s[1]) for s in sections)
    print(f"wrote {page} ({pictures} pictures, also as PNG files beside it)")
    return 0
