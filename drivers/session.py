"""A VISA session to one meter: terminations, timeouts, no TCP stalls, bounded reconnect.

:class:`Session` wraps one pyvisa resource opened with the backend the user chose (``@py`` for
pyvisa-py, ``path.yaml@sim`` for pyvisa-sim, or the path of a system VISA library).

Two things matter on a LAN socket. First, a small message written right after another one waits
for the peer's delayed ACK (about 40 ms per point with pyvisa-py), so the session switches
Nagle's algorithm off on the underlying socket (pyvisa-py does not honour the VISA attribute for
it) and the driver sends each point as one compound message. Second, a connection can drop or
a reply can fail to come: :meth:`Session.call` then closes, waits, reopens, lets the owner
re-apply its configuration (``on_reopen``) and repeats the operation if it is safe to repeat,
a bounded number of times, before raising :class:`ConnectionLost` naming the resource and what
was tried. After a timeout the old connection is closed (and the device cleared where the
backend cannot reconnect), and before every query any bytes already waiting are discarded, so
a late reply is never taken as the answer to a later query. On a pyvisa-py socket a query is
sent and its reply line read on the socket itself (:mod:`drivers.rawsocket`): the same system
calls as a bare pyvisa-py query, and a connection closed even in the middle of a reply is
noticed at once.
"""

from __future__ import annotations

import contextlib
import logging
import math
import time
from collections.abc import Callable
from typing import TypeVar

import pyvisa
from pyvisa import constants
from pyvisa.errors import VisaIOError
from pyvisa.resources import MessageBasedResource

from drivers import rawsocket, retry, scpi
from drivers.errors import ConnectionLost, MeterTimeout, ReplyError
from drivers.failure_text import (
    ADVICE_OPEN,
    open_failure,
    resource_problem,
    simulated_elsewhere,
    socket_hint,
)

T = TypeVar("T")
log = logging.getLogger(__name__)

#: Failures after which reconnecting and repeating may help.
TRANSIENT = retry.TRANSIENT


class Session:
    """One connection to a meter through pyvisa.

    Times are in seconds. ``on_reopen`` is called after every successful reconnect, before the
    failed operation is repeated; it should restore the meter's configuration with plain
    :meth:`write`/:meth:`query` calls (not :meth:`call`).
    """

    def __init__(
        self,
        resource: str,
        backend: str = "@py",
        *,
        write_termination: str = "\n",
        read_termination: str = "\n",
        encoding: str = "ascii",
        timeout: float = 5.0,
        open_timeout: float = 5.0,
        retries: int = 2,
        retry_wait: float = 0.2,
        on_reopen: Callable[[], None] | None = None,
    ) -> None:
        self.resource_name = resource
        self.backend = backend
        self.write_termination = write_termination
        self.read_termination = read_termination
        self.encoding = encoding
        self.timeout = timeout
        self.open_timeout = open_timeout
        self.retries = retries
        self.retry_wait = retry_wait
        self.on_reopen = on_reopen
        self.reconnects = 0
        self._manager: pyvisa.ResourceManager | None = None
        self._resource: MessageBasedResource | None = None
        self._socket: rawsocket.RawSocket | None = None
        self._visa_timeout: float | None = None
        self._suspect = False
        self._term = read_termination.encode(encoding)
        self._termchar = self._term[-1:]

    # -- opening and closing -------------------------------------------------------------------

    def open(self) -> Session:
        """Open the resource (raises :class:`ConnectionLost` if it cannot be reached)."""
        problem = resource_problem(self.resource_name)
        if problem is not None:
            raise ConnectionLost(problem)
        try:
            if self._manager is None:
                self._manager = pyvisa.ResourceManager(self.backend)
            self._check_simulated(self._manager)
            resource = self._manager.open_resource(
                self.resource_name,
                read_termination=self.read_termination,
                write_termination=self.write_termination,
                encoding=self.encoding,
                open_timeout=int(self.open_timeout * 1000),
            )
        except ConnectionLost:
            raise
        except Exception as exc:  # noqa: BLE001 - pyvisa-py raises bare Exception on refusal
            self._resource = None
            raise ConnectionLost(open_failure(self.resource_name, self.backend, exc)) from exc
        if not isinstance(resource, MessageBasedResource):
            self._resource = None
            resource.close()
            raise ConnectionLost(f"{self.resource_name}: not message-based; use INSTR or SOCKET")
        self._resource = resource
        self._visa_timeout = None
        self._suspect = False
        self._find_socket()
        if self._socket is not None:
            self._check_connected(self._socket)
        return self

    def _check_simulated(self, manager: pyvisa.ResourceManager) -> None:
        """pyvisa-sim opens any resource and answers nothing for one its profile lacks."""
        if not self.backend.endswith("@sim"):
            return
        try:
            known = tuple(manager.list_resources("?*"))
        except VisaIOError:
            known = ()
        problem = simulated_elsewhere(self.resource_name, self.backend, known)
        if problem is not None:
            raise ConnectionLost(problem)

    def _check_connected(self, sock: rawsocket.RawSocket) -> None:
        """pyvisa-py reports success on a refused connection; ask the socket itself."""
        try:
            sock.check_connected()
        except OSError as exc:
            self._drop_resource()
            raise ConnectionLost(
                f"cannot open {self.resource_name}: {exc.strerror or exc}"
                f"{socket_hint(self.resource_name)}. {ADVICE_OPEN}"
            ) from exc

    def close(self) -> None:
        """Close the resource; safe to call twice.

        The resource manager is left open: pyvisa shares one per VISA library in a process, and
        closing it would close every other resource the program has open through it.
        """
        self._drop_resource()
        self._manager = None

    @property
    def is_open(self) -> bool:
        return self._resource is not None

    @property
    def suspect(self) -> bool:
        """True while a reply may still be on its way (after a timeout or a reply cut short);
        the next message then reopens the connection first."""
        return self._suspect

    @property
    def nodelay(self) -> bool | None:
        """Whether Nagle's algorithm is off on the underlying socket (None: no socket seen)."""
        return None if self._socket is None else self._socket.nodelay

    def _drop_resource(self) -> None:
        if self._resource is not None:
            with contextlib.suppress(VisaIOError, OSError, AttributeError):
                self._resource.close()
        self._resource = None
        self._socket = None
        self._suspect = False

    def _find_socket(self) -> None:
        """Find the raw socket under a pyvisa-py SOCKET session (Nagle off); for a system VISA
        library set the standard VISA attribute instead."""
        self._socket = None
        resource = self._resource
        if resource is None or not self.resource_name.upper().endswith("SOCKET"):
            return
        self._socket = rawsocket.find(resource)
        if self._socket is None:
            try:
                resource.set_visa_attribute(constants.ResourceAttribute.tcpip_nodelay, True)
            except (VisaIOError, NotImplementedError, KeyError, AttributeError) as exc:
                log.debug("could not set TCP_NODELAY on %s: %s", self.resource_name, exc)

    # -- talking ---------------------------------------------------------------------------------

    def write(self, message: str) -> None:
        """Send one message (the write termination is added)."""
        if self._suspect:
            self.reconnect(attempt=0)
        resource = self._require()
        self._discard_stale()
        try:
            if self._socket is not None:
                self._socket.send((message + self.write_termination).encode(self.encoding))
            else:
                resource.write(message)
        except VisaIOError as exc:
            raise self._visa_failure(exc, message) from exc
        except OSError as exc:
            raise ConnectionLost(
                f"{self.resource_name}: sending {message[:40]!r} failed: {exc}"
            ) from exc

    def query(self, message: str, timeout: float | None = None) -> str:
        """Send ``message`` and return the reply text without its termination."""
        raw = self._ask(message, timeout)
        self._suspect = False
        return self._decode(raw[: len(raw) - len(self._term)] if raw.endswith(self._term) else raw)

    def query_block(
        self, message: str, timeout: float | None = None
    ) -> tuple[str, bytes, int, int, str]:
        """Send ``message`` and read a reply holding one IEEE 488.2 definite-length block.

        Returns ``(prefix, raw, offset, length, suffix)``: the text before and after the block
        (other queries' replies in a compound message), the raw reply and where the block's
        data lies in it. The block's length, not a line feed, says where its data ends.
        """
        raw = bytearray(self._ask(message, timeout))
        begin, offset, length = scpi.find_block(raw)
        if length < 0:
            raise ReplyError(
                f"{self.resource_name}: indefinite-length blocks (#0) are not supported"
            )
        end = offset + length
        if len(raw) < end + len(self._term):
            raw += self._read_bytes(end + len(self._term) - len(raw))
        while not raw.endswith(self._term):
            raw += self._read_rest()
        self._suspect = False
        return (
            self._decode(bytes(raw[:begin])),
            bytes(raw),
            offset,
            length,
            self._decode(bytes(raw[end : len(raw) - len(self._term)])),
        )

    def clear(self) -> None:
        """Discard whatever the meter has sent that nobody asked for (device clear if possible)."""
        if self._resource is None:
            return
        with contextlib.suppress(VisaIOError, OSError, NotImplementedError):
            self._resource.clear()
        self._discard_stale()

    # -- reconnecting ----------------------------------------------------------------------------

    def call(self, what: retry.Described, action: Callable[[], T], idempotent: bool = True) -> T:
        """Run ``action``; after a drop, timeout or garbled reply reconnect and repeat it.

        ``what`` names the operation in messages (text, or a function giving it when needed).
        An action that is not idempotent is not repeated: the session reconnects (so it stays
        usable) and the failure is raised.
        See :func:`drivers.retry.call`.
        """
        return retry.call(self, what, action, idempotent)

    def reconnect(self, attempt: int = 1) -> None:
        """Close, wait ``retry_wait * attempt`` seconds, reopen and call ``on_reopen``.

        Also done, without waiting, before the next message after a timeout or a reply cut
        short, even when the caller did not retry: a reply still on its way belongs to the old
        connection and is never read as the answer to a later query.
        """
        if self._resource is not None:
            self.clear_after_failure()
        self._drop_resource()
        time.sleep(self.retry_wait * attempt)
        self.open()
        if self._socket is None:
            self._drain_queued()
        self.reconnects += 1
        if self.on_reopen is not None:
            self.on_reopen()

    def clear_after_failure(self) -> None:
        """On backends without a socket, ask for a device clear before letting go."""
        if self._socket is None and self._resource is not None:
            with contextlib.suppress(VisaIOError, OSError, NotImplementedError):
                self._resource.clear()

    def _drain_queued(self, wait: float = 0.05, limit: int = 100) -> None:
        """Without a socket to look at, read and discard what the device still holds."""
        self._set_timeout(wait)
        for _ in range(limit):
            try:
                stale = self._require().read_raw()
            except (VisaIOError, OSError):
                return
            log.info("%s: discarded a reply nobody asked for: %r", self.resource_name, stale[:40])

    # -- internals -----------------------------------------------------------------------------

    def _require(self) -> MessageBasedResource:
        if self._resource is None:
            raise ConnectionLost(f"{self.resource_name} is not open")
        return self._resource

    def _set_timeout(self, seconds: float) -> None:
        seconds = max(seconds, 0.001)
        if self._visa_timeout != seconds:
            self._require().timeout = seconds * 1000.0
            self._visa_timeout = seconds

    def _ask(self, message: str, timeout: float | None) -> bytes:
        seconds = self.timeout if timeout is None else timeout
        deadline = time.monotonic() + seconds
        self.write(message)
        self._suspect = True  # until the whole reply is read, whatever interrupts us
        # What is left of the timeout, rounded up to an eighth of it, for pyvisa's reads (of
        # this reply, or of the rest of a binary block): the VISA attribute then changes only
        # when a reply was slow to start, not on every query.
        step = seconds / 8
        self._set_timeout(math.ceil(max(deadline - time.monotonic(), 0.0) / step) * step)
        if self._socket is not None and self._termchar:
            return self._read_line(deadline, message, seconds)
        try:
            return self._require().read_raw()
        except VisaIOError as exc:
            raise self._visa_failure(exc, message, seconds) from exc
        except OSError as exc:
            raise ConnectionLost(f"{self.resource_name}: reading the reply failed: {exc}") from exc

    def _read_rest(self) -> bytes:
        try:
            return self._require().read_raw()
        except VisaIOError as exc:
            raise self._visa_failure(exc, "(rest of a reply)") from exc
        except OSError as exc:
            raise ConnectionLost(f"{self.resource_name}: reading the reply failed: {exc}") from exc

    def _read_bytes(self, count: int) -> bytes:
        try:
            return self._require().read_bytes(count)
        except VisaIOError as exc:
            raise self._visa_failure(exc, "(rest of a binary block)") from exc
        except OSError as exc:
            raise ConnectionLost(f"{self.resource_name}: reading the reply failed: {exc}") from exc

    def _read_line(self, deadline: float, message: str, seconds: float) -> bytes:
        """On a raw socket, the reply line read on the socket itself; a closed connection is
        noticed at once, also in the middle of a reply."""
        assert self._socket is not None
        try:
            line = self._socket.read_line(self._termchar, deadline)
        except OSError as exc:
            raise ConnectionLost(
                f"{self.resource_name}: {exc} while answering {message[:40]!r}"
            ) from exc
        if line is None:
            raise MeterTimeout(
                f"{self.resource_name}: no reply to {message[:40]!r} within {seconds:g} s"
            )
        return line

    def _discard_stale(self) -> None:
        """Throw away bytes that arrived unasked (a late reply); notice a closed connection."""
        if self._socket is None:
            return
        try:
            stale = self._socket.discard_pending()
        except OSError as exc:
            raise ConnectionLost(f"{self.resource_name}: {exc}") from exc
        if stale:
            log.warning("%s: discarded %d bytes nobody asked for", self.resource_name, stale)

    def _visa_failure(self, exc: VisaIOError, message: str, seconds: float | None = None):
        if exc.error_code == constants.StatusCode.error_timeout:
            waited = f" within {seconds:g} s" if seconds is not None else ""
            return MeterTimeout(f"{self.resource_name}: no reply to {message[:40]!r}{waited}")
        return ConnectionLost(f"{self.resource_name}: {exc}")

    def _decode(self, raw: bytes) -> str:
        try:
            return raw.decode(self.encoding)
        except UnicodeDecodeError:
            raise ReplyError(
                f"{self.resource_name}: the reply is not {self.encoding} text "
                f"(starting {raw[:25]!r})"
            ) from None
