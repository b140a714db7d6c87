"""Station states in the store, the watcher that writes them, and the read-only opening the line
page uses.

The read-only checks rely on the databases' own refusals: SQLite's ``mode=ro`` URI parameter
("The database is opened for read-only access", sqlite.org/uri.html; a write fails with
SQLITE_READONLY, "attempt to write a readonly database") and PostgreSQL's
``default_transaction_read_only`` (PostgreSQL documentation, 20.11.1: a read-only transaction
refuses INSERT, "cannot execute INSERT in a read-only transaction").
"""

from __future__ import annotations

import os
import socket
import threading
from dataclasses import replace
from datetime import UTC, datetime, timedelta

import pytest
from store_support import store_location
from test_store_migration import _raw, make_revision

from acquire.errors import StoreError
from acquire.production.state_keeper import StateKeeper
from acquire.production.station_watch import STOPPED, StationState
from acquire.store import open_store
from acquire.store.read_only import open_read_only

T0 = datetime(2026, 5, 4, 6, 0, tzinfo=UTC)
HOSTILE = "<script>window.pwned=1</script> 'x' \"y\" ✓"


def state(**changes) -> StationState:
    base = StationState(
        station=HOSTILE, state="running", reason="", lot="L-1", plan="coil", plan_hash="ab" * 32,
        operator="<b>ana</b>", meter="Maker,Model,1,2", fixture="jig", tested=3, passed=2,
        waiting=0, references="", check_standard="", started_at=T0, updated_at=T0,
    )  # fmt: skip
    return replace(base, **changes)


@pytest.fixture(params=["sqlite", "postgresql"])
def place(request, tmp_path):
    with store_location(request.param, tmp_path) as found:
        yield found


def test_a_state_is_kept_whole_and_replaced_only_by_a_newer_one(place):
    url, schema = place
    with open_store(url, schema=schema) as store:
        first = state()
        store.save_station_state(first)
        (kept,) = store.station_states()
        assert {f: getattr(kept, f) for f in first.__dataclass_fields__} == vars(first)
        assert (kept.host, kept.pid) == (socket.gethostname(), os.getpid())
        newer = state(tested=4, state="blocked", reason="references too old", updated_at=T0
                      + timedelta(seconds=1))  # fmt: skip
        store.save_station_state(newer)
        store.save_station_state(state(tested=1, updated_at=T0 - timedelta(seconds=5)))
        store.save_station_state(state(station="other", lot="L-2"))
        rows = {s.station: s for s in store.station_states()}
        assert set(rows) == {HOSTILE, "other"}
        assert (rows[HOSTILE].tested, rows[HOSTILE].state) == (4, "blocked")


def test_a_store_at_0008_gains_an_empty_station_states_table(place):
    url, schema = place
    make_revision(url, schema, "0008")
    with open_store(url, schema=schema) as store:
        assert store.station_states() == []
        store.save_station_state(state())
        assert len(store.station_states()) == 1


def test_the_read_only_store_is_refused_every_write_by_the_database(place):
    url, schema = place
    open_store(url, schema=schema).close()
    shown = url if schema is None else f"{url}?schema={schema}"
    with open_read_only(shown) as store:
        assert store.station_states() == []
        with pytest.raises(StoreError) as refused:
            store.save_station_state(state())
    words = "readonly database" if schema is None else "read-only transaction"
    assert words in str(refused.value)
    assert _raw(url, schema, "SELECT count(*) FROM station_states") == [(0,)]


def test_the_read_only_opening_never_upgrades_or_creates(tmp_path):
    url = f"sqlite:///{tmp_path / 'old.db'}"
    make_revision(url, None, "0008")
    with pytest.raises(StoreError, match="revision 0008"):
        open_read_only(url)
    assert _raw(url, None, "SELECT version_num FROM alembic_version") == [("0008",)]
    with pytest.raises(StoreError, match="no results store"):
        open_read_only(f"sqlite:///{tmp_path / 'missing.db'}")
    assert not (tmp_path / "missing.db").exists()


class Keeping:
    """A store that keeps the states it is given, or fails while ``away``."""

    def __init__(self) -> None:
        self.saved: list[StationState] = []
        self.away = False
        self.want = 2
        self.beat = threading.Event()  # set once ``want`` states are saved

    def save_station_state(self, given: StationState) -> None:
        if self.away:
            raise StoreError("saving the station's state failed: server gone")
        self.saved.append(given)
        if len(self.saved) >= self.want:
            self.beat.set()


def test_the_keeper_writes_changes_at_once_and_leaves_counts_to_the_heartbeat():
    store = Keeping()
    keeper = StateKeeper(store, heartbeat=3600)
    keeper.changed(state())
    keeper.changed(state(tested=4, passed=3))  # counts alone wait for the heartbeat
    assert [s.tested for s in store.saved] == [3]
    keeper.changed(state(tested=5, operator="bo"))  # who tests is written at once
    assert [(s.tested, s.operator) for s in store.saved][-1] == (5, "bo")
    keeper.changed(state(tested=5, operator="bo", state=STOPPED, reason="end of input"))
    assert store.saved[-1].state == STOPPED
    keeper.close()
    assert len(store.saved) == 3


def test_the_heartbeat_restates_the_newest_state_while_the_station_waits():
    store = Keeping()
    keeper = StateKeeper(store, heartbeat=0.05)
    store.want = 3
    keeper.changed(state(tested=7))
    assert store.beat.wait(10)  # nothing else happened at the station
    keeper.close()
    times = [s.updated_at for s in store.saved]
    assert all(s.tested == 7 for s in store.saved) and times == sorted(times)
    assert len(set(times)) == len(times) and times[0] > T0  # each made when written


def test_a_store_away_is_kept_quiet_and_the_state_written_when_it_is_back():
    store = Keeping()
    keeper = StateKeeper(store, heartbeat=0.05)
    store.away = True
    keeper.changed(state())
    keeper.changed(state(reason="x", state="blocked"))
    assert keeper.failures >= 2 and store.saved == []
    store.want = 1
    store.away = False
    assert store.beat.wait(10)
    assert store.saved[-1].state == "blocked"
    store.away = True
    keeper.changed(state(state=STOPPED))  # the end is tried, quietly, and again on closing
    store.away = False
    keeper.close()
    assert store.saved[-1].state == STOPPED


class Stuck(Keeping):
    """A store whose writes, once ``held`` is set, wait until ``release`` is set."""

    def __init__(self) -> None:
        super().__init__()
        self.held = threading.Event()
        self.entered = threading.Event()
        self.release = threading.Event()

    def save_station_state(self, given: StationState) -> None:
        if self.held.is_set():
            self.entered.set()
            self.release.wait(30)
        super().save_station_state(given)


def test_the_station_never_waits_for_a_heartbeat_write_under_way():
    store = Stuck()
    keeper = StateKeeper(store, heartbeat=0.01)
    keeper.changed(state())
    store.held.set()
    assert store.entered.wait(10)  # the heartbeat thread is inside a write now
    station = threading.Thread(target=keeper.changed, args=(state(state="blocked", reason="x"),))
    station.start()
    station.join(10)
    returned = not station.is_alive()
    store.held.clear()
    store.release.set()
    keeper.close()
    assert returned  # it left its state to the heartbeat rather than wait
    assert store.saved[-1].state == "blocked"
