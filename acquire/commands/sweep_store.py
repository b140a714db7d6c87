"""The stored-sweep actions of ``acquire sweep``: list, show, export, close.

``acquire sweep ACTION ...`` reads the store instead of measuring:

  list     the stored sweeps, newest last: id, start (UTC), DUT, fixture, reference set,
           points and status; a sweep whose writer died is shown as interrupted (abandoned)
  show     the summary table a sweep printed at its end, rebuilt from the stored points
  export   a sweep as --csv, --json or --touchstone (.s1p) file
  close    write "interrupted" into the rows of abandoned sweeps (their writer is gone)
"""

from __future__ import annotations

import argparse

from acquire.commands.options import DEFAULT_STORE, parse_time

ACTIONS = ("list", "show", "export", "close")
STATUSES = ("complete", "interrupted", "running")


def _add_store(parser: argparse.ArgumentParser) -> None:
    """--store after the action word; not defaulted here, so one given before the word (read
    by ``acquire sweep`` itself) is not overwritten by this parser's default."""
    parser.add_argument(
        "--store",
        default=argparse.SUPPRESS,
        help=f"results store URL (env ACQUIRE_STORE; default: {DEFAULT_STORE})",
    )


def add_actions(parser: argparse.ArgumentParser) -> None:
    """The optional first word of ``acquire sweep`` and each action's options."""
    actions = parser.add_subparsers(
        dest="action",
        metavar="[ACTION]",
        required=False,
        title="actions on stored sweeps (without one, the command measures)",
    )
    lst = actions.add_parser("list", help="list the stored sweeps")
    _add_store(lst)
    lst.add_argument("--dut", dest="filter_dut", help="only sweeps whose DUT name contains this")
    lst.add_argument("--status", choices=STATUSES, help="only sweeps of this status")
    lst.add_argument("--since", help="only sweeps started at or after this UTC time (ISO 8601)")
    lst.add_argument("--fixture", dest="filter_fixture", help="only sweeps on this fixture")
    show = actions.add_parser("show", help="show a stored sweep's end-of-sweep summary")
    _add_store(show)
    show.add_argument("sweep_id", metavar="ID", help="the sweep's id (see `acquire sweep list`)")
    show.add_argument(
        "--uncertainty", dest="show_u", action="store_true", help="show ± U beside the values"
    )
    exp = actions.add_parser("export", help="write a stored sweep to a CSV, JSON or .s1p file")
    _add_store(exp)
    exp.add_argument("sweep_id", metavar="ID", help="the sweep's id (see `acquire sweep list`)")
    to = exp.add_mutually_exclusive_group(required=True)
    to.add_argument("--csv", dest="to_csv", metavar="FILE", help="CSV with a # key: value head")
    to.add_argument("--json", dest="to_json", metavar="FILE", help="JSON: the head and the points")
    to.add_argument(
        "--touchstone", dest="to_s1p", metavar="FILE", help="one-port Touchstone file (S11, 50 ohm)"
    )
    exp.add_argument(
        "--raw",
        action="store_true",
        help="Touchstone: the raw readings (fixture not removed) instead of the corrected ones",
    )
    close = actions.add_parser("close", help="mark abandoned sweeps interrupted in the store")
    _add_store(close)
    close.add_argument("sweep_id", metavar="ID", nargs="?", help="only if this sweep is abandoned")


def run_action(args: argparse.Namespace) -> int:
    return {"list": _list, "show": _show, "export": _export, "close": _close}[args.action](args)


def sweep_id(text: str) -> int:
    """A sweep id the user typed: a whole number of 1 or more."""
    from acquire.errors import InputError

    t = str(text).strip()
    if not (t.isascii() and t.isdigit()) or len(t) > 18 or int(t) < 1:
        shown = t if len(t) <= 20 else t[:20] + "..."
        raise InputError(
            f"{shown!r} is not a sweep id: give a whole number such as 3 (`acquire sweep list`)"
        )
    return int(t)


def _list(args: argparse.Namespace) -> int:
    from rich import box
    from rich.table import Table
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.display import text_console

    since = parse_time(args.since, "--since")
    console = text_console()
    with open_existing_store(args.store) as store:
        fixtures: dict[int, str] = {}
        refs: dict[int, str] = {}
        rows = []
        for info in store.list_sweeps():
            if info.fixture_id is not None and info.fixture_id not in fixtures:
                fixtures[info.fixture_id] = store.fixture(info.fixture_id).name
            fixture = fixtures.get(info.fixture_id, "") if info.fixture_id is not None else ""
            if args.filter_dut and args.filter_dut.lower() not in info.dut.lower():
                continue
            if args.filter_fixture is not None and fixture != args.filter_fixture:
                continue
            if args.status and info.status != args.status:
                continue
            if since is not None and info.started_at < since:
                continue
            ref = info.reference_set_id
            if ref is not None and ref not in refs:
                refs[ref] = _short_reference(store, ref)
            rows.append((info, fixture, refs.get(ref, "") if ref is not None else ""))
        if not rows:
            console.print(Text(f"no sweeps in {store.url} match"))
            return 0
        console.print(Text(f"sweeps in {store.url}"), soft_wrap=True)
        table = Table(box=box.SIMPLE_HEAD, pad_edge=False, collapse_padding=True, show_edge=False)
        for col in ("id", "started (UTC)", "DUT", "fixture", "references", "points", "status"):
            table.add_column(
                col,
                justify="right" if col in ("id", "points") else "left",
                no_wrap=col in ("started (UTC)", "references", "points", "status"),
                overflow="fold",
            )
        for info, fixture, ref in rows:
            status = info.status + (" (abandoned: close it)" if info.abandoned else "")
            planned = (info.settings or {}).get("points")
            short = isinstance(planned, int) and planned != info.points
            points = f"{info.points}/{planned}" if short else str(info.points)
            table.add_row(
                str(info.id),
                f"{info.started_at:%Y-%m-%d %H:%M}",
                Text(info.dut or "—"),
                Text(fixture or "—"),
                Text(ref or "none"),
                points,
                Text(status),
            )
        console.print(table)
    return 0


def _short_reference(store, ref_id: int) -> str:
    """``#3 OSL``: the set's id and its standards' initials (the fixture has its own column;
    `acquire reference list` and `acquire sweep show` describe the set in full)."""
    from acquire.errors import StoreError

    try:
        method = store.reference_set_info(ref_id).method
    except StoreError:
        return f"#{ref_id} (gone)"
    initials = "".join(word[:1].upper() for word in method.split("-"))
    return f"#{ref_id} {initials}".strip()


def _load(store, text: str):
    from acquire.errors import StoreError
    from acquire.report.sweep_export import load_sweep

    number = sweep_id(text)
    try:
        return load_sweep(store, number)
    except StoreError as exc:
        if f"no sweep {number}" not in str(exc):
            raise
        raise StoreError(f"{exc} at {store.url}; `acquire sweep list` shows them") from None


def _show(args: argparse.Namespace) -> int:
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.display import text_console
    from acquire.report.sweep_export import to_state
    from acquire.sweep_summary import summary

    with open_existing_store(args.store) as store:
        sweep = _load(store, args.sweep_id)
        refs = None
        if sweep.info.reference_set_id is not None:
            refs = _references(store, sweep.info.reference_set_id)
    state = to_state(sweep, refs)
    state.show_uncertainty = bool(args.show_u)
    console = text_console()
    started = f"{sweep.info.started_at:%Y-%m-%d %H:%M:%S} UTC"
    about = f"sweep {sweep.info.id}: DUT {sweep.info.dut or '(not named)'}, started {started}"
    console.print(Text(about), soft_wrap=True)
    console.print(summary(state))
    return 0


def _references(store, ref_id: int):
    from acquire.errors import AcquireError

    try:
        return store.load_reference_set(ref_id)
    except AcquireError:
        return None


def _export(args: argparse.Namespace) -> int:
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.destination import check_destination
    from acquire.display import text_console
    from acquire.errors import InputError
    from acquire.report import sweep_export

    target = args.to_csv or args.to_json or args.to_s1p
    option = "--csv" if args.to_csv else "--json" if args.to_json else "--touchstone"
    if args.raw and not args.to_s1p:
        raise InputError("--raw goes with --touchstone (CSV and JSON hold raw and corrected)")
    with open_existing_store(args.store) as store:
        check_destination(target, store, option)
        sweep = _load(store, args.sweep_id)
    if args.to_csv:
        path = sweep_export.write_csv(sweep, target)
    elif args.to_json:
        path = sweep_export.write_json(sweep, target)
    else:
        path = sweep_export.write_touchstone(sweep, target, raw=args.raw)
    text_console().print(
        Text(f"sweep {sweep.info.id} ({sweep.frequency.size} points) written to {path}"),
        soft_wrap=True,
    )
    return 0


def _close(args: argparse.Namespace) -> int:
    from rich.text import Text

    from acquire.commands.options import open_existing_store
    from acquire.display import text_console
    from acquire.errors import InputError

    console = text_console()
    with open_existing_store(args.store) as store:
        if args.sweep_id is not None:
            info = _load(store, args.sweep_id).info
            if not info.abandoned:
                what = (
                    "still running (its writer is alive)"
                    if info.status == "running"
                    else (f"{info.recorded_status}, not abandoned")
                )
                raise InputError(f"sweep {info.id} is {what}: nothing to close")
        closed = store.close_abandoned_sweeps()
        if not closed:
            console.print(Text(f"no abandoned sweeps in {store.url}"), soft_wrap=True)
            return 0
        ids = ", ".join(map(str, closed))
        also = " (every abandoned sweep is closed at once)" if len(closed) > 1 else ""
        console.print(
            Text(f"closed sweep{'s' if len(closed) > 1 else ''} {ids} as interrupted{also}"),
            soft_wrap=True,
        )
    return 0
