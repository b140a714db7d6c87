"""The store as the publisher's outbox: each station's units after its publish position, in
order, and a position that only moves forward; on SQLite and PostgreSQL, and after upgrading a
store of the previous revision."""

from __future__ import annotations

import hashlib
from dataclasses import replace

import pytest
from jsonschema import Draft202012Validator
from mqtt_support import unit_schema
from store_support import store_location, synthetic_unit
from test_store_migration import _change, fill, make_revision

from acquire.publish.message import unit_message
from acquire.store import open_store


@pytest.fixture(params=["sqlite", "postgresql"])
def place(request, tmp_path):
    with store_location(request.param, tmp_path) as found:
        yield found


def test_units_wait_per_station_in_store_order_until_marked(place):
    url, schema = place
    with open_store(url, schema=schema) as store:
        plan = store.record_plan("checks = []\n", "plan <x>")
        units = [
            replace(synthetic_unit(i), station="st/1" if i % 3 else "st-2", plan_id=plan)
            for i in range(9)
        ]
        for unit in units:
            store.save_unit(unit)
        mine = [u.attempt_id for u in units if u.station == "st/1"]
        assert store.publish_position("st/1") == 0  # a new station has published nothing
        waiting = store.units_to_publish("st/1", limit=4)
        assert [o.unit.attempt_id for o in waiting] == mine[:4]
        ids = [o.unit_id for o in waiting]
        assert ids == sorted(ids)
        assert (
            waiting[0].context.plan_name == "plan <x>" and len(waiting[0].context.plan_hash) == 64
        )
        assert waiting[0].unit.measurements == units[1].measurements  # the record as stored
        store.mark_published("st/1", ids[1])
        assert [o.unit.attempt_id for o in store.units_to_publish("st/1")] == mine[2:]
        store.mark_published("st/1", ids[0])  # never backwards
        assert store.publish_position("st/1") == ids[1]
        assert store.unpublished_count("st/1") == len(mine) - 2
        assert store.unpublished_count("st-2") == 3  # the other station is untouched
        assert store.stations_with_units() == ["st-2", "st/1"]
        last = store.units_to_publish("st/1")[-1].unit_id
        store.mark_published("st/1", last)
        assert store.units_to_publish("st/1") == [] and store.unpublished_count("st/1") == 0


def test_a_store_of_the_previous_revision_publishes_its_units_after_the_upgrade(place):
    url, schema = place
    make_revision(url, schema, "0008")
    fill(url, schema)
    real = hashlib.sha256(b"Ls at 1 kHz\n").hexdigest()  # the example's "p" * 64 is no SHA-256
    _change(url, schema, f"UPDATE plans SET hash = '{real}'")
    check = Draft202012Validator(unit_schema(), format_checker=Draft202012Validator.FORMAT_CHECKER)
    with open_store(url, schema=schema) as store:
        assert store.migrated_from == "0008"
        waiting = store.units_to_publish("bench-1", limit=1000)
        assert len(waiting) == store.unpublished_count("bench-1") > 0
        for item in waiting:
            message = unit_message(item.unit, item.context)
            check.validate(message)
            assert message["plan"] == {"name": "demo plan", "hash": real}
            assert message["fixture"] == "bench-leads"
            assert message["reference_set"]["name"] == "bench-leads morning"
