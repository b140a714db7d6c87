"""Stops and outages: SIGTERM and SIGHUP end a sweep or a station as Ctrl-C does; the store marks
sweeps of dead writers interrupted when opened; a sweep outlives a store outage.

Checked against behaviour the design states (DESIGN.md, "Nothing is lost": an interrupted run
leaves the completed part marked as interrupted) and POSIX signal semantics (IEEE Std 1003.1,
<signal.h>: SIGTERM and SIGHUP terminate a process by default, SIGKILL cannot be caught). The
commands run as real processes against the simulated meter; the PostgreSQL store is reached
through the TCP relay of ``tests/test_production_outbox.py``, which cuts the link. PostgreSQL
cases skip when the server is unreachable (fail when CI=true), as ``tests/store_support.py``
describes.
"""

from __future__ import annotations

import os
import re
import signal
import sqlite3
import subprocess
import sys
import threading
import time
from pathlib import Path

import numpy as np
import pytest
from bench_support import PutsEachStandardIn
from sqlalchemy import text
from sqlalchemy.engine import make_url
from store_support import require_postgres, temporary_schema
from test_production_outbox import Relay

from acquire.capture import capture_references
from acquire.errors import StoreError
from acquire.plan import log_plan
from acquire.production.plan_file import example_plan_path, load_plan
from acquire.store import open_store
from acquire.sweep import run_sweep
from acquire.sweep_state import SweepState
from drivers.meter import ImpedanceMeter

ROOT = Path(__file__).resolve().parents[1]
POSIX = pytest.mark.skipif(os.name != "posix", reason="stop signals are POSIX signals")
ENV = dict(os.environ, PYTHONPATH=str(ROOT))


def _stored(path: Path, query: str) -> list[tuple]:
    """Rows of ``query`` on the SQLite store at ``path`` read directly ([] before it exists)."""
    try:
        with sqlite3.connect(path, timeout=5) as conn:
            return list(conn.execute(query))
    except sqlite3.OperationalError:
        return []


def _wait_for(predicate, timeout: float = 60.0) -> None:
    end = time.monotonic() + timeout
    while not predicate():
        assert time.monotonic() < end, "timed out"
        time.sleep(0.05)


def _start_sweep(sim, path: Path, points: int = 300) -> subprocess.Popen:
    return subprocess.Popen(
        [sys.executable, "-m", "acquire", "sweep", "--resource", sim.resource,
         "--store", f"sqlite:///{path}", "--start", "100Hz", "--stop", "1MHz",
         "--points", str(points), "--no-live", "--dut", "stop-coil"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=ENV, cwd=path.parent,
    )  # fmt: skip


def _sweep_rows(path: Path) -> list[tuple]:
    return _stored(path, "SELECT id, status, points, note FROM sweeps")


def _points_stored(path: Path, at_least: int) -> bool:
    rows = _sweep_rows(path)
    return bool(rows) and rows[0][2] >= at_least


@POSIX
@pytest.mark.parametrize("name", ["SIGTERM", "SIGHUP"])
def test_a_stop_signal_ends_a_sweep_as_ctrl_c_does(simulator, tmp_path, name):
    sim = simulator(dut="demo-coil", measure_time=0.01)
    path = tmp_path / "store.db"
    proc = _start_sweep(sim, path)
    try:
        _wait_for(lambda: _points_stored(path, 20))
        proc.send_signal(getattr(signal, name))
        out, err = proc.communicate(timeout=60)
    finally:
        proc.kill()
    assert proc.returncode == 130, (proc.returncode, err)  # as Ctrl-C: 128 + SIGINT's 2
    [(sweep_id, status, points, note)] = _sweep_rows(path)
    assert status == "interrupted" and f"stopped by {name}" in note
    assert 20 <= points < 300
    stored = _stored(path, f"SELECT idx FROM sweep_points WHERE sweep_id = {sweep_id}")
    assert sorted(i for (i,) in stored) == list(range(points))
    assert f"{points} of 300 points saved as sweep {sweep_id}" in err
    assert "Traceback" not in err


@POSIX
def test_a_sigkilled_writer_is_marked_interrupted_by_the_next_open(simulator, tmp_path):
    sim = simulator(dut="demo-coil", measure_time=0.01)
    path = tmp_path / "store.db"
    proc = _start_sweep(sim, path)
    try:
        _wait_for(lambda: _points_stored(path, 20))
        proc.send_signal(signal.SIGKILL)  # cannot be caught: nothing in the process marks it
        proc.communicate(timeout=60)
    finally:
        proc.kill()
    [(sweep_id, status, points, _)] = _sweep_rows(path)
    assert status == "running"
    with open_store(f"sqlite:///{path}") as store:
        # a sweep of this (living) process and one of another host stay running
        alive = store.begin_sweep(dut="still measuring")
    with sqlite3.connect(path) as conn:
        conn.execute(
            "INSERT INTO sweeps (dut, status, note, points, started_at, last_write_at, "
            "writer_host, writer_pid) SELECT 'elsewhere', 'running', '', 0, started_at, "
            f"last_write_at, 'another-host', 1 FROM sweeps WHERE id = {alive.id}"
        )
    with open_store(f"sqlite:///{path}") as store:
        pass
    rows = {r[0]: r for r in _sweep_rows(path)}
    assert rows[sweep_id][1] == "interrupted" and rows[sweep_id][2] == points
    assert "ended without finishing" in rows[sweep_id][3]
    assert [r[1] for i, r in sorted(rows.items()) if i != sweep_id] == ["running", "running"]
    with open_store(f"sqlite:///{path}") as store:
        assert store.sweep_info(sweep_id).recorded_status == "interrupted"


@pytest.fixture(scope="module")
def station_refs(module_simulator, tmp_path_factory):
    """The demo coil on bench leads with references captured for the example plan's fixture."""
    sim = module_simulator(dut="demo-coil", fixture="bench-leads", noise=True, seed=3)
    plan = load_plan(example_plan_path())
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        identity = meter.identify()
        refs = capture_references(
            meter, log_plan("100Hz", "1MHz", 41), PutsEachStandardIn(sim),
            load_true=sim.load_true, fixture=plan.fixture, meter_name=str(identity),
        )  # fmt: skip
    sim.insert("demo-coil")
    return sim, refs


@POSIX
@pytest.mark.parametrize("name", ["SIGTERM", "SIGHUP"])
def test_a_stop_signal_ends_a_station_with_its_summary(station_refs, tmp_path, name):
    sim, refs = station_refs
    path = tmp_path / "line.db"
    with open_store(f"sqlite:///{path}") as store:
        store.save_reference_set(refs, name="line refs")
    serials = "".join(f"EXAMPLE-{2000 + i}\n" for i in range(200))
    proc = subprocess.Popen(
        [sys.executable, "-m", "acquire", "station", "--resource", sim.resource,
         "--store", f"sqlite:///{path}", "--plan", str(example_plan_path()), "--lot", "L-S",
         "--operator", "ana", "--station", "bench-9", "--no-bell"],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True,
        env=ENV, cwd=tmp_path,
    )  # fmt: skip
    try:
        assert proc.stdin is not None
        proc.stdin.write(serials)
        proc.stdin.flush()  # the pipe stays open: the station would wait for more serials
        _wait_for(lambda: len(_stored(path, "SELECT id FROM units")) >= 3)
        proc.send_signal(getattr(signal, name))
        out, err = proc.communicate(timeout=60)
    finally:
        proc.kill()
    assert proc.returncode == 0, err  # as Ctrl-C: the session ends with its summary
    assert "Traceback" not in err
    tested = re.search(r"tested\s+(\d+)", out)
    assert tested is not None, out[-2000:]
    units = _stored(path, "SELECT serial FROM units ORDER BY id")
    assert 3 <= len(units) < 200
    assert int(tested.group(1)) == len(units)  # every unit the session counted is stored
    assert [s for (s,) in units] == [f"EXAMPLE-{2000 + i}" for i in range(len(units))]


def _relayed_store(url: str, relay: Relay) -> str:
    real = make_url(url)
    return real.set(host="127.0.0.1", port=relay.port).render_as_string(hide_password=False)


def _relay(url: str) -> Relay:
    real = make_url(url)
    return Relay(real.host or "127.0.0.1", real.port or 5432)


def test_a_sweep_goes_on_through_a_store_outage_and_saves_every_point(simulator):
    url = require_postgres()
    sim = simulator(dut="demo-coil", measure_time=0.01)
    relay = _relay(url)
    plan = log_plan("100Hz", "1MHz", 301)
    state = SweepState(plan)
    seen: dict[str, int] = {}

    def cut_once() -> None:
        if state.count >= 30 and "cut" not in seen:
            seen["cut"] = state.count
            relay.cut()  # connections refused for 2 s

            def mend() -> None:
                seen["mend"] = state.count
                relay.mend()

            threading.Timer(2.0, mend).start()

    try:
        with (
            temporary_schema(url) as schema,
            open_store(_relayed_store(url, relay), schema=schema) as store,
            ImpedanceMeter.open(sim.resource, dialect="simulated") as meter,
        ):
            writer = store.begin_sweep(dut="outage-coil")
            outcome = run_sweep(meter, plan, writer=writer, state=state, on_progress=cut_once)
            assert seen["mend"] > seen["cut"] + 50  # measuring went on while the store was away
            assert outcome.status == "complete" and outcome.frequency.size == 301
            assert outcome.store_waits >= 1  # writes failed while the relay was cut
            with open_store(url, schema=schema) as direct:
                info = direct.sweep_info(writer.id)
                points = direct.sweep_points(writer.id)
        assert info.recorded_status == "complete" and info.points == 301
        assert np.array_equal(points["frequency"].to_numpy(), plan.frequencies)
        assert np.array_equal(points["raw_r"].to_numpy(), outcome.raw.real)
        assert outcome.message().startswith(
            f"sweep complete: 301 points saved as sweep {writer.id}"
        )
    finally:
        relay.close()


def test_a_store_that_never_comes_back_is_reported_point_for_point(simulator):
    url = require_postgres()
    sim = simulator(dut="demo-coil", measure_time=0.005)
    relay = _relay(url)
    plan = log_plan("100Hz", "1MHz", 101)
    state = SweepState(plan)

    def cut_for_good() -> None:
        if state.count >= 60:
            relay.cut()

    try:
        with (
            temporary_schema(url) as schema,
            open_store(_relayed_store(url, relay), schema=schema) as store,
            ImpedanceMeter.open(sim.resource, dialect="simulated") as meter,
        ):
            writer = store.begin_sweep(dut="lost-store-coil")
            began = time.monotonic()
            outcome = run_sweep(
                meter, plan, writer=writer, state=state, on_progress=cut_for_good,
                store_patience=1.0,
            )  # fmt: skip
            assert time.monotonic() - began < 30
            with open_store(url, schema=schema) as direct:
                saved = len(direct.sweep_points(writer.id))
                assert direct.sweep_info(writer.id).recorded_status == "running"
    finally:
        relay.close()
    assert outcome.frequency.size == 101  # every measured point is in the outcome
    assert outcome.status == "interrupted" and isinstance(outcome.error, StoreError)
    assert 0 < outcome.saved == saved < 101
    message = outcome.message()
    assert f"101 of 101 points measured, {saved} saved as sweep {writer.id}" in message
    assert f"{101 - saved} not saved" in message


class FlakyWriter:
    """A store's sweep writer behind a switch: while ``down`` every call raises StoreError as a
    store does when its database cannot be reached."""

    def __init__(self, writer) -> None:
        self.writer = writer
        self.id = writer.id
        self.down = False
        self.refused = 0

    def add_points(self, *args, **kwargs) -> None:
        if self.down:
            self.refused += 1
            raise StoreError("storing sweep points failed in store test: connection refused")
        self.writer.add_points(*args, **kwargs)

    def finish(self, status: str = "complete", note: str = "") -> None:
        if self.down:
            raise StoreError("finishing a sweep failed in store test: connection refused")
        self.writer.finish(status, note)


def test_points_wait_in_memory_while_the_writer_fails(simulator, tmp_path):
    sim = simulator(dut="demo-coil", measure_time=0.005)
    plan = log_plan("100Hz", "1MHz", 201)
    state = SweepState(plan)
    with (
        open_store(f"sqlite:///{tmp_path / 'store.db'}") as store,
        ImpedanceMeter.open(sim.resource, dialect="simulated") as meter,
    ):
        flaky = FlakyWriter(store.begin_sweep(dut="flaky"))

        cut: list[int] = []

        def outage() -> None:
            if state.count >= 20 and not cut:
                cut.append(state.count)
                flaky.down = True
                threading.Timer(1.0, setattr, (flaky, "down", False)).start()

        outcome = run_sweep(meter, plan, writer=flaky, state=state, on_progress=outage)
        points = store.sweep_points(flaky.id)
        info = store.sweep_info(flaky.id)
    assert flaky.refused >= 1 and outcome.status == "complete"
    assert outcome.saved == 201 and info.recorded_status == "complete" and info.points == 201
    assert np.array_equal(points["frequency"].to_numpy(), plan.frequencies)


def test_a_repeated_batch_after_a_lost_answer_is_stored_once(tmp_path):
    # The store committed a batch but its answer was lost: the writer tries again with the
    # same first index and more points; what the store holds is not written twice.
    with open_store(f"sqlite:///{tmp_path / 'store.db'}") as store:
        writer = store.begin_sweep(dut="twice")
        f = np.array([1e3, 2e3, 3e3, 4e3])
        z = np.array([1 + 1j, 2 + 2j, 3 + 3j, 4 + 4j])
        writer.add_points(f[:2], z[:2])
        writer._count = 0  # as if the answer to that commit never arrived
        writer.add_points(f, z)
        assert writer.points == 4
        points = store.sweep_points(writer.id)
        assert points["frequency"].tolist() == f.tolist()
        assert store.sweep_info(writer.id).points == 4
        with store.engine.connect() as conn:
            assert conn.execute(text("SELECT COUNT(*) FROM sweep_points")).scalar_one() == 4


@POSIX
def test_a_stop_signal_waits_while_a_measured_unit_is_recorded():
    # A station holds stop signals while it records a unit it has measured: the signal ends the
    # session only once the unit is saved, never between the measuring and the saving.
    from acquire import signals

    before = {n: signal.getsignal(getattr(signal, n)) for n in ("SIGTERM", "SIGHUP", "SIGINT")}
    try:
        signals.install()
        saved = []
        with pytest.raises(KeyboardInterrupt) as stopped, signals.held():
            os.kill(os.getpid(), signal.SIGTERM)
            time.sleep(0.05)  # the handler has run by now (CPython runs it promptly)
            saved.append("unit")
        assert saved == ["unit"] and "SIGTERM" in str(stopped.value)
        with pytest.raises(KeyboardInterrupt):  # outside a hold it stops at once
            os.kill(os.getpid(), signal.SIGHUP)
            time.sleep(0.05)
            saved.append("never")
        assert saved == ["unit"]
    finally:
        for name, handler in before.items():
            signal.signal(getattr(signal, name), handler)


def test_a_command_run_in_process_gives_the_signal_handlers_back():
    """`acquire.cli.main` called from another program (a test, a script) leaves that program's
    handlers as they were once the command has ended."""
    import signal as sig

    from acquire.cli import main

    before = {s: sig.getsignal(s) for s in (sig.SIGINT, sig.SIGTERM, sig.SIGHUP)}
    assert main(["plan", "example"]) == 0
    assert {s: sig.getsignal(s) for s in before} == before
