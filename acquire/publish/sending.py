"""Units from the store's outbox to the broker, in order, each acknowledged before it counts.

The store keeps each station's publish position (:mod:`acquire.store.publishing`). A batch of
the units after it is published at QoS 1 in id order; once the broker has acknowledged the first
*n* of them, the position moves to the *n*-th. A connection that drops mid-batch leaves the rest
for the next connection, which starts again after the position: a unit the broker received but
whose acknowledgement was lost (or whose position update did not reach the store) goes out
again, so receivers drop repeats by ``attempt_id``. Dropping repeats keeps the store's order.
"""

from __future__ import annotations

import uuid
from typing import Any

from acquire.publish.link import Link
from acquire.publish.message import encode, unit_message
from acquire.publish.target import StationTopics

#: Units read from the store and published per batch.
BATCH = 100
#: Seconds to wait for a batch's acknowledgements before the connection counts as stuck.
ACK_TIMEOUT = 10.0


def client_id() -> str:
    """A fresh MQTT client id of 23 characters from 0-9a-z (MQTT 3.1.1, section 3.1.3.1: every
    server accepts these)."""
    return "acq" + uuid.uuid4().hex[:20]


def send_waiting(store: Any, link: Link, topics: StationTopics, station: str) -> tuple[int, bool]:
    """Publish ``station``'s units that wait in ``store``; returns (how many the broker
    acknowledged, True when none waits any more). Stops early when the connection drops."""
    sent = 0
    while link.alive:
        waiting = store.units_to_publish(station, BATCH)
        if not waiting:
            return sent, True
        messages = [(topics.unit, encode(unit_message(o.unit, o.context)), False) for o in waiting]
        done = link.send(messages, ACK_TIMEOUT)
        if done:
            store.mark_published(station, waiting[done - 1].unit_id)
            sent += done
        if done < len(waiting):
            break
    return sent, False
