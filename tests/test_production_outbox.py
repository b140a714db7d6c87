"""The station's outbox: units kept in a local SQLite file while the results store is away.

Checked: every field of a unit survives the outbox (JSON, strict); a put unit is on disk before
``put`` returns (a process that dies straight after still left it); while the store fails
(a stand-in that raises StoreError, and a real PostgreSQL store whose network link is cut by a
TCP relay in this test) units queue, then reach the store exactly once each, in the order they
were saved; a station that dies between the store's commit and the outbox's removal stores
nothing twice. The example units are our own invention. PostgreSQL cases skip when the server
is unreachable (fail when CI=true), as ``tests/store_support.py`` describes.
"""

from __future__ import annotations

import contextlib
import dataclasses
import json
import math
import socket
import subprocess
import sys
import threading
from datetime import UTC, datetime, timedelta, timezone
from pathlib import Path

import pytest
from sqlalchemy import text
from sqlalchemy.engine import make_url
from store_support import require_postgres, store_location, synthetic_unit, temporary_schema

from acquire.errors import StoreError
from acquire.production.outbox import (
    Outbox,
    RecordKeeper,
    default_outbox_path,
    unit_from_json,
    unit_to_json,
)
from acquire.store import MeasurementRecord, UnitRecord, open_store


def _full_unit() -> UnitRecord:
    """A unit whose every field differs from its default (checked below)."""
    india = timezone(timedelta(hours=5, minutes=30))
    return UnitRecord(
        serial="[red]DC-0042 \"quoted\" 'single' \\ 测试 🧲",
        outcome="conditional pass",
        measurements=(
            MeasurementRecord(
                "Ls", 3.441e-4, "H", 1e4, 3.357e-4, 3.523e-4, "pass", 2.0e-6, 3.337e-4, 3.543e-4
            ),
            MeasurementRecord(
                "Rdc", 4.97, "ohm", None, 4.70, 5.20, "conditional pass", math.inf, 4.653, 5.247
            ),
            MeasurementRecord("Q", math.nan, "", 1e5, 30.0, None, "fail", None, 30.0, None),
            MeasurementRecord("X", -math.inf, "ohm", 1e6, None, None, "fail", bias_current=2.5),
        ),  # fmt: skip
        lot="LOT-7\nsecond line",
        attempt=3,
        bin="2%",
        station="bench-3",
        operator="A. Operator",
        plan_id=4,
        reference_set_id=5,
        meter_id=6,
        fixture_id=7,
        started_at=datetime(2026, 5, 4, 13, 30, 1, 123456, tzinfo=india),
        finished_at=datetime(2026, 5, 4, 8, 0, 22, 5, tzinfo=UTC),
        notes="retest after re-seating",
        attempt_id="1b4e28ba-2fa1-41d2-883f-0016d3cca427",
        reference_override="references 9 h old; approved",
        temperature=23.4,
        check_acknowledgement_id=7,
    )


def _same(a: UnitRecord, b: UnitRecord) -> None:
    for f in dataclasses.fields(UnitRecord):
        if f.name != "measurements":
            x, y = getattr(a, f.name), getattr(b, f.name)
            assert x == y and type(x) is type(y), f.name
    assert len(a.measurements) == len(b.measurements)
    for x, y in zip(a.measurements, b.measurements, strict=True):
        assert x.same_as(y), (x, y)
    if a.started_at is not None and b.started_at is not None:
        assert a.started_at.utcoffset() == b.started_at.utcoffset()


def test_every_field_of_a_unit_survives_the_outbox(tmp_path):
    unit = _full_unit()
    bare = UnitRecord(serial="", outcome="")
    for f in dataclasses.fields(UnitRecord):
        assert getattr(unit, f.name) != getattr(bare, f.name), f"example leaves {f.name} default"
    for f in dataclasses.fields(MeasurementRecord):
        assert {getattr(m, f.name) for m in unit.measurements} - {None, ""}, f.name

    def refuse(token: str) -> None:
        raise AssertionError(f"not strict JSON: {token}")

    json.loads(unit_to_json(unit), parse_constant=refuse)
    with Outbox(tmp_path / "box.db") as box:
        box.put(unit)
        box.put(bare)
    with Outbox(tmp_path / "box.db") as box:
        back = box.pending()
    assert [u.attempt_id for u in back] == [unit.attempt_id, bare.attempt_id]
    _same(back[0], unit)
    _same(back[1], bare)


def test_a_record_of_an_unknown_form_is_refused_not_trimmed():
    data = json.loads(unit_to_json(_full_unit()))
    data["unit"]["humidity"] = 40.0
    with pytest.raises(StoreError, match="cannot be read"):
        unit_from_json(json.dumps(data))
    data = json.loads(unit_to_json(_full_unit()))
    data["format"] = 99
    with pytest.raises(StoreError, match="format 99"):
        unit_from_json(json.dumps(data))


_PUT_AND_DIE = """
import os, sys
from acquire.production.outbox import Outbox
from acquire.store import UnitRecord
box = Outbox(sys.argv[1])
for i in range(3):
    box.put(UnitRecord(serial=f"S{i}", outcome="pass"))
os._exit(0)  # no close, no clean-up: as if the station died
"""


def test_a_put_unit_is_on_disk_before_put_returns(tmp_path):
    path = tmp_path / "box.db"
    done = subprocess.run(
        [sys.executable, "-c", _PUT_AND_DIE, str(path)], capture_output=True, text=True, timeout=60
    )
    assert done.returncode == 0, done.stderr
    with Outbox(path) as box:
        assert [u.serial for u in box.pending()] == ["S0", "S1", "S2"]
        assert box.count() == 3
        row = box._conn.execute("PRAGMA journal_mode").fetchone()  # type: ignore[union-attr]
        assert row[0] == "wal"
        assert box._conn.execute("PRAGMA synchronous").fetchone()[0] == 2  # type: ignore[union-attr]


def test_put_twice_keeps_one_and_remove_is_by_attempt(tmp_path):
    with Outbox(tmp_path / "box.db") as box:
        a, b = UnitRecord(serial="A", outcome="pass"), UnitRecord(serial="B", outcome="fail")
        box.put(a)
        box.put(b)
        box.put(dataclasses.replace(a, outcome="fail"))
        assert [(u.serial, u.outcome) for u in box.pending()] == [("A", "pass"), ("B", "fail")]
        box.remove(a.attempt_id)
        box.remove(a.attempt_id)
        assert [u.serial for u in box.pending()] == ["B"] and box.count() == 1
    with pytest.raises(StoreError, match="does not exist"):
        Outbox(tmp_path / "missing" / "box.db")
    box.close()
    with pytest.raises(StoreError, match="closed"):
        box.count()


class FlakyStore:
    """A real store behind a switch: while ``down``, save_unit raises StoreError as a store
    does when its database is unreachable. Records every attempt id it committed."""

    def __init__(self, store) -> None:
        self.store = store
        self.down = False
        self.committed: list[str] = []
        self.refused = 0

    def save_unit(self, unit: UnitRecord) -> bool:
        if self.down:
            self.refused += 1
            raise StoreError("saving a unit failed in store test: connection refused (simulated)")
        new = self.store.save_unit(unit)
        if new:
            self.committed.append(unit.attempt_id)
        return new


def _stored_ids(store) -> list[str]:
    """Attempt ids as the store holds them, in the order the rows were written."""
    with store.engine.connect() as conn:
        rows = conn.execute(text("SELECT attempt_id FROM units ORDER BY id")).scalars().all()
    return list(rows)


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request, tmp_path):
    (tmp_path / "db").mkdir()
    with (
        store_location(request.param, tmp_path / "db") as (url, schema),
        open_store(url, schema=schema) as s,
    ):
        yield s


def test_units_queue_while_the_store_fails_then_arrive_once_in_order(store, tmp_path):
    flaky = FlakyStore(store)
    units = [synthetic_unit(i, lot="LOT-O") for i in range(9)]
    keeper = RecordKeeper(flaky, Outbox(tmp_path / "box.db"))
    assert keeper.save(units[0]) is True and keeper.waiting == 0
    flaky.down = True
    assert [keeper.save(u) for u in units[1:5]] == [False] * 4
    assert keeper.waiting == 4 and "connection refused" in keeper.last_error
    assert flaky.refused == 4  # a queued unit is not tried ahead of the older ones
    assert keeper.flush() == 0 and keeper.waiting == 4
    flaky.down = False
    assert keeper.save(units[5]) is True and keeper.waiting == 0 and keeper.last_error == ""
    assert keeper.flush() == 0
    for u in units[6:]:
        assert keeper.save(u) is True
    want = [u.attempt_id for u in units]
    assert flaky.committed == want
    assert _stored_ids(store) == want
    for u in units:
        assert store.load_unit(u.attempt_id).measurements == u.measurements
    keeper.outbox.close()


def test_waiting_units_outlive_the_station(store, tmp_path):
    flaky = FlakyStore(store)
    flaky.down = True
    units = [synthetic_unit(i, lot="LOT-R") for i in range(3)]
    first = RecordKeeper(flaky, Outbox(tmp_path / "box.db"))
    assert [first.save(u) for u in units] == [False] * 3
    first.outbox.close()  # the station is switched off with units waiting
    flaky.down = False
    again = RecordKeeper(flaky, Outbox(tmp_path / "box.db"))
    assert again.waiting == 3 and "connection refused" in again.last_error
    assert again.flush() == 3 and again.waiting == 0
    assert _stored_ids(store) == [u.attempt_id for u in units]
    again.outbox.close()


class Crash(BaseException):
    """The station dying at a chosen moment (not an Exception: nothing catches it)."""


class DiesAfterCommit(Outbox):
    """An outbox whose removal of unit ``dies_at`` never happens: the station dies right after
    the store committed that unit."""

    dies_at = ""

    def remove(self, attempt_id: str) -> None:
        if attempt_id == self.dies_at:
            raise Crash()
        super().remove(attempt_id)


def test_a_crash_between_commit_and_removal_stores_nothing_twice(store, tmp_path):
    units = [synthetic_unit(i, lot="LOT-C") for i in range(4)]
    dying = RecordKeeper(store, DiesAfterCommit(tmp_path / "box.db"))
    dying.outbox.dies_at = units[1].attempt_id  # type: ignore[attr-defined]
    assert dying.save(units[0]) is True
    with pytest.raises(Crash):
        dying.save(units[1])
    dying.outbox.close()
    assert _stored_ids(store) == [units[0].attempt_id, units[1].attempt_id]
    restarted = RecordKeeper(store, Outbox(tmp_path / "box.db"))
    assert restarted.waiting == 1  # the committed unit is still waiting: it is written again
    assert restarted.save(units[2]) is True and restarted.waiting == 0
    assert restarted.save(units[3]) is True
    with store.engine.connect() as conn:
        counts = conn.execute(
            text("SELECT attempt_id, COUNT(*) FROM units GROUP BY attempt_id")
        ).all()
        measurements = conn.execute(text("SELECT COUNT(*) FROM measurements")).scalar_one()
    assert sorted(counts) == sorted((u.attempt_id, 1) for u in units)
    assert measurements == sum(len(u.measurements) for u in units)
    assert _stored_ids(store) == [u.attempt_id for u in units]
    restarted.outbox.close()


def test_an_unexpected_error_leaves_the_unit_in_the_outbox(tmp_path):
    class Broken:
        def save_unit(self, unit):
            raise RuntimeError("a bug in the store")

    keeper = RecordKeeper(Broken(), Outbox(tmp_path / "box.db"))
    unit = synthetic_unit(0)
    with pytest.raises(RuntimeError):
        keeper.save(unit)
    assert [u.attempt_id for u in keeper.outbox.pending()] == [unit.attempt_id]
    keeper.outbox.close()


class Relay:
    """A TCP relay between the store and the PostgreSQL server: ``cut()`` drops every open
    connection and turns new ones away (a pulled network cable); ``mend()`` lets them through."""

    def __init__(self, host: str, port: int) -> None:
        self.target = (host, port)
        self.listener = socket.create_server(("127.0.0.1", 0))
        self.port = self.listener.getsockname()[1]
        self.up = True
        self.open: list[socket.socket] = []
        self.lock = threading.Lock()
        threading.Thread(target=self._accept, daemon=True).start()

    def _accept(self) -> None:
        while True:
            try:
                client, _ = self.listener.accept()
            except OSError:
                return
            with self.lock:
                if not self.up:
                    client.close()
                    continue
                server = socket.create_connection(self.target)
                self.open += [client, server]
            for a, b in ((client, server), (server, client)):
                threading.Thread(target=self._pump, args=(a, b), daemon=True).start()

    @staticmethod
    def _pump(a: socket.socket, b: socket.socket) -> None:
        try:
            while data := a.recv(65536):
                b.sendall(data)
        except OSError:
            pass
        for s in (a, b):
            with contextlib.suppress(OSError):
                s.shutdown(socket.SHUT_RDWR)

    def cut(self) -> None:
        with self.lock:
            self.up = False
            for s in self.open:
                with contextlib.suppress(OSError):
                    s.shutdown(socket.SHUT_RDWR)
                s.close()
            self.open = []

    def mend(self) -> None:
        with self.lock:
            self.up = True

    def close(self) -> None:
        self.cut()
        self.listener.close()


def test_a_postgresql_store_cut_off_and_back(tmp_path):
    url = require_postgres()
    real = make_url(url)
    relay = Relay(real.host or "127.0.0.1", real.port or 5432)
    relayed = real.set(host="127.0.0.1", port=relay.port).render_as_string(hide_password=False)
    units = [synthetic_unit(i, lot="LOT-P") for i in range(6)]
    try:
        with temporary_schema(url) as schema, open_store(relayed, schema=schema) as store:
            keeper = RecordKeeper(store, Outbox(tmp_path / "box.db"))
            assert keeper.save(units[0]) is True
            relay.cut()
            assert [keeper.save(u) for u in units[1:4]] == [False] * 3
            assert keeper.waiting == 3 and keeper.last_error
            relay.mend()
            assert keeper.save(units[4]) is True and keeper.waiting == 0
            assert keeper.save(units[5]) is True
            keeper.outbox.close()
            assert _stored_ids(store) == [u.attempt_id for u in units]
    finally:
        relay.close()


def test_default_outbox_path(tmp_path, monkeypatch):
    monkeypatch.chdir(tmp_path)
    store_file = tmp_path / "line" / "results.db"
    assert default_outbox_path(f"sqlite:///{store_file}", "bench-3") == (
        tmp_path / "line" / "acquire-outbox-bench-3.db"
    )
    assert default_outbox_path("results.db", "bench-3") == Path("acquire-outbox-bench-3.db")
    pg = "postgresql://postgres@db.example:5432/line"
    assert default_outbox_path(pg, "bench-3") == tmp_path / "acquire-outbox-bench-3.db"
    assert default_outbox_path(pg, "") == tmp_path / "acquire-outbox.db"
    odd = [default_outbox_path(pg, name).name for name in ("a/b", "a_b", "a b", "../x")]
    assert len(set(odd)) == 4
    assert all("/" not in n and " " not in n and not n.startswith(".") for n in odd)
