"""One connection to an MQTT broker (paho-mqtt, MQTT 3.1.1), driven by its owner's thread.

Nothing runs in the background: :meth:`Link.send` and :meth:`Link.idle` turn paho's network
loop themselves, so a message is known to be delivered exactly when :meth:`Link.send` says so
(the broker's PUBACK for QoS 1, MQTT 3.1.1 section 4.3.2). A connection that drops is finished:
its owner makes a new :class:`Link` and sends again from the store, so no message waits in
paho's memory to be sent later out of order. The session is clean (nothing is kept at the broker
between connections).
"""

from __future__ import annotations

import time
from collections.abc import Sequence
from typing import Any

import paho.mqtt.client as mqtt

from acquire.errors import PublishError
from acquire.publish.target import PublishTarget

#: Seconds between keep-alive pings; the broker publishes the will after 1.5 times this silence.
KEEPALIVE = 15
#: Seconds to wait for the TCP connection and for the broker's CONNACK.
CONNECT_TIMEOUT = 5.0
#: QoS 1 messages sent before their acknowledgements come back (paho keeps the rest queued).
IN_FLIGHT = 100


class Link:
    """A connection to ``target`` as ``client_id``, with ``will`` (topic, payload; published
    retained at QoS 1 by the broker if the connection drops without a goodbye)."""

    def __init__(
        self, target: PublishTarget, client_id: str, will: tuple[str, bytes] | None = None
    ) -> None:
        client = mqtt.Client(
            mqtt.CallbackAPIVersion.VERSION2,
            client_id=client_id,
            clean_session=True,
            protocol=mqtt.MQTTv311,
            reconnect_on_failure=False,
        )
        client.connect_timeout = CONNECT_TIMEOUT
        client.max_inflight_messages_set(IN_FLIGHT)
        if target.username:
            client.username_pw_set(target.username, target.password)
        if will is not None:
            client.will_set(will[0], will[1], qos=1, retain=True)
        client.on_connect = self._on_connect
        client.on_disconnect = self._on_disconnect
        self._client = client
        self._target = target
        self._answer: Any = None
        self._alive = False

    def _on_connect(self, client: Any, userdata: Any, flags: Any, reason: Any, props: Any) -> None:
        self._answer = reason
        self._alive = not reason.is_failure

    def _on_disconnect(self, client: Any, userdata: Any, flags: Any, reason: Any, p: Any) -> None:
        self._alive = False

    @property
    def alive(self) -> bool:
        """True while the connection is up."""
        return self._alive

    def open(self) -> None:
        """Connect and wait for the broker's answer; :class:`PublishError` when it cannot."""
        where = f"the MQTT broker at {self._target.host}:{self._target.port}"
        try:
            self._client.connect(self._target.host, self._target.port, keepalive=KEEPALIVE)
        except (OSError, ValueError) as exc:
            raise PublishError(f"cannot reach {where} ({exc}): is it running?") from None
        deadline = time.monotonic() + CONNECT_TIMEOUT
        while self._answer is None and time.monotonic() < deadline:
            if self._client.loop(timeout=0.05) != mqtt.MQTT_ERR_SUCCESS:
                break
        if self._answer is None or self._answer.is_failure:
            why = "no answer" if self._answer is None else str(self._answer)
            self.close()
            raise PublishError(f"{where} did not accept the connection ({why})")

    def send(self, messages: Sequence[tuple[str, bytes, bool]], timeout: float) -> int:
        """Publish each (topic, payload, retain) at QoS 1, in order; wait up to ``timeout`` s for
        the broker's acknowledgements. Returns how many of the first messages were
        acknowledged (all of them, or fewer when the connection dropped or time ran out)."""
        sent = []
        for topic, payload, retain in messages:
            info = self._client.publish(topic, payload, qos=1, retain=retain)
            if info.rc != mqtt.MQTT_ERR_SUCCESS and info.rc != mqtt.MQTT_ERR_QUEUE_SIZE:
                self._alive = False
                break
            sent.append(info)
        deadline = time.monotonic() + timeout
        while self._alive and time.monotonic() < deadline:
            if all(info.is_published() for info in sent):
                break
            if self._client.loop(timeout=0.05) != mqtt.MQTT_ERR_SUCCESS:
                self._alive = False
        done = 0
        for info in sent:
            if not info.is_published():
                break
            done += 1
        return done

    def idle(self, seconds: float) -> None:
        """Keep the connection alive (pings, acknowledgements) for about ``seconds``."""
        if self._alive and self._client.loop(timeout=seconds) != mqtt.MQTT_ERR_SUCCESS:
            self._alive = False

    def close(self) -> None:
        """Say goodbye (the broker then does not publish the will) and drop the connection."""
        self._client.disconnect()
        self._client.loop(timeout=0.05)
        self._alive = False
