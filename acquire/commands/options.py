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
