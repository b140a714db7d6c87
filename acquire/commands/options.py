"""Options that recur across subcommands and mean the same everywhere.

Each takes its default from an environment variable, so a bench can be set up once:
``ACQUIRE_RESOURCE``, ``ACQUIRE_DIALECT``, ``ACQUIRE_STORE``, ``ACQUIRE_BACKEND``.
"""

from __future__ import annotations

import argparse
import os

DEFAULT_STORE = "sqlite:///acquire.db"


def add_resource(parser: argparse.ArgumentParser, required: bool = True) -> None:
    env = os.environ.get("ACQUIRE_RESOURCE")
    parser.add_argument(
        "--resource",
        default=env,
        required=required and env is None,
        help="VISA resource string of the meter, e.g. TCPIP0::127.0.0.1::5025::SOCKET "
        "(env ACQUIRE_RESOURCE)",
    )
    parser.add_argument(
        "--backend",
        default=os.environ.get("ACQUIRE_BACKEND", "@py"),
        help="pyvisa backend: @py (pure Python, default), @sim (pyvisa-sim) or a path to a "
        "system VISA library (env ACQUIRE_BACKEND)",
    )


def add_dialect(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--dialect",
        default=os.environ.get("ACQUIRE_DIALECT", "simulated"),
        help="name of a shipped dialect or path to a dialect TOML file describing the meter's "
        "commands (env ACQUIRE_DIALECT; default: simulated)",
    )


def add_store(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--store",
        default=os.environ.get("ACQUIRE_STORE", DEFAULT_STORE),
        help="results store URL: sqlite:///path/file.db or postgresql://user@host/dbname "
        f"(env ACQUIRE_STORE; default: {DEFAULT_STORE})",
    )


def add_plan_arguments(parser: argparse.ArgumentParser) -> None:
    """The frequency plan options (shared with `acquire reference capture`)."""
    g = parser.add_argument_group("frequency plan (a span, a --list or a --file)")
    g.add_argument("--start", help="lowest frequency, e.g. 100Hz (default 100Hz)")
    g.add_argument("--stop", help="highest frequency, e.g. 10MHz (default 10MHz)")
    g.add_argument("--points", type=int, help="number of frequencies in the span (default 201)")
    g.add_argument(
        "--spacing", choices=("log", "linear"), default="log", help="spacing of the span"
    )
    g.add_argument("--list", dest="values", help='explicit frequencies, e.g. "1k, 10k, 100kHz"')
    g.add_argument("--file", help="text file of frequencies (commas, spaces or lines; # comments)")


def plan_from_args(args: argparse.Namespace):
    """The plan the options describe; the default span is 100 Hz to 10 MHz, 201 points."""
    from acquire.plan import make_plan

    if not (args.values or args.file):
        start = args.start or "100Hz"
        stop = args.stop or "10MHz"
        return make_plan(start=start, stop=stop, points=args.points, spacing=args.spacing)
    if args.points:
        from acquire.errors import InputError

        raise InputError("--points goes with --start and --stop, not with --list or --file")
    return make_plan(start=args.start, stop=args.stop, values=args.values, file=args.file)


def open_existing_store(url: str):
    """Open the results store at ``url`` to read from it. A store that is not there (a missing,
    empty or other SQLite file, an in-memory store, a database or schema without one) is
    refused, since a typo in --store would otherwise make a new, empty store and find nothing."""
    from acquire.errors import InputError
    from acquire.store import open_store
    from acquire.store.url import parse_store_url

    path = parse_store_url(url).path
    if path is not None and not path.exists():
        raise InputError(
            f"there is no results store at {path} (--store {url}): check the path or "
            "ACQUIRE_STORE; `acquire reference capture` and `acquire sweep` create one"
        )
    return open_store(url, create=False)


def parse_time(text: str | None, option: str):
    """An ISO 8601 time as an aware datetime, or None. A time without a zone is UTC, the zone
    the store keeps and the lists print, so a time copied from a list selects what it shows."""
    from datetime import UTC, datetime

    from acquire.errors import InputError

    if text is None:
        return None
    try:
        when = datetime.fromisoformat(text.strip())
        return when.replace(tzinfo=UTC) if when.tzinfo is None else when.astimezone(UTC)
    except (ValueError, OverflowError):  # OverflowError: beyond year 1 to 9999 once in UTC
        raise InputError(
            f"{option} {text!r} is not an ISO 8601 time: write e.g. 2026-03-02 or "
            "2026-03-02T08:00 (UTC unless a zone such as +01:00 is given)"
        ) from None


def lot_filter_from_args(args: argparse.Namespace, lot: str | None):
    """The units a lot name and the --since, --until, --station and --plan options choose."""
    from acquire.report.statistics import LotFilter

    return LotFilter(
        lot=lot,
        since=parse_time(args.since, "--since"),
        until=parse_time(args.until, "--until"),
        station=args.station,
        plan_hash=args.plan,
    )


def print_json(document, **options) -> None:
    """Print ``document`` as JSON: its text as it is on a UTF-8 output, else with every other
    character as a ``\\uXXXX`` escape (RFC 8259, 7), so nothing is respelled or lost."""
    import json
    import sys

    encoding = (getattr(sys.stdout, "encoding", None) or "").lower().replace("-", "")
    plain = encoding in ("utf8", "utf16", "utf32")
    print(json.dumps(document, ensure_ascii=not plain, **options))
