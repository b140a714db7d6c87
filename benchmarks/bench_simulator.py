"""How fast is the simulated meter? Ratios against baselines measured in the same run.

- A query's round trip (``*IDN?``) against a bare asyncio line-echo server on loopback: the cost
  of the SCPI machinery over the socket itself.
- A 1,601-point list sweep (``READ?`` with ``SIMulate:TIME 0``), ASCII and binary, against
  computing the same impedances directly with the simulator's physics (no socket, no noise).
- A second client's round trip while the first client's measurement is running, against the
  same round trip with the meter idle: the measurement must not block other clients (ratio ~1).

Goal: the second client's round trip within 1.5x the idle one (the simulator serves its
clients while measuring, as a meter with a separate interface processor does). The other rows
are shown for reference.

Run: ``python benchmarks/bench_simulator.py`` (a few seconds; ``--quick`` fewer repeats).
"""

from __future__ import annotations

import asyncio
import socket
import statistics
import threading
import time

import numpy as np
import pyvisa
from goals import Goal, report

from drivers.simulator import LIST_MAX, running

REPEATS = 200


def median_time(fn, repeats: int = REPEATS) -> float:
    runs = []
    for _ in range(repeats):
        began = time.perf_counter()
        fn()
        runs.append(time.perf_counter() - began)
    return statistics.median(runs)


def echo_server() -> tuple[int, asyncio.AbstractEventLoop]:
    """A bare line-echo server on a background thread; returns its port and loop."""
    loop = asyncio.new_event_loop()
    ready = threading.Event()
    port: list[int] = []

    async def handle(reader, writer):
        writer.get_extra_info("socket").setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        while line := await reader.readline():
            writer.write(line)
            await writer.drain()
        writer.close()

    def main():
        asyncio.set_event_loop(loop)
        server = loop.run_until_complete(asyncio.start_server(handle, "127.0.0.1", 0))
        port.append(server.sockets[0].getsockname()[1])
        ready.set()
        loop.run_forever()

    threading.Thread(target=main, daemon=True).start()
    ready.wait(10)
    return port[0], loop


def main() -> int:
    import argparse

    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer repeats, a fast look")
    parser.parse_args()
    rm = pyvisa.ResourceManager("@py")
    rows = []
    port, loop = echo_server()
    echo = rm.open_resource(
        f"TCPIP0::127.0.0.1::{port}::SOCKET", read_termination="\n", write_termination="\n"
    )
    echo_rtt = median_time(lambda: echo.query("*IDN?"))
    rows.append(("bare echo server round trip", echo_rtt, 1.0))
    with running(dut="demo-coil", fixture="bench-leads", measure_time=0) as sim:
        meter = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
        meter.timeout = 20000
        idn = median_time(lambda: meter.query("*IDN?"))
        rows.append(("simulator *IDN? round trip", idn, idn / echo_rtt))

        n = LIST_MAX  # one full list of the simulated meter
        f = np.geomspace(10, 30e6, n)
        direct = median_time(lambda: sim.seen_impedance(f), 50)
        meter.query(f"LIST:FREQ:LOG 10,30e6,{n};FREQ:MODE LIST;FORM ASC;*OPC?")
        ascii_sweep = median_time(lambda: meter.query("READ?"), 20)
        meter.query("FORM REAL;*OPC?")
        binary = median_time(
            lambda: meter.query_binary_values("READ?", datatype="d", is_big_endian=True), 20
        )
        rows.append((f"physics only, {n} points", direct, 1.0))
        rows.append((f"READ? {n} points, ASCII", ascii_sweep, ascii_sweep / direct))
        rows.append((f"READ? {n} points, REAL,64", binary, binary / direct))

        other = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
        idle = median_time(lambda: other.query("*IDN?"), 50)
        meter.query("SIM:TIME 0.5;FREQ:MODE FIX;FORM ASC;*OPC?")
        meter.write("READ?")
        busy = median_time(lambda: other.query("*IDN?"), 50)
        meter.read()
        rows.append(("2nd client round trip, meter idle", idle, 1.0))
        rows.append(("2nd client round trip, 1st measuring", busy, busy / idle))
    echo.close()
    rm.close()
    time.sleep(0.1)
    loop.call_soon_threadsafe(loop.stop)
    print("simulated meter timings (median), ratio against the row's baseline")
    print(f"{'what':<40}{'seconds':>12}{'ratio':>10}")
    for label, seconds, ratio in rows:
        print(f"{label:<40}{seconds:>12.6f}{ratio:>10.2f}")
    report(
        Goal(
            "second client's round trip while the first measures", busy / idle, 1.5, "x",
            baseline="the same round trip with the meter idle",
        )
    )  # fmt: skip
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
