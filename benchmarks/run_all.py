"""Every speed goal of the project, measured and printed in one command.

Runs each benchmark as its own process (so each one's imports and memory are its own), passes
``--quick`` on when asked, collects the goals each prints (see ``goals.py``) and prints them in
one table with "met" or "NOT met" beside each figure. Exit status 0 when every goal is met.

Run:
    python benchmarks/run_all.py            # full sizes: the figures for a note (several minutes)
    python benchmarks/run_all.py --quick    # smaller sizes: a fast look, rougher figures
    python benchmarks/run_all.py --only bench_cli bench_store
"""

from __future__ import annotations

import argparse
import subprocess
import sys
import time
from pathlib import Path

import goals

HERE = Path(__file__).resolve().parent
BENCHMARKS = (
    "bench_cli",
    "bench_driver",
    "bench_sweep",
    "bench_dashboard",
    "bench_compensation",
    "bench_store",
    "bench_station",
    "bench_memory",
    "bench_simulator",
)


def run_one(name: str, quick: bool) -> tuple[list[goals.Goal], str, float]:
    command = [sys.executable, str(HERE / f"{name}.py")] + (["--quick"] if quick else [])
    began = time.perf_counter()
    done = subprocess.run(command, capture_output=True, text=True, cwd=HERE.parent)
    seconds = time.perf_counter() - began
    found = [g for g in map(goals.parse, done.stdout.splitlines()) if g is not None]
    trouble = ""
    if done.returncode not in (0, 1) or not found:
        trouble = done.stderr.strip()[-400:] or "no goals printed"
    return found, trouble, seconds


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="smaller sizes, rougher figures")
    parser.add_argument("--only", nargs="+", metavar="NAME", help="run only these benchmarks")
    args = parser.parse_args()
    names = [n for n in BENCHMARKS if (HERE / f"{n}.py").exists()]
    if args.only:
        unknown = sorted(set(args.only) - set(names))
        if unknown:
            parser.error(f"no such benchmark: {', '.join(unknown)} (known: {', '.join(names)})")
        names = [n for n in names if n in args.only]
    everything: list[tuple[str, goals.Goal]] = []
    broken: list[str] = []
    for name in names:
        print(f"running {name}{' --quick' if args.quick else ''} ...", file=sys.stderr, flush=True)
        found, trouble, seconds = run_one(name, args.quick)
        print(f"  {name}: {len(found)} goal(s) in {seconds:.0f} s", file=sys.stderr, flush=True)
        everything.extend((name, g) for g in found)
        if trouble:
            broken.append(f"{name}: {trouble}")
    print(f"{'benchmark':<20}{'met':<9}goal")
    for name, goal in everything:
        verdict = "met" if goal.met else "NOT met"
        print(f"{name:<20}{verdict:<9}{goal.human().removeprefix('goal: ')}")
    for line in broken:
        print(f"FAILED {line}")
    unmet = sum(not g.met for _, g in everything)
    sizes = " (quick sizes)" if args.quick else ""
    print(f"{len(everything) - unmet} of {len(everything)} goals met{sizes}")
    return 0 if unmet == 0 and not broken else 1


if __name__ == "__main__":
    sys.exit(main())
