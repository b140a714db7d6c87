"""Does the live view slow acquisition? Ratios measured in one run against the simulated meter.

The simulated meter runs in its own process (``acquire sim``), as a bench meter would be its own
box, and the sweep runs as ``acquire sweep --reference ... --uncertainty`` (and the demo) runs
it: points corrected with an open/short reference set, each point's expanded uncertainty and
flags evaluated as it arrives, streamed into an SQLite store, with or without the live view
(showing ± U) redrawing on its timer thread into a terminal-sized console (written to the null
device).

Goals: with 5 ms per point, a 401-point sweep with the live view takes at most 5 %
longer than without; with 0 ms per point, throughput with the live view stays at or above 1,000
points per second; one frame of the live view of a 100,001-point sweep (the view's renderable
printed by a rich console 120 x 50 into memory, best of several, once the view has caught up with
the points) takes at most 5 ms, the cost growing with the plot's width, not the
points. Also printed: the frame of 401 points and the first frame of 100,001 points (the view
catching up with every point at once, as after a resize of the terminal).

Run: ``python benchmarks/bench_dashboard.py`` (about half a minute); ``--quick`` sweeps once
per case and times fewer frames (a look, not the goals' figures).
"""

from __future__ import annotations

import argparse
import io
import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from rich.console import Console

from acquire.compensation import ReferenceSet
from acquire.dashboard import DashboardView, LiveDashboard
from acquire.plan import log_plan
from acquire.store import open_store
from acquire.sweep import run_sweep
from acquire.sweep_state import SweepState
from acquire.sweep_uncertainty import PointUncertainty
from drivers.meter import ImpedanceMeter

sys.path.insert(0, str(Path(__file__).resolve().parent))
from goals import Goal, report  # noqa: E402

POINTS = 401
LONG = 100_001
FRAME_TARGET_MS = 5.0
REPEATS = 3


def start_simulator() -> tuple[subprocess.Popen, str]:
    proc = subprocess.Popen(
        [sys.executable, "-m", "acquire", "sim", "--profile", "demo-coil", "--port", "0",
         "--measure-time", "0", "--quiet"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
    )  # fmt: skip
    resource = proc.stdout.readline().strip()
    if not resource.startswith("TCPIP"):
        proc.kill()
        raise SystemExit(f"simulator did not start: {resource} {proc.stderr.read()}")
    return proc, resource


def terminal() -> Console:
    return Console(
        file=open(os.devnull, "w", encoding="utf-8"), force_terminal=True, width=160, height=50
    )


def references(meter) -> ReferenceSet:
    """Open and short read on the simulated fixture (three times each), then the coil put back."""
    f = log_plan("100Hz", "10MHz", POINTS).frequencies
    readings = {}
    for standard in ("OPEN", "SHORT"):
        meter.session.write(f"SIMulate:DUT {standard}")
        readings[standard] = np.mean([meter.sweep(f) for _ in range(3)], axis=0)
    meter.session.write("SIMulate:DUT demo-coil")
    return ReferenceSet(frequency=f, open=readings["OPEN"], short=readings["SHORT"], repeats=3)


def one_sweep(meter, store, live: bool, refs: ReferenceSet) -> float:
    plan = log_plan("100Hz", "10MHz", POINTS)
    state = SweepState(
        plan, dut="demo-coil", meter="simulated", quantities=("Ls", "Rs", "Q"),
        corrected_too=True, show_uncertainty=True,
    )  # fmt: skip
    writer = store.begin_sweep(dut="demo-coil", settings={"benchmark": True})
    began = time.perf_counter()
    if live:
        with LiveDashboard(state, terminal(), rate=4.0) as view:
            outcome = run_sweep(
                meter, plan, refs, writer=writer, state=state, on_progress=view.update
            )
    else:
        outcome = run_sweep(meter, plan, refs, writer=writer, state=state)
    elapsed = time.perf_counter() - began
    assert outcome.status == "complete" and outcome.frequency.size == POINTS, (
        outcome.reason,
        outcome.store_problem,
    )
    assert outcome.uncertainty is not None and np.isfinite(outcome.uncertainty).all()
    return elapsed


def compare(meter, store, per_point: float, refs: ReferenceSet) -> tuple[float, float]:
    meter.session.write(f"SIMulate:TIME {per_point}")
    one_sweep(meter, store, False, refs)  # warm up both paths
    one_sweep(meter, store, True, refs)
    plain, live = [], []
    for _ in range(REPEATS):
        plain.append(one_sweep(meter, store, False, refs))
        live.append(one_sweep(meter, store, True, refs))
    return statistics.median(plain), statistics.median(live)


def long_state(points: int) -> SweepState:
    """A state as ``acquire sweep --reference ... --uncertainty`` fills it, ``points`` long."""
    from drivers.dialect_file import load_dialect

    plan = log_plan("100Hz", "10MHz", points)
    state = SweepState(plan, dut="demo-coil", corrected_too=True, show_uncertainty=True)
    f = plan.frequencies
    w = 2 * np.pi * f
    z = 1 / (1 / (4.8 + 1j * w * 340e-6) + 1j * w * 1.5e-12)
    values = PointUncertainty(load_dialect("simulated").accuracy).evaluate(f, z)
    state.start()
    state.add(f, z, z, values)
    return state


def frame_cost(state: SweepState, console: Console, repeats: int) -> float:
    """Best time of one frame: the view's renderable printed by ``console``."""
    view = DashboardView(state)
    times = []
    for _ in range(repeats):
        if isinstance(console.file, io.StringIO):
            console.file.seek(0)
            console.file.truncate()
        began = time.perf_counter()
        console.print(view)
        times.append(time.perf_counter() - began)
    return min(times)


def memory_console() -> Console:
    return Console(file=io.StringIO(), width=120, height=50, force_terminal=True)


def long_frames(repeats: int) -> tuple[float, float]:
    """The first frame of a 100,001-point state (catching up with every point) and the best
    of ``repeats`` frames once the view has kept up."""
    state = long_state(LONG)
    console = memory_console()
    began = time.perf_counter()
    console.print(DashboardView(state))
    first = time.perf_counter() - began
    return first, frame_cost(state, console, repeats)


def main() -> int:
    global REPEATS
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="one sweep per case, fewer frames")
    args = parser.parse_args()
    if args.quick:
        REPEATS = 1
    frames = 5 if args.quick else 30
    proc, resource = start_simulator()
    try:
        with (
            tempfile.TemporaryDirectory() as tmp,
            ImpedanceMeter.open(resource, dialect="simulated") as meter,
        ):
            meter.session.write("SIMulate:TIME 0")
            refs = references(meter)
            # a store per case: the store's pool runs out after about 15 sweeps in one process
            with open_store(f"sqlite:///{Path(tmp) / 'slow.db'}") as store:
                slow_plain, slow_live = compare(meter, store, 0.005, refs)
            with open_store(f"sqlite:///{Path(tmp) / 'fast.db'}") as store:
                fast_plain, fast_live = compare(meter, store, 0.0, refs)
    finally:
        proc.terminate()
        proc.wait(timeout=10)
    short = frame_cost(long_state(POINTS), memory_console(), frames)
    first, frame = long_frames(frames)
    slow_ratio = slow_live / slow_plain
    fast_rate = POINTS / fast_live
    quick = " (--quick: a look)" if args.quick else ""
    print(
        f"live view benchmark: {POINTS}-point log sweep, median of {REPEATS}, "
        f"simulator in its own process{quick}"
    )
    print(f"{'case':<34}{'no view':>12}{'live view':>12}{'ratio':>9}")
    print(f"{'5 ms per point (s)':<34}{slow_plain:>12.3f}{slow_live:>12.3f}{slow_ratio:>9.3f}")
    print(
        f"{'0 ms per point (s)':<34}{fast_plain:>12.3f}{fast_live:>12.3f}"
        f"{fast_live / fast_plain:>9.3f}"
    )
    print(f"{'0 ms per point (points/s)':<34}{POINTS / fast_plain:>12.0f}{fast_rate:>12.0f}")
    print(f"one frame, 120x50, best of {frames}: {POINTS:,} points {short * 1e3:.2f} ms, "
          f"{LONG:,} points {frame * 1e3:.2f} ms (the first frame of {LONG:,}, catching up "
          f"with every point at once: {first * 1e3:.1f} ms)")  # fmt: skip
    goals = [
        report(Goal(f"live view, 5 ms per point, {POINTS} points{quick}", slow_ratio, 1.05, "x",
                    baseline="the same sweep without the view")),
        report(Goal(f"live view, 0 ms per point, {POINTS} points{quick}", fast_rate, 1000,
                    " points/s", better="higher")),
        report(Goal(f"live view, one frame at {LONG:,} points{quick}", frame * 1e3,
                    FRAME_TARGET_MS, " ms",
                    baseline=f"{short * 1e3:.2f} ms at {POINTS} points")),
    ]  # fmt: skip
    return 0 if all(g.met for g in goals) else 1


if __name__ == "__main__":
    sys.exit(main())
