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
    """A started publisher of ``station``'s units (None without ``url``): see
    :func:`acquire.publish.publisher.start_publisher`."""
    if not url:
        return None
    from acquire.publish.publisher import start_publisher

    return start_publisher(url, line_name(line), store_url, station)
