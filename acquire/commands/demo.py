"""Run the tool's main job on the built-in simulated meter: no hardware, no set-up.

The demo starts a simulated impedance meter on a free loopback port, captures the fixture's
open, short and load references (OPEN: fixture empty; SHORT: fixture shorted where the part
sits; LOAD: a standard of known impedance in the fixture), sweeps a demo coil from 100 Hz to
10 MHz with the live view of Ls (series inductance), Rs (series resistance) and Q (quality
factor, X/R), marks the coil's self-resonance (where its reactance turns from inductive to
capacitive), and compares the raw readings with the corrected ones. Everything is written to
an SQLite store whose path it prints. It takes well under a minute.

Safety, for when you move to a real bench: measure only discharged parts that are not
connected to any supply; an inductor under DC bias stores energy. Mains-powered fixtures must
be set up as local codes, the meter maker's instructions and licensed practice require.
"""

from __future__ import annotations

import argparse
import os

from acquire.commands.publish_options import add_publish

HELP = "run a complete characterisation on the built-in simulated meter (no hardware)"

DEFAULT_STORE = "sqlite:///acquire-demo.db"


def add_arguments(parser: argparse.ArgumentParser) -> None:
    parser.add_argument(
        "--store",
        default=os.environ.get("ACQUIRE_STORE", DEFAULT_STORE),
        help=f"results store URL (env ACQUIRE_STORE; default {DEFAULT_STORE}, in this folder)",
    )
    parser.add_argument(
        "--no-live", action="store_true", help="plain progress lines instead of the live view"
    )
    parser.add_argument(
        "--points", type=int, default=201, help="frequencies in the 100 Hz to 10 MHz sweep"
    )
    parser.add_argument("--seed", type=int, default=0, help="seed of the simulated noise")
    add_publish(parser)


def run(args: argparse.Namespace) -> int:
    from acquire.commands.publish_options import line_name
    from acquire.demo import run_demo
    from acquire.errors import InputError
    from acquire.publish.target import parse_publish_url
    from drivers.simulator import LIST_MAX

    if not 2 <= args.points <= LIST_MAX:
        raise InputError(f"--points must be between 2 and {LIST_MAX} (the simulated meter's list)")
    if args.publish:
        parse_publish_url(args.publish)  # a bad URL is refused before anything is measured
    publish = (args.publish, line_name(args.line)) if args.publish else None
    result = run_demo(
        args.store, live=not args.no_live, points=args.points, seed=args.seed, publish=publish
    )
    if result.outcome is None:
        return 2
    if result.outcome.interrupted:
        return 130 if isinstance(result.outcome.error, KeyboardInterrupt) else 2
    return 0
