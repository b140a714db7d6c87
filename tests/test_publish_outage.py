"""The broker goes away mid-lot and comes back: every unit the station stored arrives.

A real `acquire station` process tests a lot on the simulated meter with --publish to a private
Mosquitto (its own port, its own sessions). The test stops the broker after the first units
have arrived, feeds more serials while it is away (the station goes on measuring and storing),
starts the broker again on the same port, feeds the rest and ends the session. A subscriber with
a kept session (MQTT 3.1.1, 3.1.2.4: clean session 0, QoS 1 subscription) then holds every
stored attempt id at least once: set equality with the store, and, once repeats are dropped by
attempt id, the store's order. The broker is stopped with SIGTERM (a stop, not a crash): what it
acknowledged before the stop is its own to keep, which Mosquitto does with ``persistence true``.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import threading
import time
import uuid

import pytest
from bench_support import example_plan_references
from mqtt_support import ROOT, Listener, PrivateBroker

from acquire.production.plan_file import example_plan_path
from acquire.store import open_store

pytestmark = pytest.mark.timeout(120)

LOT, STATION = "LOT-OUT", "out-1"
#: Serials fed before the stop, while the broker is away, and after it is back.
BEFORE, DURING, AFTER = 6, 6, 6


@pytest.fixture(scope="module")
def bench(module_simulator):
    sim = module_simulator(dut="demo-coil", fixture="bench-leads", noise=True, seed=5)
    refs = example_plan_references(sim)
    return sim, refs


def stored_ids(url: str) -> list[str]:
    with open_store(url) as store:
        units = store.lot_units(LOT)
    return list(units[units.station == STATION].attempt_id)


def wait_until(test, timeout: float = 30.0) -> bool:
    deadline = time.monotonic() + timeout
    while time.monotonic() < deadline and not test():
        time.sleep(0.1)
    return test()


def test_units_stored_while_the_broker_is_away_arrive_when_it_is_back(bench, tmp_path):
    sim, refs = bench
    url = f"sqlite:///{tmp_path / 'store.db'}"
    with open_store(url) as store:
        store.save_reference_set(refs, name="outage test references")
    prefix = f"acquire-test/{uuid.uuid4().hex[:12]}"
    serials = [f"EXAMPLE-{5000 + i}" for i in range(BEFORE + DURING + AFTER)]
    (tmp_path / "broker").mkdir()
    with PrivateBroker(tmp_path / "broker") as broker:
        listener = Listener(
            broker.port, f"{prefix}/#", client_id="lst" + uuid.uuid4().hex[:20], keep_session=True
        )
        env = dict(os.environ, PYTHONPATH=str(ROOT), PYTHONUNBUFFERED="1", COLUMNS="200")
        proc = subprocess.Popen(
            [sys.executable, "-m", "acquire", "station", "--resource", sim.resource,
             "--store", url, "--plan", str(example_plan_path()), "--lot", LOT,
             "--operator", "kim", "--station", STATION, "--no-bell",
             "--outbox", str(tmp_path / "outbox.db"),
             "--publish", f"mqtt://127.0.0.1:{broker.port}/{prefix}", "--line", "line-A"],
            stdin=subprocess.PIPE, stdout=subprocess.PIPE, stderr=subprocess.STDOUT, env=env,
            cwd=tmp_path,
        )  # fmt: skip
        out: list[bytes] = []
        reader = threading.Thread(target=lambda: out.extend(iter(proc.stdout.readline, b"")))
        reader.start()
        assert proc.stdin is not None

        def feed(part: list[str]) -> None:
            proc.stdin.write("".join(f"{s}\n" for s in part).encode())
            proc.stdin.flush()

        try:
            feed(serials[:BEFORE])
            assert listener.wait_for(lambda s: len(s.received("/unit")) >= BEFORE, 30)
            broker.stop()
            feed(serials[BEFORE : BEFORE + DURING])
            assert wait_until(lambda: len(stored_ids(url)) >= BEFORE + DURING)
            arrived_while_away = len(listener.received("/unit"))
            broker.start()
            feed(serials[BEFORE + DURING :])
            proc.stdin.close()
            assert proc.wait(60) == 0
            reader.join(5)
            ids = stored_ids(url)
            got = lambda s: {m["attempt_id"] for m in s.units()} >= set(ids)  # noqa: E731
            listener.wait_for(got, 20)
            received = [m["attempt_id"] for m in listener.units()]
            late = Listener(broker.port, f"{prefix}/line-A/{STATION}/status")
            assert late.wait_for(lambda s: s.received(), 5)
            status = json.loads(late.received()[-1][1])
            late.close()
        finally:
            if proc.poll() is None:
                proc.kill()
            listener.close()
    shown = b"".join(out).decode("utf-8", "replace")
    assert len(ids) == len(serials), shown
    assert arrived_while_away == BEFORE  # nothing went out while the broker was away
    assert set(received) == set(ids), shown  # every stored attempt, nothing else
    first_seen = list(dict.fromkeys(received))
    assert first_seen == ids  # repeats dropped by attempt id: the store's order
    assert "wait to be published" not in shown
    assert (status["state"], status["tested"], status["lot"]) == ("stopped", len(serials), LOT)
    print(f"outage: {len(ids)} units stored, {len(received)} messages received "
          f"({len(received) - len(ids)} repeats)")  # fmt: skip
