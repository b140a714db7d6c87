"""Killing a running station with SIGKILL and checking what it left (for
tests/test_reliability_kills.py; ``benchmarks/reliability.py`` may borrow it). Not part of the
installed program.

- :func:`start_station` runs ``acquire station`` as a real process against a simulated meter,
  feeding it serials on standard input slowly (``pace`` seconds apart) or all at once.
- :func:`kill` ends it with SIGKILL: no handler, no clean-up, as a power cut or the OOM killer.
- :func:`inspect` reads what the store and the outbox hold afterwards and checks them: the
  SQLite files pass ``PRAGMA integrity_check``, every stored unit is whole (as many measurements
  as the plan has checks, none for an error outcome), no attempt id is stored twice, every unit
  the station showed is stored or waiting, and the outbox holds the units not stored (and, at
  most, the one unit whose removal the kill cut off after the store's commit) and nothing else.
- :func:`finish_lot` restarts the station on the same lot and outbox and checks it writes the
  waiting units once and goes on with the lot's counts.

``ACQUIRE_LONG_TESTS=1`` selects the long counts (:func:`kill_count`).
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
from dataclasses import dataclass, field
from pathlib import Path

from acquire.production.outbox import Outbox

ROOT = Path(__file__).resolve().parents[1]
#: True when the long variants run (``ACQUIRE_LONG_TESTS=1``).
LONG = os.environ.get("ACQUIRE_LONG_TESTS") == "1"
_SHOWN = re.compile(r"\s(EXAMPLE-\d{4})\s+attempt (\d+)\s")
_TESTED = re.compile(r"^\s*tested\s+(\d+)\s*$", re.MULTILINE)
_GOES_ON = re.compile(r"goes on: (\d+) attempts already recorded")


def kill_count(reduced: int, long: int = 100) -> int:
    """How many kills a test runs: ``reduced`` in CI, ``long`` with ACQUIRE_LONG_TESTS=1."""
    return long if LONG else reduced


@dataclass
class Line:
    """One station's setting: the simulated meter, the store, the outbox, the lot."""

    resource: str
    store_url: str
    outbox: Path
    plan: Path
    checks: int
    lot: str = "LOT-K"
    station: str = "kill-1"
    sqlite_file: Path | None = None


@dataclass
class Run:
    """A running station process and the feeder writing its serials."""

    proc: subprocess.Popen[bytes]
    feeder: threading.Thread
    started: float
    out: list[bytes] = field(default_factory=list)
    reader: threading.Thread | None = None

    def stdout(self) -> str:
        return b"".join(self.out).decode("utf-8", "replace")


def _feed(proc: subprocess.Popen[bytes], serials: list[str], pace: float) -> None:
    stdin = proc.stdin
    assert stdin is not None
    try:
        if pace <= 0:
            stdin.write("".join(f"{s}\n" for s in serials).encode())
            stdin.flush()
        else:
            for s in serials:
                stdin.write(f"{s}\n".encode())
                stdin.flush()
                time.sleep(pace)
        stdin.close()
    except (BrokenPipeError, OSError, ValueError):
        pass  # the station was killed while its serials were still coming


def _read(proc: subprocess.Popen[bytes], out: list[bytes]) -> None:
    assert proc.stdout is not None
    for chunk in iter(proc.stdout.readline, b""):
        out.append(chunk)


def start_station(line: Line, serials: list[str], pace: float = 0.0) -> Run:
    """Start ``acquire station`` on ``line`` with ``serials`` piped in (``pace`` s apart)."""
    env = dict(os.environ, PYTHONPATH=str(ROOT), PYTHONUNBUFFERED="1", COLUMNS="200")
    proc = subprocess.Popen(
        [sys.executable, "-m", "acquire", "station", "--resource", line.resource,
         "--store", line.store_url, "--plan", str(line.plan), "--lot", line.lot,
         "--operator", "kim", "--station", line.station, "--outbox", str(line.outbox),
         "--no-bell"],
        stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, env=env,
        cwd=line.outbox.parent,
    )  # fmt: skip
    feeder = threading.Thread(target=_feed, args=(proc, serials, pace), daemon=True)
    run = Run(proc, feeder, time.monotonic())
    run.reader = threading.Thread(target=_read, args=(proc, run.out), daemon=True)
    feeder.start()
    run.reader.start()
    return run


def wait_for_units(run: Run, count: int, timeout: float = 30.0) -> None:
    """Wait until the station has shown ``count`` units (or ended, or ``timeout`` passed)."""
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline and run.proc.poll() is None:
        if len(shown_units(run.stdout())) >= count:
            return
        time.sleep(0.005)


def kill(run: Run, after: float) -> bool:
    """SIGKILL the station ``after`` seconds from its start; False if it had already ended."""
    time.sleep(max(0.0, run.started + after - time.monotonic()))
    alive = run.proc.poll() is None
    if alive:
        run.proc.send_signal(signal.SIGKILL)
    run.proc.wait(timeout=30)
    _drain(run)
    return alive


def _drain(run: Run) -> None:
    run.feeder.join(timeout=10)
    if run.reader is not None:
        run.reader.join(timeout=10)


def shown_units(text: str) -> set[tuple[str, int]]:
    """(serial, attempt) of every unit a station's plain output showed as measured."""
    return {(m.group(1), int(m.group(2))) for m in _SHOWN.finditer(text)}


@dataclass
class Left:
    """What a killed station left: stored units and waiting units, by attempt id."""

    stored: dict[str, tuple[str, int, str]]  # attempt_id -> (serial, attempt, outcome)
    waiting: dict[str, tuple[str, int, str]]
    both: set[str]

    @property
    def serials(self) -> set[str]:
        return {s for s, _, _ in (self.stored | self.waiting).values()}

    @property
    def attempts(self) -> int:
        return len(set(self.stored) | set(self.waiting))


def _integrity(path: Path) -> None:
    with sqlite3.connect(f"file:{path}?mode=ro", uri=True) as conn:
        result = conn.execute("PRAGMA integrity_check").fetchall()
    conn.close()
    assert result == [("ok",)], f"{path.name}: PRAGMA integrity_check says {result}"


def inspect(line: Line, shown: set[tuple[str, int]] = frozenset()) -> Left:  # type: ignore[assignment]
    """Check the store and the outbox of ``line`` after a kill; what they hold."""
    from sqlalchemy import text

    from acquire.store import open_store

    if line.sqlite_file is not None and line.sqlite_file.exists():
        _integrity(line.sqlite_file)
    if line.outbox.exists():
        _integrity(line.outbox)
    with open_store(line.store_url) as store, store.engine.connect() as conn:
        doubled = conn.execute(
            text("SELECT attempt_id, COUNT(*) FROM units GROUP BY attempt_id HAVING COUNT(*) > 1")
        ).all()
        rows = conn.execute(
            text(
                "SELECT u.attempt_id, u.serial, u.attempt, u.outcome, COUNT(m.seq) "
                "FROM units u LEFT JOIN measurements m ON m.unit_id = u.id "
                "GROUP BY u.id, u.attempt_id, u.serial, u.attempt, u.outcome"
            )
        ).all()
    assert not doubled, f"attempt ids stored twice: {doubled}"
    stored = {}
    for attempt_id, serial, attempt, outcome, measured in rows:
        want = 0 if outcome == "error" else line.checks
        assert measured == want, f"{serial} attempt {attempt}: {measured} of {want} values"
        stored[attempt_id] = (serial, attempt, outcome)
    waiting = {}
    if line.outbox.exists():
        with Outbox(line.outbox) as box:
            for unit in box.pending():
                assert unit.attempt_id not in waiting, f"{unit.serial} waits twice"
                want = 0 if unit.outcome == "error" else line.checks
                assert len(unit.measurements) == want, f"waiting {unit.serial} is not whole"
                assert (unit.lot, unit.station) == (line.lot, line.station)
                waiting[unit.attempt_id] = (unit.serial, unit.attempt, unit.outcome)
    both = set(stored) & set(waiting)
    # The one window the design leaves: the store committed the oldest waiting unit and the kill
    # came before the outbox's removal of it. It is written again, storing nothing, on restart.
    assert len(both) <= 1, f"{len(both)} units both stored and waiting"
    for attempt_id in both:
        assert stored[attempt_id] == waiting[attempt_id]
    everything = {(s, a) for s, a, _ in (stored | waiting).values()}
    lost = set(shown) - everything
    assert not lost, f"units shown as measured but neither stored nor waiting: {sorted(lost)}"
    return Left(stored, waiting, both)


def finish_lot(line: Line, serials: list[str], before: Left) -> tuple[Left, str]:
    """Restart the station on the same lot and outbox with ``serials``, let it end; check it
    wrote the waiting units once and counted the earlier ones. What the store holds then."""
    run = start_station(line, serials)
    try:
        run.proc.wait(timeout=120)
    finally:
        if run.proc.poll() is None:
            run.proc.kill()
    _drain(run)
    out = run.stdout()
    assert run.proc.returncode == 0, out[-2000:]
    after = inspect(line, shown_units(out))
    assert not after.waiting, f"{len(after.waiting)} units still wait after a clean run"
    assert set(before.stored) | set(before.waiting) <= set(after.stored), "an earlier unit lost"
    for attempt_id, row in (before.stored | before.waiting).items():
        assert after.stored[attempt_id] == row
    goes_on = _GOES_ON.search(out)
    if before.attempts:
        assert goes_on is not None, out[-2000:]
        assert int(goes_on.group(1)) == before.attempts
    tested = _TESTED.search(out)
    assert tested is not None, out[-2000:]
    assert int(tested.group(1)) == len(after.serials)
    return after, out
