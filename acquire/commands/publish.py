"""Send the units that wait to be published to an MQTT broker, then exit.

A station started with --publish sends each unit once the store holds it; units stored while the
broker was away, or by a station without --publish, wait in the store. This command sends them,
for every station with units in the store (or only those named with --station), in the order
the store holds them, each as the station would have, and moves each station's publish position
only past the units the broker acknowledged. Receivers drop repeats by attempt_id.

The store's first publish of a station sends every unit the store holds for that station.
Exits with 0 when nothing waits any more, 2 when the broker cannot be reached or stops
acknowledging (what was not acknowledged still waits).
"""

from __future__ import annotations

import argparse

from acquire.commands.options import add_store
from acquire.commands.publish_options import add_publish

HELP = "send the units waiting in the store to an MQTT broker (--publish), then exit"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    add_store(parser)
    add_publish(parser, required=True)
    parser.add_argument(
        "--station",
        action="append",
        metavar="NAME",
        help="publish only this station's units (repeat for more; default: every station)",
    )


def run(args: argparse.Namespace) -> int:
    from acquire.commands.publish_options import line_name
    from acquire.publish.link import Link
    from acquire.publish.sending import client_id, send_waiting
    from acquire.publish.target import StationTopics, parse_publish_url
    from acquire.store import open_store

    target = parse_publish_url(args.publish)
    line = line_name(args.line)
    with open_store(args.store, create=False) as store:
        stations = args.station or store.stations_with_units()
        topics = {s: StationTopics.of(target, line, s) for s in stations}
        link = Link(target, client_id())
        link.open()
        total, complete = 0, True
        try:
            for station in stations:
                sent, drained = send_waiting(store, link, topics[station], station)
                total += sent
                left = "" if drained else f"; {store.unpublished_count(station)} still wait"
                print(f"station {station}: {sent} units published{left}")
                if not drained:
                    complete = False
                    break
        finally:
            link.close()
    print(f"{total} units published to {target.shown} (line {line})")
    if not complete:
        print("the broker stopped acknowledging: run this again when it is back")
    return 0 if complete else 2
