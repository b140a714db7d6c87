"""The driver's own cost per point, against a bare pyvisa loop, with a server that answers at once.

The simulated meter's own work (parsing, physics, noise) would hide what the driver adds, so
here the peer is a tiny SCPI responder in a child process: it reads each line, answers every
query in it with a canned reply (``*IDN?``, ``SYST:ERR?`` with ``+0,"No error"``, ``READ?``
with one R,X pair, ``*OPC?`` with ``1``) joined by ``;``, and says nothing to plain commands.
Both clients use pyvisa-py on ``TCPIP::127.0.0.1::PORT::SOCKET`` with ``\\n`` terminations and
Nagle's algorithm off (through :func:`drivers.rawsocket.find`, as the driver does):

- baseline: a bare loop of ``query(...)`` per point with the very text the driver sends for a
  point (``FREQ f;READ?;*OPC?``), its two numbers parsed with ``float``;
- driver: ``ImpedanceMeter.sweep(f, mode="points")`` with the ``simulated`` dialect, as
  ``acquire sweep`` runs a point-by-point sweep (error queue read once after the sweep).

Goal: the client's time per point, the driver's at most 1.2x the bare loop's, measured as the
CPU time of the client's own thread (``time.thread_time`` around each side's loop, both sides
alike): unlike wall time it does not move with when the responder or a neighbour gets one of
the shared machine's cores (wall-time ratios of the same code ranged from 0.9x to 2x). The wall
time is printed beside it. The two run interleaved in many short sweeps of 200 points (which
goes first turns each round); the best of each side counts, with the median and each round's
spread printed beside it. A separate, untimed pass counts ``select`` calls and socket calls per
point on each side (the wrapped functions would slow the timed runs).

    python benchmarks/bench_driver.py            # 60 interleaved rounds of 200 points
    python benchmarks/bench_driver.py --quick    # 15 rounds (a few seconds)
"""

from __future__ import annotations

import argparse
import select
import socket
import subprocess
import sys
import time
from collections import Counter
from collections.abc import Callable, Iterator
from contextlib import contextmanager
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))

import numpy as np  # noqa: E402
import pyvisa  # noqa: E402
from goals import Goal, report  # noqa: E402

from drivers import rawsocket  # noqa: E402
from drivers.meter import ImpedanceMeter  # noqa: E402

FMIN, FMAX = 10.0, 30e6
READING = "1.25E+01,6.2831853E+02"
IDENTITY = "Bench Responder,Instant,0,1.0"

RESPONDER = r"""
import socket, sys
READING, IDENTITY = sys.argv[1], sys.argv[2]
CANNED = {"READ?": READING, "*OPC?": "1", "*IDN?": IDENTITY, "SYST:ERR?": '+0,"No error"'}
server = socket.create_server(("127.0.0.1", 0))
print(server.getsockname()[1], flush=True)
while True:
    conn, _ = server.accept()
    conn.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
    buffer = b""
    while True:
        data = conn.recv(65536)
        if not data:
            break
        buffer += data
        *lines, buffer = buffer.split(b"\n")
        out = []
        for line in lines:
            parts = line.decode().split(";")
            replies = [CANNED.get(p.strip().upper(), "0") for p in parts if p.strip().endswith("?")]
            if replies:
                out.append(";".join(replies) + "\n")
        if out:
            conn.sendall("".join(out).encode())
    conn.close()
"""


def start_responder() -> tuple[subprocess.Popen, str]:
    process = subprocess.Popen(
        [sys.executable, "-c", RESPONDER, READING, IDENTITY],
        stdout=subprocess.PIPE,
        text=True,
    )
    port = process.stdout.readline().strip()  # type: ignore[union-attr]
    if not port.isdigit():
        process.kill()
        raise SystemExit(f"the responder did not start (said {port!r})")
    return process, f"TCPIP::127.0.0.1::{port}::SOCKET"


def bare(resource: str, f: np.ndarray) -> tuple[float, float]:
    """One combined query per point, the driver's text, the two numbers parsed."""
    rm = pyvisa.ResourceManager("@py")
    r = rm.open_resource(resource, read_termination="\n", write_termination="\n", timeout=5000)
    assert rawsocket.find(r) is not None
    texts = [f"FREQ {fi!r};READ?;*OPC?" for fi in f.tolist()]
    texts[0] = "FREQ:MODE FIX;" + texts[0]
    out = np.empty(2 * f.size)
    start, cpu = time.perf_counter(), time.thread_time()
    for i, text in enumerate(texts):
        reading, done = r.query(text).split(";")
        a, b = reading.split(",")
        out[2 * i] = float(a)
        out[2 * i + 1] = float(b)
        if done != "1":
            raise SystemExit(f"unexpected reply {done!r}")
    elapsed, cpu = time.perf_counter() - start, time.thread_time() - cpu
    r.close()
    assert np.all(out[0::2] == 12.5)
    return elapsed, cpu


def driver(resource: str, f: np.ndarray) -> tuple[float, float]:
    """``sweep(mode="points")`` as the user's point-by-point sweep runs it."""
    with ImpedanceMeter.open(resource, dialect="simulated") as meter:
        start, cpu = time.perf_counter(), time.thread_time()
        z = meter.sweep(f, mode="points")
        elapsed, cpu = time.perf_counter() - start, time.thread_time() - cpu
    assert z.shape == f.shape and np.all(z.real == 12.5)
    return elapsed, cpu


@contextmanager
def counting() -> Iterator[Counter]:
    """Count ``select.select`` calls and the socket methods pyvisa-py and the driver use."""
    counts: Counter = Counter()
    real_select = select.select
    real_socket = socket.socket

    def counted_select(*args, **kwargs):
        counts["select"] += 1
        return real_select(*args, **kwargs)

    class CountedSocket(real_socket):  # type: ignore[misc,valid-type]
        def send(self, *a, **k):
            counts["send"] += 1
            return super().send(*a, **k)

        def sendall(self, *a, **k):
            counts["send"] += 1
            return super().sendall(*a, **k)

        def recv(self, *a, **k):
            counts["recv"] += 1
            return super().recv(*a, **k)

    select.select = counted_select
    socket.socket = CountedSocket  # type: ignore[misc]
    try:
        yield counts
    finally:
        select.select = real_select
        socket.socket = real_socket  # type: ignore[misc]


def calls_per_point(run: Callable[[str, np.ndarray], tuple], resource: str, f: np.ndarray) -> str:
    with counting() as counts:
        run(resource, f[:2])  # opening, setup and the sweep's error-queue check
        fixed = Counter(counts)
        counts.clear()
        run(resource, f)
    per = {k: (counts[k] - fixed[k]) / (f.size - 2) for k in ("select", "send", "recv")}
    return "  ".join(f"{k} {v:.2f}" for k, v in per.items())


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer points and rounds")
    args = parser.parse_args()
    n, rounds = (200, 15) if args.quick else (200, 60)
    f = np.geomspace(FMIN, FMAX, n)
    process, resource = start_responder()
    try:
        driver(resource, f[:20])  # warm up imports and the dialect cache
        times = np.empty((rounds, 2, 2))  # round, side (bare, driver), (wall, CPU)
        for k in range(rounds):
            sides = ((0, bare), (1, driver)) if k % 2 == 0 else ((1, driver), (0, bare))
            for side, run in sides:
                times[k, side] = run(resource, f)
        per_point = 1e6 * times / n
        best, median = per_point.min(axis=0), np.median(per_point, axis=0)
        print(f"responder at {resource}; {n} points, {rounds} interleaved rounds\n")
        print(f"{'client':<38} {'us/point: wall':>14} {'CPU':>6}  (best; median)"
              "   calls per point (untimed pass)")  # fmt: skip
        for side, name, run in (
            (0, "bare pyvisa, one combined query/point", bare),
            (1, "driver, sweep(mode='points')", driver),
        ):
            print(
                f"{name:<38} {best[side, 0]:>14.1f} {best[side, 1]:>6.1f}  "
                f"({median[side, 0]:.1f}; {median[side, 1]:.1f})   "
                f"{calls_per_point(run, resource, f)}"
            )
        each = per_point[:, 1] / per_point[:, 0]  # each round's ratios, (wall, CPU)
        for j, what in ((1, "client CPU time"), (0, "wall time")):
            q1, q3 = np.percentile(each[:, j], [25, 75])
            print(
                f"driver vs bare, {what:<15}: best {best[1, j] / best[0, j]:.2f}x, "
                f"median {median[1, j] / median[0, j]:.2f}x; each round {q1:.2f}x to {q3:.2f}x "
                f"(middle half), {each[:, j].min():.2f}x to {each[:, j].max():.2f}x (all)"
            )
        print()
        report(
            Goal(
                what="driver's client time per point (points mode, server answering at once)",
                figure=best[1, 1] / best[0, 1],
                target=1.2,
                unit="x",
                baseline="a bare pyvisa combined-query loop (the client thread's CPU time)",
            )
        )
    finally:
        process.kill()
        process.wait(10)
    return 0


if __name__ == "__main__":
    sys.exit(main())
