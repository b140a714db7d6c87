"""The publishing options of `acquire station`, `acquire demo` and `acquire publish`."""

from __future__ import annotations

import argparse
import os
from typing import Any

#: The line's name in topics when neither --line nor ACQUIRE_LINE gives one.
DEFAULT_LINE = "line"


def add_publish(parser: argparse.ArgumentParser, required: bool = False) -> None:
    env = os.environ.get("ACQUIRE_PUBLISH")
    parser.add_argument(
        "--publish",
        metavar="URL",
        default=env,
        required=required and env is None,
        help="publish each stored unit and the station's status to an MQTT broker: "
        "mqtt://host[:port]/<prefix> (env ACQUIRE_PUBLISH; port 1883 by default)",
    )
    parser.add_argument(
        "--line",
        default=os.environ.get("ACQUIRE_LINE", DEFAULT_LINE),
        help=f"name of the line in the topics (env ACQUIRE_LINE; default {DEFAULT_LINE!r})",
    )


def line_name(text: str) -> str:
    from acquire.errors import InputError

    name = " ".join(str(text).split())
    if not name or not name.isprintable():
        raise InputError(f"--line needs a printable name, not {text!r}")
    return name


def publisher(url: str | None, line: str, store_url: str, station: str) -> Any:
    """A started :class:`~acquire.publish.publisher.Publisher` of ``station``'s units in the
    store at ``store_url`` (None without ``url``); a bad URL or name raises InputError."""
    if not url:
        return None
    from acquire.errors import InputError
    from acquire.publish.publisher import Publisher
    from acquire.publish.target import parse_publish_url
    from acquire.store import open_store
    from acquire.store.url import parse_store_url

    target = parse_publish_url(url)
    location = parse_store_url(store_url)
    if location.engine == "sqlite" and location.path is None:
        raise InputError("--publish needs a store in a file or a database, not in memory")
    return Publisher(target, store_url, line_name(line), station, open_store)
