"""The sweep as ``acquire sweep`` runs it, against the simulated meter, and its store writes.

Goals (each printed with :func:`goals.report`):

(1) the real sweep path at 5 ms per point vs N x 5 ms: ``run_sweep`` called as
    ``acquire sweep --reference ...`` calls it (blocks sized automatically, the error queue read
    after every block, an open/short reference set with each point's uncertainty, the live view
    redrawing on its timer into a terminal-sized console written to the null device, through
    the same ``_harmless(view.update)`` progress call), without a store and with the sweep
    writer of the store as ``acquire sweep`` opens an SQLite file already at the newest
    revision (:mod:`acquire.store.sqlite_sweeps`, plain sqlite3). Figure: wall time /
    (N x 5 ms) - 1, in percent; goal at most 1 %.
    Beside it, the same blocks sent as bare pyvisa list queries (no driver, no correction, no
    store, no view): what the simulator's fixed cost per list query adds on its own, so the
    reader sees how much of the excess is the tool's.
(2) sweep points written vs bare ``executemany`` of the same rows with the same durability:
    the rows (as a sweep at 5 ms per point hands them to the store: a group every 0.25 s, about
    50 points) written by :class:`acquire.sweep_saving.PointSaver` through the sweep writer of
    the store ``acquire sweep`` opens on an existing store file (plain sqlite3), on a thread of
    their own, vs bare :mod:`sqlite3` ``executemany`` into the same table of a store file of
    the same layout and indexes in the same folder, with the store's own
    connection settings (WAL, ``synchronous=FULL``, foreign keys on), one ``BEGIN IMMEDIATE``
    ... ``COMMIT`` per group. Rows of the bare side are prepared outside the timing; the tool's
    time includes turning its arrays into rows. Tool and bare run interleaved group by group on
    one thread of their own (which side goes first turns with each group, so all meet the same
    moods of the shared disk), several rounds after a warm-up round; the best round total of
    each side counts, and each round's ratio and each side's thread CPU time are printed.

    *Same durability* means the same record on disk after every commit: the group's points and
    the sweep's row saying how many points it holds and when its writer last wrote (the
    heartbeat by which a sweep whose writer died is found, :mod:`acquire.store.abandoned`). So
    the goal's bare side updates the sweep's row in each group's transaction too; the ratio
    against bare writes of the points alone is printed beside it. Figure: tool rate / bare rate;
    goal at least 0.8. Information lines, not goals: the statements the store sends per group
    (counted with sqlite3's trace callback in a run of their own; the store sends a group's
    rows in one multi-row INSERT, the bare side steps its executemany once a row), and a
    scratch run of both
    sides with ``synchronous=OFF`` that shows the tool's own CPU time apart from the disk's
    waits.

The simulated meter runs in its own process (``acquire sim --port 0``). Each case runs several
times and the best counts (the machine is shared).

    python benchmarks/bench_sweep.py            # 1,601 points, 5 repeats (writes: 10 rounds)
    python benchmarks/bench_sweep.py --quick    # 401 points, 3 repeats (under a minute)
"""

from __future__ import annotations

import argparse
import os
import sqlite3
import subprocess
import sys
import tempfile
import threading
import time
from pathlib import Path

ROOT = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(ROOT))
sys.path.insert(0, str(Path(__file__).resolve().parent))

import numpy as np  # noqa: E402
import pyvisa  # noqa: E402
from goals import Goal, report  # noqa: E402

from acquire.commands.sweep import _harmless  # noqa: E402
from acquire.compensation import ReferenceSet  # noqa: E402
from acquire.dashboard import open_view  # noqa: E402
from acquire.display import text_console  # noqa: E402
from acquire.plan import log_plan  # noqa: E402
from acquire.store import open_store, sqlite_connection  # noqa: E402
from acquire.store.plain_values import utc_now  # noqa: E402
from acquire.store.sqlite_sweeps import PlainSweepStore, open_sweep_store  # noqa: E402
from acquire.store.sweep_batch import POINT_COLUMNS  # noqa: E402
from acquire.sweep import run_sweep  # noqa: E402
from acquire.sweep_saving import PointSaver  # noqa: E402
from acquire.sweep_setup import prepare_state, uncertainty_model  # noqa: E402
from acquire.sweep_state import SweepState  # noqa: E402
from acquire.sweep_uncertainty import PointUncertainty  # noqa: E402
from drivers.dialect_file import load_dialect  # noqa: E402
from drivers.meter import ImpedanceMeter  # noqa: E402
from drivers.settings import number_text  # noqa: E402

PER_POINT = 0.005
START, STOP = "100Hz", "10MHz"
#: Points in one store write at 5 ms per point (the sweep's flush interval is 0.25 s).
GROUP = 50


def start_simulator() -> tuple[subprocess.Popen, str]:
    process = subprocess.Popen(
        [sys.executable, "-m", "acquire", "sim", "--profile", "demo-coil", "--port", "0",
         "--measure-time", "0", "--quiet"],
        cwd=ROOT, stdout=subprocess.PIPE, stderr=subprocess.DEVNULL, text=True,
    )  # fmt: skip
    line = process.stdout.readline().strip()
    if not line.endswith("::SOCKET"):
        process.kill()
        raise SystemExit(f"the simulated meter did not start (said {line!r})")
    return process, line


def references(meter: ImpedanceMeter, n: int) -> ReferenceSet:
    """Open and short read three times each on the simulated fixture, then the coil put back."""
    f = log_plan(START, STOP, n).frequencies
    readings = {}
    for standard in ("OPEN", "SHORT"):
        meter.session.write(f"SIMulate:DUT {standard}")
        readings[standard] = np.mean([meter.sweep(f) for _ in range(3)], axis=0)
    meter.session.write("SIMulate:DUT demo-coil")
    return ReferenceSet(frequency=f, open=readings["OPEN"], short=readings["SHORT"], repeats=3)


class Recording:
    """The meter, with the frequencies of every ``sweep`` call (block) kept."""

    def __init__(self, meter: ImpedanceMeter) -> None:
        self._meter = meter
        self.blocks: list[np.ndarray] = []
        self.frequency_range = meter.frequency_range

    def sweep(self, frequencies, on_points=None):
        self.blocks.append(np.array(frequencies, dtype=float))
        return self._meter.sweep(frequencies, on_points=on_points)


def command_sweep(meter, store, refs: ReferenceSet, n: int) -> tuple[float, list[np.ndarray]]:
    """One sweep as ``acquire sweep --reference ID`` runs it; the wall time and its blocks."""
    plan = log_plan(START, STOP, n)
    state = prepare_state(plan, "simulated meter", refs, 1, "bench", "demo-coil", ("Ls", "Rs", "Q"))
    model = uncertainty_model(meter, state, False)
    writer = None
    if store is not None:
        writer = store.begin_sweep(dut="demo-coil", settings={"benchmark": True})
        state.destination = f"sweep {writer.id} in {store.url}"
    console = text_console(
        file=open(os.devnull, "w", encoding="utf-8"),  # noqa: SIM115 - closed below
        force_terminal=True,
        width=160,
        height=50,
    )
    recording = Recording(meter)
    began = time.perf_counter()
    with open_view(state, live=True, console=console) as view:
        outcome = run_sweep(
            recording, plan, refs, writer, state, on_progress=_harmless(view.update),
            uncertainty=model,
        )  # fmt: skip
    elapsed = time.perf_counter() - began
    console.file.close()
    assert outcome.status == "complete" and outcome.frequency.size == n, outcome.message()
    assert outcome.uncertainty is not None and np.isfinite(outcome.uncertainty).all()
    if store is not None:
        assert outcome.saved == n
    return elapsed, recording.blocks


def bare_blocks(resource: str, blocks: list[np.ndarray]) -> float:
    """The same blocks as bare pyvisa list queries (the dialect's list message, nothing else)."""
    rm = pyvisa.ResourceManager("@py")
    r = rm.open_resource(resource, read_termination="\n", write_termination="\n", timeout=60000)
    began = time.perf_counter()
    for part in blocks:
        freqs = ",".join(map(number_text, part))
        reply = r.query(f"FREQ:MODE LIST;LIST:FREQ {freqs};READ?;*OPC?")
        assert reply.count(",") == 2 * part.size - 1, reply[:80]
    elapsed = time.perf_counter() - began
    assert r.query("SYST:ERR?").startswith("0")
    r.close()  # not rm.close(): it would close the driver's session of the same library too
    return elapsed


def existing_store(path: Path) -> PlainSweepStore:
    """The store ``acquire sweep`` writes to when ``path`` holds one already: made the usual way
    first (as the first command does), then opened as the command opens it."""
    url = f"sqlite:///{path}"
    with open_store(url):
        pass
    store = open_sweep_store(url)
    assert isinstance(store, PlainSweepStore), store
    return store


def sweep_goal(resource: str, n: int, repeats: int, tmp: Path) -> None:
    with (
        existing_store(tmp / "sweeps.db") as store,
        ImpedanceMeter.open(resource, dialect="simulated") as meter,
    ):
        refs = references(meter, n)
        meter.session.write(f"SIMulate:TIME {PER_POINT}")
        command_sweep(meter, store, refs, min(n, 101))  # warm up every path
        best = {"none": np.inf, "sqlite": np.inf}
        blocks: list[np.ndarray] = []
        for _ in range(repeats):
            t, blocks = command_sweep(meter, None, refs, n)
            best["none"] = min(best["none"], t)
            t, _ = command_sweep(meter, store, refs, n)
            best["sqlite"] = min(best["sqlite"], t)
        bare = min(bare_blocks(resource, blocks) for _ in range(repeats))
        meter.session.write("SIMulate:TIME 0")
    ideal = n * PER_POINT
    sizes = [b.size for b in blocks]
    print(
        f"\n(1) {n} points at {PER_POINT * 1e3:g} ms each (ideal {ideal:.3f} s), "
        f"{len(blocks)} blocks of {min(sizes)} to {max(sizes)} points; best of {repeats}:"
    )
    excess = 100 * (bare / ideal - 1)
    print(f"  bare pyvisa list queries, same blocks {bare:8.3f} s  {excess:+6.2f} %"
          "  (the simulator's own fixed cost per query)")  # fmt: skip
    for key, name in (("none", "without store"), ("sqlite", "with SQLite")):
        t = best[key]
        print(f"  run_sweep + live view, {name:<14} {t:8.3f} s  {100 * (t / ideal - 1):+6.2f} %"
              f"  ({100 * (t / bare - 1):+.2f} % over the bare queries)")  # fmt: skip
    for key, name in (("none", "without store"), ("sqlite", "with SQLite")):
        report(
            Goal(
                what=f"the real sweep path (run_sweep, live view) at 5 ms/point, {name}",
                figure=100 * (best[key] / ideal - 1),
                target=1.0,
                unit=" %",
                baseline="N x 5 ms",
            )
        )
        report(
            Goal(
                what=f"the sweep path's own share at 5 ms/point, {name}",
                figure=100 * (best[key] / bare - 1),
                target=1.0,
                unit=" %",
                baseline="bare pyvisa list queries of the same blocks",
            )
        )


def filled_state(n: int) -> SweepState:
    """A state holding ``n`` corrected points with their uncertainty, as a sweep leaves it."""
    plan = log_plan(START, STOP, n)
    f = plan.frequencies
    w = 2 * np.pi * f
    z = 1 / (1 / (4.8 + 1j * w * 340e-6) + 1j * w * 1.5e-12)
    raw = z + (0.02 + 1j * w * 20e-9)
    model = PointUncertainty(load_dialect("simulated").accuracy)
    state = SweepState(plan, corrected_too=True)
    state.start()
    state.add(f, raw, z, model.evaluate(f, z))
    return state


class Connections:
    """Every connection the plain store opens, made as it makes them and then, for scratch runs,
    told ``synchronous=OFF``; ``counting`` also counts the statements each runs, by first words
    (the trace callback sees each row of an ``executemany`` as a statement of its own)."""

    def __init__(self, synchronous: str, counting: bool) -> None:
        self.kinds: dict[str, int] = {}
        self._synchronous = synchronous
        self._counting = counting
        self._connect = sqlite_connection.connect

    def __enter__(self) -> Connections:
        sqlite_connection.connect = self._made  # type: ignore[assignment]
        return self

    def __exit__(self, *exc) -> None:
        sqlite_connection.connect = self._connect  # type: ignore[assignment]

    def _made(self, path: Path) -> sqlite3.Connection:
        conn = self._connect(path)
        if self._synchronous == "OFF":
            conn.execute("PRAGMA synchronous = OFF")
        if self._counting:
            conn.set_trace_callback(self._seen)
        return conn

    def _seen(self, statement: str) -> None:
        words = " ".join(statement.split()[:3]).upper()
        self.kinds[words] = self.kinds.get(words, 0) + 1


def tool_writes(
    path: Path, state: SweepState, synchronous: str, counting: bool = False
) -> tuple[float, dict[str, int]]:
    """The saver's writes of every group, on a thread of their own, through the sweep writer of
    the store ``acquire sweep`` opens on the existing store file ``path``.

    With ``counting``, also the statements the store sent (not a timed round: the trace
    callback costs time of its own)."""
    n = state.count
    with (
        Connections(synchronous, counting) as connections,
        existing_store(path) as store,
    ):
        writer = store.begin_sweep(dut="bench", settings={"benchmark": True})
        saver = PointSaver(writer, state, True)
        elapsed = [0.0]
        connections.kinds.clear()

        def write_all() -> None:
            began = time.perf_counter()
            for end in range(GROUP, n + GROUP, GROUP):
                state.count = min(end, n)
                saver.write_waiting()
            elapsed[0] = time.perf_counter() - began

        try:
            thread = threading.Thread(target=write_all, name="sweep-saver")
            thread.start()
            thread.join()
        finally:
            state.count = n
        kinds = dict(connections.kinds)
        writer.finish("complete")
        assert writer.points == n
    return elapsed[0], kinds


def bare_rows(state: SweepState, sweep_id: int) -> list[tuple]:
    from acquire.uncertainty import expanded

    f, raw, cor = state.points()
    assert cor is not None
    u = expanded(state.cov[: state.count])
    columns = [f, raw.real, raw.imag, cor.real, cor.imag, u[:, 0], u[:, 1]]
    cells = [[None if np.isnan(v) else float(v) for v in c] for c in columns]
    flags = [str(x) for x in state.flags[: state.count]]
    return [(sweep_id, i, *values) for i, values in enumerate(zip(*cells, flags, strict=True))]


class BareWriter:
    """Bare sqlite3 into a new store file of the same layout: the same rows in the same groups,
    one ``BEGIN IMMEDIATE`` ... ``COMMIT`` each, with the store's own connection settings (WAL,
    ``synchronous``, foreign keys on); rows prepared outside the timing.

    ``header``: each group also updates the sweep's row (points so far and the writer's
    heartbeat), in the same transaction, as the store's writer does."""

    def __init__(self, path: Path, state: SweepState, header: bool, synchronous: str) -> None:
        with open_store(f"sqlite:///{path}") as store:
            self._sweep_id = store.begin_sweep(dut="bench").id
        self._rows = bare_rows(state, self._sweep_id)
        self._header = header
        self._conn = sqlite3.connect(path, isolation_level=None, check_same_thread=False)
        self._conn.execute("PRAGMA journal_mode = WAL")
        self._conn.execute(f"PRAGMA synchronous = {synchronous}")
        self._conn.execute("PRAGMA foreign_keys = ON")
        names = ", ".join(("sweep_id", "idx", *POINT_COLUMNS, "flags"))
        marks = ", ".join("?" * len(self._rows[0]))
        self._insert = f"INSERT INTO sweep_points ({names}) VALUES ({marks})"
        self._bump = "UPDATE sweeps SET points = ?, last_write_at = ? WHERE id = ?"
        self._stamp = utc_now().replace(tzinfo=None).isoformat(" ")

    def write(self, start: int, end: int) -> None:
        conn = self._conn
        conn.execute("BEGIN IMMEDIATE")
        if self._header:
            conn.execute(self._bump, (end, self._stamp, self._sweep_id))
        conn.executemany(self._insert, self._rows[start:end])
        conn.execute("COMMIT")

    def close(self) -> None:
        self._conn.close()


#: The sides of a round, in the order their times are kept.
SIDES = ("tool", "bare with header", "bare points only")


def write_round(state: SweepState, tmp: Path, k: int, synchronous: str) -> np.ndarray:
    """One round: the tool (the saver's writes through the sweep writer of the store ``acquire
    sweep`` opens on an existing store file), the bare writes with the header update and the
    bare writes of the points alone, each into a new store file of its own (same layout, empty),
    interleaved group by group on one thread of their own (the side that goes first turns with
    each group, so every side meets the disk's moods alike).

    Each side's total wall time and its thread's CPU time (``time.thread_time``), shape (3, 2)."""
    n = state.count
    totals = np.zeros((len(SIDES), 2))
    with (
        Connections(synchronous, counting=False),
        existing_store(tmp / f"tool-{synchronous}{k}.db") as store,
    ):
        writer = store.begin_sweep(dut="bench", settings={"benchmark": True})
        saver = PointSaver(writer, state, True)
        bare = [
            BareWriter(tmp / f"bare-{synchronous}{k}-{int(header)}.db", state, header, synchronous)
            for header in (True, False)
        ]

        def tool(start: int, end: int) -> None:
            state.count = end
            saver.write_waiting()

        writes = (tool, bare[0].write, bare[1].write)

        def write_all() -> None:
            for g, start in enumerate(range(0, n, GROUP)):
                end = min(start + GROUP, n)
                for turn in range(len(SIDES)):
                    side = (g + turn) % len(SIDES)
                    wall, cpu = time.perf_counter(), time.thread_time()
                    writes[side](start, end)
                    totals[side] += time.perf_counter() - wall, time.thread_time() - cpu

        try:
            thread = threading.Thread(target=write_all, name="sweep-saver")
            thread.start()
            thread.join()
        finally:
            state.count = n
            for side in bare:
                side.close()
        writer.finish("complete")
        assert writer.points == n
    return totals


def writer_goal(n: int, rounds: int, tmp: Path) -> None:
    """Tool and bare interleaved group by group, ``rounds`` times (after a warm-up round); best
    of each side's totals."""
    state = filled_state(n)
    groups = -(-n // GROUP)
    best: dict[str, np.ndarray] = {}
    spread: dict[str, np.ndarray] = {}
    for synchronous in ("FULL", "OFF"):
        times = np.array([write_round(state, tmp, k, synchronous) for k in range(rounds + 1)])[1:]
        best[synchronous] = times.min(axis=0)
        spread[synchronous] = times[:, 1, 0] / times[:, 0, 0]
    _, kinds = tool_writes(tmp / "counted.db", state, "FULL", counting=True)
    per_group = ", ".join(f"{count / groups:g} {kind}" for kind, count in sorted(kinds.items()))
    print(
        f"\n(2) {n} points written in {groups} groups of {GROUP} (one transaction each); "
        f"{rounds} rounds interleaved group by group after a warm-up, best of each side:"
    )
    print(f"  statements per group from the store (an executemany's rows each): {per_group}")
    for synchronous, label in (("FULL", "synchronous=FULL"), ("OFF", "synchronous=OFF, scratch")):
        (tool, tool_cpu), (header, header_cpu), (points_only, _) = best[synchronous]
        print(f"  {label}:")
        print(f"    bare sqlite3, points + header row  {n / header:10,.0f} points/s"
              f"  (CPU {1e3 * header_cpu / groups:.3f} ms per group)")  # fmt: skip
        print(f"    bare sqlite3, points only          {n / points_only:10,.0f} points/s")
        ratios = f"{header / tool:.2f}x with header, {points_only / tool:.2f}x points only"
        print(f"    PointSaver -> store sweep writer   {n / tool:10,.0f} points/s  ({ratios};"
              f" CPU {1e3 * tool_cpu / groups:.3f} ms per group)")  # fmt: skip
        each = spread[synchronous]
        print(f"    each round's ratio with header: {each.min():.2f}x to {each.max():.2f}x,"
              f" median {np.median(each):.2f}x")  # fmt: skip
    (tool, tool_cpu), (header, header_cpu), (points_only, _) = best["FULL"]
    (off_tool, off_tool_cpu), (off_header, off_header_cpu), _ = best["OFF"]
    print(
        f"  information: the tool's own time beyond the bare writes, without disk waits: "
        f"{1e3 * (off_tool - off_header) / groups:+.3f} ms per group "
        f"({off_tool / off_header:.2f}x the bare time); its thread's CPU "
        f"{1e3 * (off_tool_cpu - off_header_cpu) / groups:+.3f} ms per group"
    )
    print(f"  information: points only (no header row) as the bare side: {points_only / tool:.2f}x")
    report(
        Goal(
            what="sweep points written (SQLite, WAL, synchronous FULL)",
            figure=header / tool,
            target=0.8,
            unit="x",
            better="higher",
            baseline="bare sqlite3 executemany of the same rows with the sweep row's update",
        )
    )


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true", help="fewer points and repeats")
    args = parser.parse_args()
    n = 401 if args.quick else 1601
    repeats = 3 if args.quick else 5
    process, resource = start_simulator()
    try:
        with tempfile.TemporaryDirectory() as tmp:
            sweep_goal(resource, n, repeats, Path(tmp))
            writer_goal(n if args.quick else 20 * n, 2 * repeats, Path(tmp))
    finally:
        process.terminate()
        process.wait(10)
    return 0


if __name__ == "__main__":
    sys.exit(main())
