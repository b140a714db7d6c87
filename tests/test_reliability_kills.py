"""SIGKILL a running `acquire station` at seeded random moments of a lot, then check what it left.

After every kill (tests/kill_support.py does the checking): the SQLite files pass
``PRAGMA integrity_check`` (SQLite's own consistency check, https://sqlite.org/pragma.html
#pragma_integrity_check); every stored unit is whole (as many values as the plan has checks,
none for an error outcome); no attempt id is stored twice; every unit the station showed is
stored or waiting; the outbox holds exactly the units not stored (plus at most the one whose
removal the kill cut off right after the store's commit, which the design writes again and the
store's attempt id turns into a no-op). After the series a restarted station on the same lot and
outbox writes the waiting units once and goes on with the lot's counts. The properties checked
are the ones the station's own documentation promises (acquire/production/outbox.py): a unit is
durable from ``put``, stored at most once, lost never. Run with a SQLite store, a PostgreSQL
store (schema per test; skips when the server is away unless CI=true) and a PostgreSQL store
whose connection a TCP relay cuts mid-lot. CI counts: 8, 4 and 2 kills; ACQUIRE_LONG_TESTS=1
runs 100 of each.
"""

from __future__ import annotations

import random
import time
from pathlib import Path
from typing import Any

import pytest
from bench_support import example_plan_references
from kill_support import (
    LONG,
    Line,
    finish_lot,
    inspect,
    kill,
    kill_count,
    shown_units,
    start_station,
    wait_for_units,
)
from sqlalchemy.engine import make_url
from store_support import require_postgres, temporary_schema
from test_production_outbox import Relay

from acquire.production.plan_file import example_plan_path, load_plan
from acquire.store import open_store

#: The long variants (ACQUIRE_LONG_TESTS=1) run 100 kills a test: up to about 6 minutes each.
pytestmark = pytest.mark.timeout(1200 if LONG else 120)

#: Seconds per measured point of the simulated meter: a unit takes about 0.15 s.
MEASURE_TIME = 0.03
#: Serials fed to each run (the next ones of the lot not yet recorded): with the station's
#: start-up of about a second, a run takes about 3 s.
PER_RUN = 12


@pytest.fixture(scope="module")
def bench(module_simulator, tmp_path_factory) -> dict[str, Any]:
    """A simulated meter with the demo coil on bench leads and references captured once."""
    sim = module_simulator(dut="demo-coil", fixture="bench-leads", noise=True, seed=11)
    refs = example_plan_references(sim)
    sim.set_measure_time(MEASURE_TIME)
    checks = len(load_plan(example_plan_path()).checks)
    return {"sim": sim, "refs": refs, "checks": checks}


def _line(bench: dict[str, Any], folder: Path, url: str, sqlite_file: Path | None) -> Line:
    with open_store(url) as store:
        store.save_reference_set(bench["refs"], name="kill test references")
    return Line(
        resource=bench["sim"].resource,
        store_url=url,
        outbox=folder / "outbox.db",
        plan=example_plan_path(),
        checks=bench["checks"],
        sqlite_file=sqlite_file,
    )


def _series(line: Line, kills: int, seed: int, cut: Any = None) -> dict[str, int]:
    """Run, kill and check ``kills`` times on one lot, then finish it; counts for the report.

    Each run is fed the next PER_RUN serials of the lot not yet recorded, one every 0.2 s
    (slower than the station measures) or all at once (seeded choice), and killed at a seeded
    random moment: while it starts up (0.1 s to 1 s in), or once it has shown a seeded number
    of units plus up to 0.25 s (about two units' time, so that kills land in measuring,
    judging and every step of recording). Counting shown units rather than seconds keeps the
    kills inside the lot on a slow machine too. ``cut(run, rng)``, if given, cuts the store's
    connection during the run and returns how to mend it, done after the kill.
    """
    rng = random.Random(seed)
    serials = [f"EXAMPLE-{1000 + i}" for i in range(PER_RUN * (kills + 1))]
    counts = {"kills": 0, "mid_lot": 0, "waiting_seen": 0, "stored_and_waiting": 0}
    left = inspect(line)
    for _ in range(kills):
        todo = [s for s in serials if s not in left.serials][:PER_RUN]
        run = start_station(line, todo, pace=rng.choice([0.0, 0.2]))
        mend = cut(run, rng) if cut is not None else None
        if mend is not None:  # after the cut, so that units meet the store away
            moment = time.monotonic() - run.started + rng.uniform(0.3, 1.5)
        elif rng.random() < 0.15:
            moment = rng.uniform(0.1, 1.0)
        else:
            wait_for_units(run, rng.randrange(PER_RUN - 2))
            moment = time.monotonic() - run.started + rng.uniform(0.0, 0.25)
        killed = kill(run, moment)
        if mend is not None:
            mend()
        before = left.attempts
        left = inspect(line, shown_units(run.stdout()))
        assert left.attempts >= before, "units disappeared after a kill"
        counts["kills"] += killed
        counts["mid_lot"] += killed and left.attempts > before
        counts["waiting_seen"] += bool(left.waiting)
        counts["stored_and_waiting"] += len(left.both)
    todo = [s for s in serials if s not in left.serials][:5]
    after, _ = finish_lot(line, todo, left)
    assert set(todo) <= after.serials
    counts["stored"] = len(after.stored)
    print(f"kill series: {counts}")
    return counts


def test_sigkill_during_a_lot_on_a_sqlite_store(bench, tmp_path):
    db = tmp_path / "line.db"
    line = _line(bench, tmp_path, f"sqlite:///{db}", db)
    counts = _series(line, kill_count(8), seed=1)
    assert counts["mid_lot"] >= 1, f"no kill landed while units were recorded: {counts}"


def test_sigkill_during_a_lot_on_a_postgresql_store(bench, tmp_path):
    url = require_postgres()
    with temporary_schema(url) as schema:
        line = _line(bench, tmp_path, f"{url}?schema={schema}", None)
        counts = _series(line, kill_count(4), seed=2)
    assert counts["mid_lot"] >= 1, f"no kill landed while units were recorded: {counts}"


def test_sigkill_while_the_postgresql_connection_is_cut(bench, tmp_path):
    url = require_postgres()
    real = make_url(url)
    relay = Relay(real.host or "127.0.0.1", real.port or 5432)
    relayed = real.set(host="127.0.0.1", port=relay.port).render_as_string(hide_password=False)

    def cut(run: Any, rng: random.Random) -> Any:
        """Cut the link once the station has recorded one to three units."""
        wait_for_units(run, rng.randrange(1, 4))
        time.sleep(rng.uniform(0.0, 0.3))
        relay.cut()
        return relay.mend

    try:
        with temporary_schema(url) as schema:
            line = _line(bench, tmp_path, f"{url}?schema={schema}", None)
            line.store_url = f"{relayed}?schema={schema}"
            counts = _series(line, kill_count(2), seed=3, cut=cut)
    finally:
        relay.close()
    assert counts["waiting_seen"] >= 1, f"no unit was left waiting by a cut: {counts}"
