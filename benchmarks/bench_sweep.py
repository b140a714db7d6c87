"""Sweep speed and memory of the generic driver against the simulated meter, as ratios.

Runs the simulated meter in a child process (``acquire sim --port 0``) and talks to it over
pyvisa-py on a real loopback socket, with the simulated measurement time set to 0 unless said
otherwise. Cases, all at log-spaced frequencies from 10 Hz to 30 MHz:

(a) a naive loop: ``write("FREQ f")`` then ``query("READ?")`` per point (pays the TCP
    delayed-ACK stall; timed on a few points only, it is that slow);
(b) a bare pyvisa loop of one combined query ``FREQ f;READ?`` per point;
(c) the driver point by point (``sweep(mode="points")``);
(d) the driver's list sweep in ASCII; (e) in binary (IEEE 754 float64 blocks);
(f) the path ``acquire sweep --reference ...`` takes (:func:`acquire.sweep.run_sweep`): blocks
    sized as it sizes them, each chunk corrected with an open/short reference set, without the
    per-point uncertainty; (g) the same with each point's expanded uncertainty and flags, as the
    command now runs it.

Goals: (c) at least 0.7x the rate of (b); (d) at least 20x (c); (g) at least 0.7x (f) (the
uncertainty may cost at most 30 % of the rate with a meter that takes no time per point); with
5 ms per point simulated, the list sweep within 2 % of points x 5 ms; a 100,001-point sweep (in
a process of its own) under 200 MB peak memory. (b) and (c) run interleaved five times, (d), (e),
(f) and (g) five times; the best of each counts (the machine may be busy with other work). The
goals are for the full run; --quick only shows the shape.

    python benchmarks/bench_sweep.py            # one full list (drivers.simulator.LIST_MAX)
    python benchmarks/bench_sweep.py --quick    # fewer points, a few seconds
"""

from __future__ import annotations

import argparse
import json
import subprocess
import sys
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import pyvisa  # noqa: E402

from drivers.meter import ImpedanceMeter  # noqa: E402
from drivers.simulator import LIST_MAX  # noqa: E402

FMIN, FMAX = 10.0, 30e6


def start_simulator() -> tuple[subprocess.Popen, str]:
    process = subprocess.Popen(
        [sys.executable, "-m", "acquire", "sim", "--port", "0", "--profile", "air-core-coil"],
        cwd=ROOT,
        stdout=subprocess.PIPE,
        stderr=subprocess.DEVNULL,
        text=True,
    )
    line = process.stdout.readline().strip()
    if not line.endswith("::SOCKET"):
        process.kill()
        raise SystemExit(f"the simulated meter did not start (said {line!r})")
    return process, line


def raw_resource(resource: str):
    rm = pyvisa.ResourceManager("@py")
    r = rm.open_resource(resource, read_termination="\n", write_termination="\n", timeout=60000)
    return rm, r


def set_time(resource: str, seconds: float) -> None:
    rm, r = raw_resource(resource)
    r.write(f"SIM:TIME {seconds!r}")
    assert r.query("SYST:ERR?").startswith("0")
    r.close()
    rm.close()


def check_no_errors(r) -> None:
    """The loop's commands were all accepted (a refused FREQ would time the wrong thing)."""
    reply = r.query("SYST:ERR?")
    if not reply.startswith("0"):
        raise SystemExit(f"the meter refused a benchmark command: {reply}")


def naive(resource: str, f: np.ndarray) -> float:
    rm, r = raw_resource(resource)
    start = time.perf_counter()
    for fi in f.tolist():
        r.write(f"FREQ {fi!r}")
        r.query("READ?")
    elapsed = time.perf_counter() - start
    check_no_errors(r)
    r.close()
    rm.close()
    return elapsed


def bare(resource: str, f: np.ndarray) -> float:
    rm, r = raw_resource(resource)
    start = time.perf_counter()
    for fi in f.tolist():
        r.query(f"FREQ {fi!r};READ?")
    elapsed = time.perf_counter() - start
    check_no_errors(r)
    r.close()
    rm.close()
    return elapsed


def driver(resource: str, f: np.ndarray, mode: str, transfer: str = "ascii") -> float:
    with ImpedanceMeter.open(resource) as meter:
        meter.configure(transfer=transfer)
        start = time.perf_counter()
        z = meter.sweep(f, mode=mode)
        elapsed = time.perf_counter() - start
        meter.configure(transfer="ascii")
    assert z.shape == f.shape and np.all(np.isfinite(z))
    return elapsed


def command_path(resource: str, f: np.ndarray, uncertainty: bool) -> float:
    """(f)/(g): run_sweep as the sweep command runs it, with an open/short reference set."""
    from acquire.compensation import ReferenceSet
    from acquire.plan import list_plan
    from acquire.sweep import run_sweep

    with ImpedanceMeter.open(resource) as meter:
        readings = {}
        for standard in ("OPEN", "SHORT"):
            meter.session.write(f"SIMulate:DUT {standard}")
            readings[standard] = meter.sweep(f)
        meter.session.write("SIMulate:DUT air-core-coil")
        refs = ReferenceSet(frequency=f, open=readings["OPEN"], short=readings["SHORT"])
        plan = list_plan(", ".join(repr(float(x)) for x in f))
        start = time.perf_counter()
        outcome = run_sweep(meter, plan, refs, uncertainty="auto" if uncertainty else None)
        elapsed = time.perf_counter() - start
    assert outcome.status == "complete" and outcome.frequency.size == f.size
    assert (outcome.uncertainty is not None) == uncertainty
    return elapsed


def memory_child(resource: str, points: int) -> dict:
    """Run a long sweep in a fresh interpreter; it reports its own peak memory."""
    code = f"""
import json, resource, sys, time, tracemalloc
sys.path.insert(0, {str(ROOT)!r})
import numpy as np
from drivers.meter import ImpedanceMeter
f = np.geomspace({FMIN!r}, {FMAX!r}, {points})
seen = [0]
def on_points(fc, zc):
    seen[0] += fc.size
with ImpedanceMeter.open({resource!r}) as meter:
    before = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
    tracemalloc.start()
    start = time.perf_counter()
    z = meter.sweep(f, on_points=on_points)
    elapsed = time.perf_counter() - start
    traced = tracemalloc.get_traced_memory()[1]
    tracemalloc.stop()
assert seen[0] == {points} and z.size == {points} and np.all(np.isfinite(z))
peak = resource.getrusage(resource.RUSAGE_SELF).ru_maxrss
print(json.dumps(dict(seconds=elapsed, peak_mb=peak / 1024, before_mb=before / 1024,
                      traced_mb=traced / 2**20)))
"""
    out = subprocess.run([sys.executable, "-c", code], capture_output=True, text=True, check=True)
    return json.loads(out.stdout.strip().splitlines()[-1])


def row(name: str, points: int, seconds: float, base_rate: float) -> str:
    rate = points / seconds
    return f"{name:<44} {points:>7} {seconds:>9.3f} {rate:>11.0f} {rate / base_rate:>9.2f}x"


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer points (a few seconds)")
    args = parser.parse_args()
    n = 201 if args.quick else LIST_MAX
    n_naive = 10 if args.quick else 40
    n_memory = 20001 if args.quick else 100001
    f = np.geomspace(FMIN, FMAX, n)

    process, resource = start_simulator()
    try:
        set_time(resource, 0.0)
        print(f"simulated meter at {resource}; measurement time 0; {n} points\n")
        t_a = naive(resource, f[:: max(1, n // n_naive)][:n_naive])
        bests = {"b": np.inf, "c": np.inf}
        for _ in range(5):
            bests["b"] = min(bests["b"], bare(resource, f))
            bests["c"] = min(bests["c"], driver(resource, f, "points"))
        t_d = min(driver(resource, f, "list") for _ in range(5))
        t_e = min(driver(resource, f, "list", "binary") for _ in range(5))
        base = n / bests["b"]
        print(f"{'case':<44} {'points':>7} {'seconds':>9} {'points/s':>11} {'vs (b)':>10}")
        print(row("(a) naive write() then query() per point", n_naive, t_a, base))
        print(row("(b) bare pyvisa, one combined query/point", n, bests["b"], base))
        print(row("(c) driver, point by point", n, bests["c"], base))
        print(row("(d) driver, list sweep, ASCII", n, t_d, base))
        print(row("(e) driver, list sweep, binary", n, t_e, base))
        c_over_b = bests["b"] / bests["c"]
        d_over_c = bests["c"] / t_d
        if args.quick:
            print("\n(--quick: too few points for the goals, which are for the full run)")
        print(f"\n(c)/(b) = {c_over_b:.2f}  (goal >= 0.7)  {'ok' if c_over_b >= 0.7 else 'MISSED'}")
        print(f"(d)/(c) = {d_over_c:.1f}  (goal >= 20)   {'ok' if d_over_c >= 20 else 'MISSED'}")
        print(f"(e)/(d) = {t_d / t_e:.2f}")

        t_f = min(command_path(resource, f, False) for _ in range(5))
        t_g = min(command_path(resource, f, True) for _ in range(5))
        print(f"\n{'case':<44} {'points':>7} {'seconds':>9} {'points/s':>11} {'vs (b)':>10}")
        print(row("(f) run_sweep, corrected, no uncertainty", n, t_f, base))
        print(row("(g) run_sweep, corrected, with uncertainty", n, t_g, base))
        g_over_f = t_f / t_g
        print(f"(g)/(f) = {g_over_f:.2f}  (goal >= 0.7)  {'ok' if g_over_f >= 0.7 else 'MISSED'}")

        per_point = 0.005
        set_time(resource, per_point)
        ideal = n * per_point
        t_list = driver(resource, f, "list")
        off = (t_list / ideal - 1) * 100
        print(
            f"\nwith {per_point * 1e3:g} ms per point simulated, {n} points (ideal {ideal:.3f} s):"
        )
        print(f"  list sweep      {t_list:8.3f} s  {off:+6.2f} %  (goal within 2 %)")
        if args.quick:
            t_points = driver(resource, f, "points")
            off = (t_points / ideal - 1) * 100
            print(f"  point by point  {t_points:8.3f} s  {off:+6.2f} %  (for comparison)")
        else:
            sub = f[::8]
            t_points = driver(resource, sub, "points")
            off = (t_points / (sub.size * per_point) - 1) * 100
            print(
                f"  point by point  {t_points:8.3f} s  {off:+6.2f} %  "
                f"({sub.size} points, for comparison)"
            )
        set_time(resource, 0.0)

        mem = memory_child(resource, n_memory)
        print(
            f"\n{n_memory}-point list sweep in its own process: {mem['seconds']:.2f} s, "
            f"peak RSS {mem['peak_mb']:.0f} MB (goal < 200 MB; {mem['before_mb']:.0f} MB "
            f"before the sweep), Python allocations peak {mem['traced_mb']:.1f} MB"
        )
    finally:
        process.terminate()
        process.wait(10)
    return 0


if __name__ == "__main__":
    sys.exit(main())
