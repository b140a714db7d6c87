"""Publishing to the real Mosquitto on 127.0.0.1:1883: `acquire publish` sends what waits, in
the store's order, and nothing twice; the station's retained status reaches a late subscriber;
the will says "stopped"; hostile names stay unchanged in the JSON and one level in the topics.
Each test publishes under a topic prefix of its own. The messages are checked with the
``jsonschema`` library against the shipped schema, topics with paho-mqtt's matcher."""

from __future__ import annotations

import io
import json
import time
from dataclasses import replace
from datetime import UTC, datetime

import pytest
from jsonschema import Draft202012Validator
from mqtt_support import (
    PORT,
    Listener,
    free_port,
    require_broker,
    status_schema,
    unique_prefix,
    unit_schema,
)
from paho.mqtt.client import topic_matches_sub
from rich.console import Console
from store_support import synthetic_unit

from acquire.cli import main
from acquire.demo import capture, introduce, run_demo, sweep
from acquire.demo_lot import production_lot
from acquire.production.station_watch import RUNNING, STOPPED, StationState
from acquire.publish.link import Link
from acquire.publish.message import encode, lost_message
from acquire.publish.publisher import Publisher
from acquire.publish.sending import client_id
from acquire.publish.target import StationTopics, parse_publish_url
from acquire.store import open_store

HOSTILE_STATION = "<b>st</b>/+#1"
HOSTILE_LINE = "line <script>window.pwned=1</script> #2"
T0 = datetime(2026, 3, 2, 8, 0, tzinfo=UTC)


@pytest.fixture
def broker() -> str:
    require_broker()
    return f"mqtt://127.0.0.1:{PORT}/{unique_prefix()}"


def check_records(messages: list[dict]) -> None:
    check = Draft202012Validator(unit_schema(), format_checker=Draft202012Validator.FORMAT_CHECKER)
    for message in messages:
        check.validate(message)


def stored_units(url: str, count: int, stations: tuple[str, ...]) -> dict[str, list[str]]:
    """``count`` units spread over ``stations``; each station's attempt ids in store order."""
    order: dict[str, list[str]] = {s: [] for s in stations}
    with open_store(url) as store:
        for i in range(count):
            station = stations[i % len(stations)]
            unit = replace(synthetic_unit(i, lot="<i>lot</i>/#"), station=station)
            store.save_unit(unit)
            order[station].append(unit.attempt_id)
    return order


def test_acquire_publish_sends_every_waiting_unit_once_in_store_order(broker, tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'store.db'}"
    order = stored_units(url, 12, (HOSTILE_STATION, "st-2"))
    prefix = parse_publish_url(broker).prefix
    listener = Listener(PORT, f"{prefix}/#")
    try:
        args = ["publish", "--store", url, "--publish", broker, "--line", HOSTILE_LINE]
        assert main(args) == 0
        assert "12 units published" in capsys.readouterr().out
        assert listener.wait_for(lambda s: len(s.received("/unit")) >= 12)
        for station, ids in order.items():
            topics = StationTopics.of(parse_publish_url(broker), HOSTILE_LINE, station)
            got = [json.loads(p) for t, p, _ in listener.received() if t == topics.unit]
            assert [m["attempt_id"] for m in got] == ids  # all, once each, in store order
            assert {m["station"] for m in got} == {station}  # names unchanged in the JSON
            assert {m["lot"] for m in got} == {"<i>lot</i>/#"}
            assert topic_matches_sub(f"{prefix}/+/+/unit", topics.unit)
        check_records(listener.units())
        assert main(args) == 0  # nothing waits: nothing is sent again
        assert "0 units published" in capsys.readouterr().out
        time.sleep(0.5)
        assert len(listener.received("/unit")) == 12
    finally:
        listener.close()


def test_a_bad_publish_url_stops_the_station_before_any_unit(sim, tmp_path, capsys):
    from acquire.production.plan_file import example_plan_path

    args = ["station", "--resource", sim.resource, "--store", f"sqlite:///{tmp_path / 's.db'}",
            "--plan", str(example_plan_path()), "--lot", "L", "--operator", "kim",
            "--station", "st-1", "--outbox", str(tmp_path / "outbox.db")]  # fmt: skip
    assert main([*args, "--publish", "mqtt://127.0.0.1/a/#"]) == 2
    assert "--publish 'mqtt://127.0.0.1/a/#'" in capsys.readouterr().err
    with open_store(f"sqlite:///{tmp_path / 's.db'}") as store:
        assert store.list_lots() == []


def test_an_unreachable_broker_fails_the_command_and_keeps_the_units_waiting(tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'store.db'}"
    stored_units(url, 3, ("st-1",))
    nobody = f"mqtt://127.0.0.1:{free_port()}/x"
    assert main(["publish", "--store", url, "--publish", nobody]) == 2
    err = capsys.readouterr().err
    assert err.count("\n") == 1 and "cannot reach the MQTT broker" in err
    with open_store(url) as store:
        assert store.unpublished_count("st-1") == 3
    assert main(["publish", "--store", url, "--publish", "mqtts://127.0.0.1/x"]) == 2
    assert "TLS" in capsys.readouterr().err


def state(station: str, kind: str, tested: int) -> StationState:
    return StationState(
        station, kind, "" if kind == RUNNING else "end of input", "L-7", "plan", "ab" * 32,
        "ana", "meter", "jig", tested, tested, 0, "", "", T0, datetime.now(UTC),
    )  # fmt: skip


def test_the_publisher_sends_units_and_a_retained_status_a_late_subscriber_reads(broker, tmp_path):
    url = f"sqlite:///{tmp_path / 'store.db'}"
    target = parse_publish_url(broker)
    publisher = Publisher(target, url, "line-1", HOSTILE_STATION, open_store)
    early = Listener(PORT, f"{target.prefix}/#")
    try:
        started = time.monotonic()
        publisher.changed(state(HOSTILE_STATION, RUNNING, 0))
        order = stored_units(url, 5, (HOSTILE_STATION,))
        for tested in range(1, 51):  # a burst of states: at most one status a second goes out
            publisher.changed(state(HOSTILE_STATION, RUNNING, tested))
        assert early.wait_for(lambda s: len(s.received("/unit")) == 5)
        publisher.changed(state(HOSTILE_STATION, STOPPED, 5))
        publisher.close()
        last = lambda s: json.loads(s.received("/status")[-1][1])["state"]  # noqa: E731
        assert early.wait_for(lambda s: last(s) == STOPPED)  # the final one is never held back
        statuses = [json.loads(p) for _, p, _ in early.received("/status")]
        assert len(statuses) <= time.monotonic() - started + 2
        check = Draft202012Validator(status_schema())
        for sent in statuses:  # as they left over the wire, against the published schema
            check.validate(sent)
        assert (publisher.left, publisher.sent, publisher.farewell()) == (0, 5, "")
        assert [m["attempt_id"] for m in early.units()] == order[HOSTILE_STATION]
    finally:
        early.close()
    late = Listener(PORT, publisher.topics.status)
    try:
        assert late.wait_for(lambda s: s.received())
        ((topic, payload, retained),) = late.received()
        status = json.loads(payload)
        assert retained and topic == publisher.topics.status
        assert (status["state"], status["reason"], status["tested"]) == (STOPPED, "end of input", 5)
        assert (status["station"], status["line"]) == (HOSTILE_STATION, "line-1")
    finally:
        late.close()


def test_a_connection_that_drops_leaves_the_will_stopped_connection_lost(broker):
    target = parse_publish_url(broker)
    topics = StationTopics.of(target, "line-1", "st-9")
    will = (topics.status, encode(lost_message(state("st-9", RUNNING, 2), "line-1")))
    link = Link(target, client_id(), will)
    link.open()
    assert link.send([(topics.status, encode({"state": RUNNING}), True)], 5.0) == 1
    link._client.socket().close()  # gone without a DISCONNECT, as a crashed station
    listener = Listener(PORT, topics.status)
    try:
        stopped = lambda s: s.received() and json.loads(s.received()[-1][1])["state"] == STOPPED  # noqa: E731
        assert listener.wait_for(stopped)
        status = json.loads(listener.received()[-1][1])
        assert (status["reason"], status["tested"], status["station"]) == (
            "connection lost", 2, "st-9",
        )  # fmt: skip
    finally:
        listener.close()


def test_the_demo_publishes_its_whole_lot(broker, tmp_path):
    url = f"sqlite:///{tmp_path / 'demo.db'}"
    prefix = parse_publish_url(broker).prefix
    listener = Listener(PORT, f"{prefix}/#")
    try:
        console = Console(file=io.StringIO(), width=200)
        steps = [introduce, capture, sweep, production_lot]  # the lot, not the report's pictures
        run_demo(url, live=False, console=console, points=21, steps=steps, publish=(broker, "line"))
        with open_store(url) as store:
            ids = list(store.lot_units("DEMO-LOT-1").attempt_id)
        assert len(ids) == 31  # 30 serials, one retested after a meter fault
        assert listener.wait_for(lambda s: len(s.units()) >= len(ids), 10)
        assert [m["attempt_id"] for m in listener.units()] == ids
        check_records(listener.units())
        status = json.loads(listener.received("/status")[-1][1])
        assert (status["state"], status["tested"], status["line"]) == (STOPPED, 30, "line")
        assert "31 units published" in console.file.getvalue()
    finally:
        listener.close()


def test_a_bad_publish_url_stops_the_demo_before_it_measures(tmp_path, capsys):
    db = tmp_path / "demo.db"
    assert main(["demo", "--no-live", "--store", f"sqlite:///{db}", "--publish", "mqtt://h"]) == 2
    assert "no topic prefix" in capsys.readouterr().err
    assert not db.exists()


def test_with_the_broker_away_the_units_wait_and_the_farewell_says_how_many(tmp_path, monkeypatch):
    import acquire.publish.publisher as publishing

    monkeypatch.setattr(publishing, "CLOSE_PATIENCE", 0.5)  # the station would wait 10 s
    url = f"sqlite:///{tmp_path / 'store.db'}"
    target = parse_publish_url(f"mqtt://127.0.0.1:{free_port()}/away")
    publisher = Publisher(target, url, "line-1", "st-1", open_store)
    publisher.changed(state("st-1", RUNNING, 0))
    stored_units(url, 4, ("st-1",))
    publisher.changed(state("st-1", STOPPED, 4))
    publisher.close()
    assert (publisher.sent, publisher.left) == (0, 4)
    note = publisher.farewell()
    assert note.startswith("4 units of station st-1 wait to be published")
    assert "cannot reach the MQTT broker" in note and "acquire publish" in note
    with open_store(url) as store:
        assert store.publish_position("st-1") == 0
