"""Helpers for the MQTT publishing tests (``tests/test_publish_*.py``). Not part of the program.

- :func:`require_broker` is the shared Mosquitto on 127.0.0.1:1883: the calling test is skipped
  when it cannot be reached, or fails when the environment has ``CI=true``.
- :class:`Listener` subscribes to a topic filter and keeps every message it receives, in order.
- :class:`PrivateBroker` runs a Mosquitto of the test's own on a free port (so a test may stop
  and restart it); its sessions survive a restart (``persistence true``), so a listener with a
  kept session (``clean_session=False``) misses nothing published while it reconnects.
- :func:`unique_prefix` is a topic prefix no other test uses.
"""

from __future__ import annotations

import json
import os
import shutil
import socket
import subprocess
import tempfile
import threading
import time
import uuid
from pathlib import Path
from typing import Any

import paho.mqtt.client as mqtt
import pytest

HOST, PORT = "127.0.0.1", 1883
MOSQUITTO = "/usr/sbin/mosquitto"
ROOT = Path(__file__).resolve().parents[1]
SCHEMA_FILE = ROOT / "acquire" / "publish" / "unit-record.schema.json"
STATUS_SCHEMA_FILE = ROOT / "acquire" / "publish" / "station-status.schema.json"


def in_ci() -> bool:
    return os.environ.get("CI") == "true"


def reachable(host: str, port: int, timeout: float = 1.0) -> bool:
    try:
        with socket.create_connection((host, port), timeout=timeout):
            return True
    except OSError:
        return False


def require_broker() -> str:
    """``host:port`` of the shared broker; skip the test when it is down (fail it in CI)."""
    if not reachable(HOST, PORT):
        why = f"no MQTT broker answers at {HOST}:{PORT}"
        if in_ci():
            pytest.fail(f"{why}; CI=true requires the MQTT tests to run")
        pytest.skip(f"{why}; start Mosquitto to run this test")
    return f"{HOST}:{PORT}"


def unique_prefix() -> str:
    return f"acquire-test/{uuid.uuid4().hex[:12]}"


def unit_schema() -> dict[str, Any]:
    return json.loads(SCHEMA_FILE.read_text(encoding="utf-8"))


def status_schema() -> dict[str, Any]:
    return json.loads(STATUS_SCHEMA_FILE.read_text(encoding="utf-8"))


class Listener:
    """Subscribes to ``topic_filter`` at QoS 1 on ``host:port`` and keeps (topic, payload, retain)
    of every message, in arrival order. ``client_id`` with ``keep_session`` asks the broker to
    keep the session (and queue messages for it) while the listener is away."""

    def __init__(
        self,
        port: int,
        topic_filter: str,
        client_id: str = "",
        keep_session: bool = False,
    ) -> None:
        self.messages: list[tuple[str, bytes, bool]] = []
        self.subscribed = threading.Event()
        self._lock = threading.Lock()
        self._filter = topic_filter
        client = mqtt.Client(
            mqtt.CallbackAPIVersion.VERSION2,
            client_id=client_id,
            clean_session=not keep_session,
            protocol=mqtt.MQTTv311,
        )
        client.reconnect_delay_set(min_delay=0.1, max_delay=0.3)
        client.on_connect = self._on_connect
        client.on_subscribe = lambda *a: self.subscribed.set()
        client.on_message = self._on_message
        self._client = client
        client.connect(HOST, port, keepalive=10)
        client.loop_start()
        assert self.subscribed.wait(5), f"could not subscribe to {topic_filter} on port {port}"

    def _on_connect(self, client: Any, userdata: Any, flags: Any, reason: Any, props: Any) -> None:
        if not reason.is_failure:
            client.subscribe(self._filter, qos=1)

    def _on_message(self, client: Any, userdata: Any, message: Any) -> None:
        with self._lock:
            self.messages.append((message.topic, bytes(message.payload), bool(message.retain)))

    def received(self, suffix: str = "") -> list[tuple[str, bytes, bool]]:
        with self._lock:
            return [m for m in self.messages if m[0].endswith(suffix)]

    def units(self) -> list[dict[str, Any]]:
        return [json.loads(payload) for _, payload, _ in self.received("/unit")]

    def wait_for(self, test: Any, timeout: float = 15.0) -> bool:
        deadline = time.monotonic() + timeout
        while time.monotonic() < deadline:
            if test(self):
                return True
            time.sleep(0.05)
        return test(self)

    def close(self) -> None:
        self._client.disconnect()
        self._client.loop_stop()


def free_port() -> int:
    with socket.socket() as s:
        s.bind((HOST, 0))
        return int(s.getsockname()[1])


class PrivateBroker:
    """A Mosquitto of the test's own on a free loopback port, in ``folder``."""

    def __init__(self, folder: Path) -> None:
        if not Path(MOSQUITTO).exists():
            if in_ci():
                pytest.fail(f"{MOSQUITTO} is missing; CI=true requires the broker outage test")
            pytest.skip(f"{MOSQUITTO} is missing (Debian package mosquitto)")
        self.port = free_port()
        self.folder = folder
        # Started as root, Mosquitto runs as its own user: its sessions go to a folder that user
        # can reach and write (pytest's folders are private to the test's user).
        self.kept = Path(tempfile.mkdtemp(prefix="acquire-mqtt-"))
        self.kept.chmod(0o777)
        self.config = folder / "mosquitto.conf"
        self.config.write_text(
            f"listener {self.port} {HOST}\nallow_anonymous true\npersistence true\n"
            f"persistence_location {self.kept}/\nautosave_interval 1\n",
            encoding="utf-8",
        )
        self.proc: subprocess.Popen[bytes] | None = None

    def start(self) -> None:
        log = (self.folder / "mosquitto.log").open("ab")
        self.proc = subprocess.Popen(
            [MOSQUITTO, "-c", str(self.config)], stdout=log, stderr=subprocess.STDOUT
        )
        deadline = time.monotonic() + 10
        while not reachable(HOST, self.port, 0.2):
            assert self.proc.poll() is None, (self.folder / "mosquitto.log").read_text()
            assert time.monotonic() < deadline, "the private broker did not start"
            time.sleep(0.05)

    def stop(self) -> None:
        """End the broker (SIGTERM: it saves its sessions and closes every connection)."""
        if self.proc is not None and self.proc.poll() is None:
            self.proc.terminate()
            self.proc.wait(10)
        self.proc = None

    def __enter__(self) -> PrivateBroker:
        self.start()
        return self

    def __exit__(self, *exc: object) -> None:
        self.stop()
        shutil.rmtree(self.kept, ignore_errors=True)
