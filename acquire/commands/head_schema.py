"""For contributors, not a subcommand: write or check the frozen SQLite script of the newest
store layout (:mod:`acquire.store.head_schema`) after a new migration::

    python -m acquire.commands.head_schema --write   # write acquire/store/head_schema.sql again
    python -m acquire.commands.head_schema --check   # exit 1 when it is not what --write writes
"""

from __future__ import annotations

import argparse
import sys

from acquire.store.head_schema import COMMAND, script_is_current, write_script
from acquire.store.new_sqlite import SCRIPT


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(
        prog="python -m acquire.commands.head_schema", description=__doc__.splitlines()[0]
    )
    what = parser.add_mutually_exclusive_group(required=True)
    what.add_argument("--write", action="store_true", help=f"write {SCRIPT.name} again")
    what.add_argument("--check", action="store_true", help="exit 1 when the script is stale")
    args = parser.parse_args(argv)
    if args.write:
        print(f"wrote {write_script()}")
        return 0
    if script_is_current():
        print(f"{SCRIPT.name} makes the newest layout")
        return 0
    print(f"{SCRIPT.name} is stale: run `{COMMAND}`", file=sys.stderr)
    return 1


if __name__ == "__main__":
    sys.exit(main())
