"""The TCP socket under a pyvisa-py SOCKET session, for what VISA does not offer.

pyvisa-py keeps the socket of a ``TCPIP::...::SOCKET`` resource as ``interface`` of its session
object and the bytes read past a termination in ``_pending_buffer``. Through them
:class:`RawSocket` switches Nagle's algorithm off (pyvisa-py does not honour the VISA attribute
for it, and without it a small message sent right after another waits about 40 ms for the
peer's delayed ACK), confirms that the connection was really made (pyvisa-py reports success
for a refused one), notices a closed connection as soon as it happens instead of after the
timeout, throws away bytes nobody asked for, and sends messages and hands over reply lines
without a pass through pyvisa-py's layers each time (per query: one ``select`` for bytes
nobody asked for, one ``send``, one ``select`` for the reply and one ``recv``, the same calls
a bare pyvisa-py query makes).
Other backends have no such socket; :func:`find` returns None for them.
"""

from __future__ import annotations

import os
import select
import socket
import time
from typing import Protocol


class BufferedSession(Protocol):
    """What :class:`RawSocket` uses of a pyvisa-py session: its read-ahead buffer."""

    @property
    def _pending_buffer(self) -> bytearray: ...


class Closed(OSError):
    """The peer closed the connection."""


class RawSocket:
    """The socket and read buffer of one pyvisa-py session."""

    def __init__(self, sock: socket.socket, session: BufferedSession) -> None:
        self._sock = sock
        self._session = session

    @property
    def nodelay(self) -> bool:
        """Whether Nagle's algorithm is off."""
        return bool(self._sock.getsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY))

    def check_connected(self) -> None:
        """Raise :class:`OSError` if the connection attempt failed."""
        code = self._sock.getsockopt(socket.SOL_SOCKET, socket.SO_ERROR)
        if code:
            raise OSError(code, os.strerror(code))
        self._sock.getpeername()

    def read_line(self, termchar: bytes, deadline: float) -> bytes | None:
        """The reply up to and including the first ``termchar`` (one byte); None if it has not
        come whole by ``deadline`` (:func:`time.monotonic`).

        Bytes past ``termchar`` stay in pyvisa-py's read buffer, where its own reads find them.
        Raises :class:`Closed` as soon as the peer closes the connection, even in the middle of
        a reply.
        """
        pending = self._session._pending_buffer
        while True:
            end = pending.find(termchar) + 1
            if end:
                line = bytes(pending[:end])
                del pending[:end]
                return line
            wait = max(deadline - time.monotonic(), 0.0)
            if not select.select([self._sock], [], [], wait)[0]:
                return None
            chunk = self._sock.recv(65536)
            if not chunk:
                raise Closed("the meter closed the connection")
            pending.extend(chunk)

    def send(self, data: bytes) -> None:
        """Send all of ``data`` (the socket blocks until the kernel has taken it, as pyvisa-py's
        own write does)."""
        self._sock.sendall(data)

    def discard_pending(self) -> int:
        """Throw away everything already received; return how many bytes that was.

        Raises :class:`Closed` if the peer has closed the connection.
        """
        count = len(self._session._pending_buffer)
        self._session._pending_buffer.clear()
        while select.select([self._sock], [], [], 0)[0]:
            chunk = self._sock.recv(65536)
            if not chunk:
                raise Closed("the meter closed the connection")
            count += len(chunk)
        return count

    # -- private -------------------------------------------------------------------------------

    #: The connected TCP socket (owned by pyvisa-py; never closed here).
    _sock: socket.socket
    #: pyvisa-py's session object, whose ``_pending_buffer`` holds bytes read ahead.
    _session: BufferedSession


def find(resource) -> RawSocket | None:
    """The raw socket of a pyvisa-py SOCKET ``resource`` with Nagle switched off, or None."""
    sessions = getattr(getattr(resource, "visalib", None), "sessions", {})
    raw = sessions.get(getattr(resource, "session", None))
    sock = getattr(raw, "interface", None)
    if raw is None or not isinstance(sock, socket.socket):
        return None
    if not isinstance(getattr(raw, "_pending_buffer", None), bytearray):
        return None
    sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
    return RawSocket(sock, raw)
