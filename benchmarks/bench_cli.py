"""How fast does `acquire --help` start? A ratio against `python -c "import numpy"`, one run.

Goal: `acquire --help` takes at most twice as long as importing numpy, so command
modules keep heavy imports (numpy, pandas, pyvisa, sqlalchemy, rich, scipy) inside ``run``.
Also printed: each subcommand's own ``--help``. Medians of several fresh interpreter starts.

Run: ``python benchmarks/bench_cli.py`` (a few seconds).
"""

from __future__ import annotations

import statistics
import subprocess
import sys
import time

REPEATS = 7


def timed(args: list[str]) -> float:
    runs = []
    for _ in range(REPEATS):
        began = time.perf_counter()
        subprocess.run([sys.executable, *args], check=True, capture_output=True)
        runs.append(time.perf_counter() - began)
    return statistics.median(runs)


def main() -> int:
    timed(["-c", "pass"])  # warm the file cache
    bare = timed(["-c", "pass"])
    numpy = timed(["-c", "import numpy"])
    rows = [("python -c pass", bare), ('python -c "import numpy"', numpy)]
    top = timed(["-m", "acquire", "--help"])
    rows.append(("acquire --help", top))
    for name in ("demo", "sweep", "reference"):
        rows.append((f"acquire {name} --help", timed(["-m", "acquire", name, "--help"])))
    print(f"start-up times, median of {REPEATS} fresh interpreters")
    print(f"{'command':<30}{'seconds':>10}{'x numpy':>10}")
    for label, seconds in rows:
        print(f"{label:<30}{seconds:>10.3f}{seconds / numpy:>10.2f}")
    ratio = top / numpy
    print(
        "goal: acquire --help at most 2x import numpy: "
        f"{'met' if ratio <= 2 else 'NOT met'} ({ratio:.2f}x)"
    )
    return 0 if ratio <= 2 else 1


if __name__ == "__main__":
    sys.exit(main())
