"""The stored-run actions of ``acquire bias-sweep`` and ``acquire temperature-rise``.

``acquire bias-sweep ACTION ...`` and ``acquire temperature-rise ACTION ...`` read the store
instead of measuring:

  list     the stored runs, oldest first: id, start (UTC), DUT, status and the result (the drop
           currents of a bias sweep; the current and rise of a temperature-rise run); a run
           whose writer died is shown as interrupted (abandoned)
  show     one run: its settings, result and points
  export   a run as a --csv file, or as a --picture (PNG): Ls and Q against the bias current,
           or the temperature rise against time
  rated    (bias-sweep only) a choke's rated current from a stored bias sweep and a stored
           temperature-rise search (--rise-run ID): the lower of its saturation current at
           --drop and its temperature-rise current, and which of the two limits it

A stored bias sweep's open/short references were captured at zero bias; its safety record
(the maximum bias, the energy stored at the largest bias, how going ahead was confirmed) is
shown and exported with it.
"""

from __future__ import annotations

import argparse

from acquire.commands.options import DEFAULT_STORE

ACTIONS = ("list", "show", "export", "rated")
KINDS = {"bias": "bias sweep", "rise": "temperature-rise run"}


def _add_store(parser: argparse.ArgumentParser) -> None:
    """--store after the action word, not defaulted here (one given before the word, read by the
    command itself, is kept)."""
    parser.add_argument(
        "--store",
        default=argparse.SUPPRESS,
        help=f"results store URL (env ACQUIRE_STORE; default: {DEFAULT_STORE})",
    )


def _actions(parser: argparse.ArgumentParser, kind: str) -> None:
    what = KINDS[kind]
    command = "bias-sweep" if kind == "bias" else "temperature-rise"
    actions = parser.add_subparsers(
        dest="action",
        metavar="[ACTION]",
        required=False,
        title=f"actions on stored {what}s (without one, the command measures)",
    )
    lst = actions.add_parser("list", help=f"list the stored {what}s")
    show = actions.add_parser("show", help=f"show a stored {what}")
    exp = actions.add_parser("export", help=f"write a stored {what} to a CSV or PNG file")
    for sub in (lst, show, exp):
        _add_store(sub)
        sub.set_defaults(stored_kind=kind)
    for sub in (show, exp):
        sub.add_argument("run_id", metavar="ID", help=f"the {what}'s id (`acquire {command} list`)")
    to = exp.add_mutually_exclusive_group(required=True)
    to.add_argument("--csv", dest="to_csv", metavar="FILE", help="CSV with a # key: value head")
    picture = "Ls and Q against bias current" if kind == "bias" else "the rise against time"
    to.add_argument("--picture", dest="to_png", metavar="FILE.png", help=f"PNG: {picture}")
    if kind == "bias":
        rated = actions.add_parser(
            "rated", help="the rated current: the lower of the saturation and temperature-rise "
            "currents, from a stored bias sweep and temperature-rise search",
        )  # fmt: skip
        _add_store(rated)
        rated.set_defaults(stored_kind=kind)
        rated.add_argument("run_id", metavar="ID", help="the bias sweep's id")
        rated.add_argument(
            "--rise-run",
            required=True,
            metavar="ID",
            help="a stored temperature-rise run that searched a rise (--rise)",
        )
        rated.add_argument(
            "--drop", default="20%", help="the drop the saturation current is rated at (20%%)"
        )
        rated.add_argument("--json", action="store_true", help="print the result as JSON")


def add_actions(parser: argparse.ArgumentParser) -> None:
    """The optional first word of ``acquire bias-sweep`` (list, show, export) and its options."""
    _actions(parser, "bias")


def add_rise_actions(parser: argparse.ArgumentParser) -> None:
    """The optional first word of ``acquire temperature-rise`` and its options."""
    _actions(parser, "rise")


def run_action(args: argparse.Namespace) -> int:
    """Run the action chosen on ``acquire bias-sweep`` or ``acquire temperature-rise``."""
    kind = getattr(args, "stored_kind", "bias")
    actions = {"list": _list, "show": _show, "export": _export, "rated": _rated}
    return actions[args.action](args, kind)


def run_id(text: str, kind: str) -> int:
    """A run id the user typed: a whole number of 1 or more."""
    from acquire.errors import InputError

    t = str(text).strip()
    if not (t.isascii() and t.isdigit()) or len(t) > 18 or int(t) < 1:
        shown = t if len(t) <= 20 else t[:20] + "..."
        raise InputError(f"{shown!r} is not a {KINDS[kind]} id: give a whole number such as 3")
    return int(t)


def _load(store, text: str, kind: str):
    from acquire.errors import StoreError

    number = run_id(text, kind)
    try:
        return store.load_bias_sweep(number) if kind == "bias" else store.load_rise_run(number)
    except StoreError as exc:
        if f"no {KINDS[kind]} {number}" not in str(exc):
            raise
        command = "bias-sweep" if kind == "bias" else "temperature-rise"
        raise StoreError(f"{exc} at {store.url}; `acquire {command} list` shows them") from None


def _list(args: argparse.Namespace, kind: str) -> int:
    from rich import box
    from rich.table import Table
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.display import text_console

    console = text_console()
    with open_existing_store(args.store) as store:
        infos = store.list_bias_sweeps() if kind == "bias" else store.list_rise_runs()
        if not infos:
            console.print(Text(f"no {KINDS[kind]}s in {store.url}"), soft_wrap=True)
            return 0
        console.print(Text(f"{KINDS[kind]}s in {store.url}"), soft_wrap=True)
    table = Table(box=box.SIMPLE_HEAD, pad_edge=False, collapse_padding=True, show_edge=False)
    result = "drop currents" if kind == "bias" else "current, rise"
    for col in ("id", "started (UTC)", "DUT", "points", "status", result):
        table.add_column(col, justify="right" if col in ("id", "points") else "left",
                         overflow="fold")  # fmt: skip
    for info in infos:
        status = info.status + (" (abandoned)" if info.abandoned else "")
        if kind == "bias":
            count, shown = info.points, _drops(info.drops)
        else:
            rise = "no reading" if info.final_rise is None else f"{info.final_rise:.1f} K"
            settled = ", settled" if info.settled else ""
            count, shown = info.readings, f"{info.current:g} A, {rise}{settled}"
        dut = Text(" ".join(info.dut.split()) or "—")
        started = f"{info.started_at:%Y-%m-%d %H:%M}"
        table.add_row(str(info.id), started, dut, str(count), Text(status), Text(shown))
    console.print(table)
    return 0


def _drops(drops) -> str:
    from acquire.report.bias_export import percent

    return ", ".join(f"{percent(d.drop)}: {d.text()}" for d in drops) or "none"


def _show(args: argparse.Namespace, kind: str) -> int:
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.display import text_console
    from acquire.report.bias_export import bias_about, rise_about

    with open_existing_store(args.store) as store:
        result = _load(store, args.run_id, kind)
    console = text_console()
    about = bias_about(result) if kind == "bias" else rise_about(result)
    console.print(Text(f"{KINDS[kind]} {run_id(args.run_id, kind)}"), soft_wrap=True)
    for key, value in about.items():
        if str(value):
            console.print(Text(f"  {key}: {' '.join(str(value).split())}"), soft_wrap=True)
    console.print(_points_table(result, kind))
    return 0


def _points_table(result, kind: str):
    from rich import box
    from rich.table import Table

    from acquire.display import format_value
    from acquire.units import format_si

    table = Table(box=box.SIMPLE_HEAD, pad_edge=False, collapse_padding=True, show_edge=False)
    if kind == "bias":
        c = result.curve
        columns = [("setpoint", c.setpoint, "A"), ("applied", c.applied, "A")]
        columns += [("Ls", c.ls, ""), ("Rs", c.rs, ""), ("Q", c.q, "")]
    else:
        columns = [("time", result.times, "s"), ("resistance", result.resistance, "Ω")]
        columns += [("rise", result.rise, "K")]
    for head, _, _ in columns:
        table.add_column(head, justify="right")
    for k in range(len(columns[0][1])):
        table.add_row(
            *(
                format_si(float(v[k]), unit) if unit else format_value(head, float(v[k]))
                for head, v, unit in columns
            )
        )
    return table


def _export(args: argparse.Namespace, kind: str) -> int:
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.destination import check_destination
    from acquire.display import text_console
    from acquire.report import bias_export

    target = args.to_csv or args.to_png
    option = "--csv" if args.to_csv else "--picture"
    with open_existing_store(args.store) as store:
        check_destination(target, store, option)
        result = _load(store, args.run_id, kind)
    if args.to_csv:
        write = bias_export.write_bias_csv if kind == "bias" else bias_export.write_rise_csv
        path = write(result, target)
    else:
        from pathlib import Path

        from acquire.report import bias_pictures

        picture = bias_pictures.bias_png if kind == "bias" else bias_pictures.rise_png
        path = Path(target)
        path.write_bytes(picture(result))
    console = text_console()
    console.print(Text(f"{KINDS[kind]} {run_id(args.run_id, kind)} written to {path}"),
                  soft_wrap=True)  # fmt: skip
    return 0


def _rated(args: argparse.Namespace, kind: str) -> int:
    """The rated current from a stored bias sweep and a stored temperature-rise search."""
    from acquire.bias.rated import rated_current
    from acquire.commands.options import open_existing_store, print_json
    from acquire.errors import InputError
    from acquire.report.bias_export import percent
    from acquire.units import parse_fraction

    drop = parse_fraction(args.drop)
    with open_existing_store(args.store) as store:
        sweep = _load(store, args.run_id, "bias")
        rise = _load(store, args.rise_run, "rise")
    found = [d for d in sweep.drops if abs(d.drop - drop) < 1e-9]
    if not found:
        asked = ", ".join(percent(d.drop) for d in sweep.drops) or "none"
        raise InputError(
            f"bias sweep {run_id(args.run_id, 'bias')} found no saturation current at a "
            f"{percent(drop)} drop (it has {asked}); give one of those with --drop"
        )
    target = rise.settings.target_rise
    if target is None or rise.status != "complete" or rise.note or not rise.settled:
        raise InputError(
            f"temperature-rise run {run_id(args.rise_run, 'rise')} did not find the current for "
            "a rise (it held one current, or its search did not end); run `acquire "
            "temperature-rise --rise 40K ...` and give that run"
        )
    rated = rated_current(found[0], rise.current)
    saturation = f"saturation current at a {percent(drop)} drop: {found[0].text()}"
    heating = f"temperature-rise current for {target:g} K: {rise.current:.3g} A"
    if args.json:
        print_json(
            {
                "saturation_drop": drop,
                "saturation_current_a": found[0].current,
                "saturation_above_a": None if found[0].reached else found[0].highest,
                "rise_k": target,
                "temperature_rise_current_a": rise.current,
                "rated_current_a": rated.current,
                "rated_above_a": rated.at_least,
                "limited_by": rated.limited_by,
            },
            indent=2,
        )
        return 0
    print(saturation)
    print(heating)
    print(f"rated current: {rated.text()}")
    return 0
