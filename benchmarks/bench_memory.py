"""Peak memory of the `acquire sweep` process over a long sweep, with the live view on.

The simulated meter runs in its own process (``acquire sim --port 0``, measurement time 0) and
the sweep runs exactly as a user types it, ``acquire sweep --resource ... --points N`` into a
fresh SQLite store, as a child process on a pseudo-terminal so the live view is drawn (its
output is read and thrown away). The figure is that child's own peak resident set size
(``ru_maxrss`` from ``os.wait4``), not a helper process that imports part of the tool. For
context the same is measured for ``python -c "import numpy, pyvisa, sqlalchemy, rich"``: the
libraries the command cannot do without.

The goal's figure is the first sweep, into a new store (made from the frozen script of the
newest layout, acquire/store/new_sqlite.py, with sqlite3 alone); the same sweep into the store
that then exists (the plain-sqlite3 path) is printed beside it.

Goal: at most 100 MB over 100,001 points. ``--quick`` sweeps 20,001 points and says so; its
figure is a look, not the goal's.

    python benchmarks/bench_memory.py            # 100,001 points, about half a minute
    python benchmarks/bench_memory.py --quick    # 20,001 points
"""

from __future__ import annotations

import argparse
import os
import pty
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT / "benchmarks"))

from goals import Goal, report  # noqa: E402

TARGET_MB = 100.0
BASELINE = "import numpy, pyvisa, sqlalchemy, rich"


def start_simulator() -> tuple[subprocess.Popen, str]:
    proc = subprocess.Popen(
        [sys.executable, "-m", "acquire", "sim", "--profile", "demo-coil", "--port", "0",
         "--measure-time", "0", "--quiet"],
        cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )  # fmt: skip
    resource = proc.stdout.readline().strip()
    if not resource.startswith("TCPIP"):
        proc.kill()
        raise SystemExit(f"simulator did not start: {resource} {proc.stderr.read()}")
    return proc, resource


def peak_rss_mb(argv: list[str], terminal: bool) -> tuple[float, int, float, str]:
    """Run ``argv`` to its end; its peak RSS in MB, exit status, seconds and the output's tail.

    With ``terminal`` the child's stdout and stderr are a pseudo-terminal 160 x 50 cells (so the
    live view draws), drained on a thread so the child never blocks on a full buffer.
    """
    env = dict(os.environ, COLUMNS="160", LINES="50", PYTHONPATH=str(ROOT))
    tail = bytearray()
    if terminal:
        master, slave = pty.openpty()
        out, err = slave, slave
    else:
        master, slave = -1, -1
        out, err = subprocess.PIPE, subprocess.STDOUT
    began = time.perf_counter()
    proc = subprocess.Popen(argv, cwd=ROOT, env=env, stdin=subprocess.DEVNULL, stdout=out,
                            stderr=err)  # fmt: skip

    def drain() -> None:
        while True:
            try:
                chunk = os.read(master, 65536) if terminal else proc.stdout.read1(65536)
            except OSError:  # the pty closes when the child ends
                return
            if not chunk:
                return
            tail.extend(chunk)
            del tail[:-4000]

    if terminal:
        os.close(slave)
    reader = threading.Thread(target=drain, daemon=True)
    reader.start()
    _, status, usage = os.wait4(proc.pid, 0)
    seconds = time.perf_counter() - began
    proc.returncode = os.waitstatus_to_exitcode(status)
    reader.join(timeout=5)
    if terminal:
        os.close(master)
    return usage.ru_maxrss / 1024, proc.returncode, seconds, tail.decode("utf-8", "replace")


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="20,001 points (a look)")
    parser.add_argument("--points", type=int, help="points of the sweep (default 100,001)")
    args = parser.parse_args()
    points = args.points or (20_001 if args.quick else 100_001)

    base_mb, rc, _, text = peak_rss_mb([sys.executable, "-c", BASELINE], terminal=False)
    if rc != 0:
        raise SystemExit(f"the baseline failed: {text}")
    proc, resource = start_simulator()
    try:
        with tempfile.TemporaryDirectory() as tmp:
            argv = [
                sys.executable, "-m", "acquire", "sweep", "--resource", resource,
                "--store", f"sqlite:///{Path(tmp) / 'memory.db'}", "--dut", "bench coil",
                "--start", "100Hz", "--stop", "10MHz", "--points", str(points),
            ]  # fmt: skip
            sweep_mb, rc, seconds, text = peak_rss_mb(argv, terminal=True)
            # the same sweep again into the store that now exists: the plain-sqlite3 path
            again_mb, again_rc, _, again_text = peak_rss_mb(argv, terminal=True)
    finally:
        proc.terminate()
        proc.wait(timeout=10)
    if rc != 0 or "Sweep complete" not in text:
        raise SystemExit(f"the sweep failed (exit {rc}):\n{text[-2000:]}")
    quick = " (--quick: a look, not the goal's size)" if args.quick else ""
    label = f"{points:,}-point sweep{quick}"
    print("peak memory, `acquire sweep` with the live view on a 160x50 pseudo-terminal")
    print(f'  python -c "{BASELINE}": {base_mb:.1f} MB')
    print(f"  acquire sweep, {label}: {sweep_mb:.1f} MB ({seconds:.1f} s)")
    if again_rc == 0 and "Sweep complete" in again_text:
        print(f"  the same into the store that exists then (no SQLAlchemy): {again_mb:.1f} MB")
    goal = report(
        Goal(
            what=f"peak memory of `acquire sweep`, {points:,} points, live view on"
            + (" (quick)" if args.quick else ""),
            figure=sweep_mb,
            target=TARGET_MB,
            unit=" MB",
            baseline=f"{BASELINE}: {base_mb:.0f} MB",
        )
    )
    return 0 if goal.met else 1


if __name__ == "__main__":
    sys.exit(main())
