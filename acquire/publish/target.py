"""Where results are published: the broker URL and the topics of a station.

A URL is ``mqtt://[user[:password]@]host[:port]/<prefix>`` (port 1883 when not given); the
prefix may span several topic levels (``plant-2/coils``). A station publishes under
``<prefix>/<line>/<station>/``: ``unit`` (each unit record, QoS 1, not retained) and ``status``
(the station's state, QoS 1, retained, and the connection's will).

A line's or station's name becomes one topic level: ``%``, ``/``, ``+``, ``#`` and control
characters (U+0000 to U+001F, U+007F to U+009F) are percent-encoded as the UTF-8 bytes of the
character (``/`` becomes ``%2F``), so a name can neither add a level nor act as a wildcard
(MQTT 3.1.1, section 4.7: ``/`` separates levels, ``+`` and ``#`` are wildcards and must not
appear in a topic name; U+0000 is not allowed in a UTF-8 string, section 1.5.3). The JSON
payload carries every name unchanged.
"""

from __future__ import annotations

from dataclasses import dataclass
from urllib.parse import unquote, urlsplit

from acquire.errors import InputError

#: The broker port when the URL gives none (IANA's registered port for MQTT without TLS).
DEFAULT_PORT = 1883
#: The longest topic name MQTT allows, in UTF-8 bytes (MQTT 3.1.1, section 4.7.3).
MAX_TOPIC_BYTES = 65535

_ENCODED = frozenset("%/+#") | {chr(c) for c in range(0x20)} | {chr(c) for c in range(0x7F, 0xA0)}


def topic_level(name: str) -> str:
    """``name`` as one topic level: ``%``, ``/``, ``+``, ``#`` and control characters
    percent-encoded (``urllib.parse.unquote`` gives the name back)."""
    return "".join(
        "".join(f"%{b:02X}" for b in ch.encode("utf-8")) if ch in _ENCODED else ch for ch in name
    )


@dataclass(frozen=True)
class PublishTarget:
    """A broker and the topic prefix to publish under."""

    host: str
    port: int
    prefix: str
    username: str | None = None
    password: str | None = None

    @property
    def shown(self) -> str:
        """The URL without its password."""
        user = f"{self.username}@" if self.username else ""
        return f"mqtt://{user}{self.host}:{self.port}/{self.prefix}"


def parse_publish_url(url: str) -> PublishTarget:
    """The :class:`PublishTarget` of ``url``; :class:`~acquire.errors.InputError` (one line,
    saying what to give) when it is not ``mqtt://host[:port]/<prefix>``."""
    example = "give mqtt://host[:port]/<prefix>, e.g. mqtt://127.0.0.1:1883/factory"
    try:
        parts = urlsplit(url.strip())
        port = parts.port
    except ValueError as exc:
        raise InputError(f"--publish {url!r}: {exc}; {example}") from None
    if parts.scheme == "mqtts":
        raise InputError(
            f"--publish {url!r}: TLS (mqtts://) is not supported yet; publish to a broker on the "
            "local network with mqtt://, or through a TLS tunnel of your own"
        )
    if parts.scheme != "mqtt" or not parts.hostname:
        raise InputError(f"--publish {url!r} is not an MQTT URL: {example}")
    if "?" in url or "#" in url:  # urlsplit would drop an empty query or fragment unseen
        raise InputError(f"--publish {url!r}: no '?' or '#' parts are used; {example}")
    prefix = unquote(parts.path).strip("/")
    if not prefix:
        raise InputError(f"--publish {url!r} has no topic prefix after the host; {example}")
    levels = prefix.split("/")
    bad = {ch for ch in prefix if ch in "+#" or ch in _ENCODED - {"/", "%"}}
    if bad or "" in levels or prefix.startswith("$"):
        raise InputError(
            f"--publish {url!r}: the topic prefix {prefix!r} must be plain levels joined by '/', "
            "without '+', '#', control characters, empty levels or a leading '$'"
        )
    return PublishTarget(
        host=parts.hostname,
        port=DEFAULT_PORT if port is None else port,
        prefix=prefix,
        username=unquote(parts.username) if parts.username else None,
        password=unquote(parts.password) if parts.password else None,
    )


@dataclass(frozen=True)
class StationTopics:
    """The topics of one station on one line under a target's prefix."""

    unit: str
    status: str

    @classmethod
    def of(cls, target: PublishTarget, line: str, station: str) -> StationTopics:
        base = f"{target.prefix}/{topic_level(line)}/{topic_level(station)}"
        if len(base.encode("utf-8")) + len("/status") > MAX_TOPIC_BYTES:
            raise InputError(
                f"the topic for line {line[:40]!r}... and station {station[:40]!r}... is longer "
                f"than MQTT's {MAX_TOPIC_BYTES} bytes: use shorter names"
            )
        return cls(unit=f"{base}/unit", status=f"{base}/status")
