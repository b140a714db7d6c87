"""The simulated meter's TCP server: line-terminated SCPI over a socket, several clients at once.

Each connection gets a :class:`~drivers.simulator.instrument.Session`; its messages (ending in LF,
CR LF accepted) run one after another, while other connections are served meanwhile. Replies end
in LF. Sockets have TCP_NODELAY set so short replies leave at once.
"""

from __future__ import annotations

import asyncio
import contextlib
import logging
import socket
from collections.abc import Callable

import numpy as np

from drivers.simulator.commands import Commands
from drivers.simulator.faults import Faults
from drivers.simulator.instrument import Instrument, Session
from drivers.simulator.source_commands import SourceCommands

LOG = logging.getLogger("drivers.simulator")
#: Longest message accepted (a full 2000-point list fits with room to spare).
MESSAGE_LIMIT = 1 << 20
LOOPBACK = ("127.0.0.1", "::1", "localhost")


def resource_string(host: str, port: int) -> str:
    """The VISA resource of a raw-socket instrument at ``host:port``."""
    return f"TCPIP0::{host}::{port}::SOCKET"


class SimulatorServer:
    """Serves one :class:`Instrument` on ``host:port`` (port 0 picks a free one).

    ``source=True`` serves the simulated DC current source wired to the same DUT instead of the
    meter (:mod:`.source_commands`); the meter's faults never fire on its connections.
    """

    def __init__(
        self, instrument: Instrument, host: str = "127.0.0.1", port: int = 0, source: bool = False
    ) -> None:
        self.instrument = instrument
        self.source = source
        self.commands: Commands | SourceCommands = (
            SourceCommands(instrument) if source else Commands(instrument)
        )
        self.faults = Faults(np.random.default_rng(0)) if source else instrument.faults
        self.host = host
        self.port = port
        self._server: asyncio.Server | None = None
        self._clients: set[asyncio.Task] = set()

    @property
    def resource(self) -> str:
        """The VISA resource string clients open."""
        return resource_string(self.host, self.port)

    async def start(self) -> None:
        """Start listening; afterwards ``port`` is the port actually bound."""
        self._server = await asyncio.start_server(
            self._client, self.host, self.port, limit=MESSAGE_LIMIT
        )
        self.port = self._server.sockets[0].getsockname()[1]

    async def close(self) -> None:
        """Stop listening, abort any measurement and close every connection."""
        if self._server is not None:
            self._server.close()
        task = None if self.source else self.instrument.task
        if not self.source:
            self.instrument.abort()
        if task is not None:
            await asyncio.wait({task})
        for task in list(self._clients):
            task.cancel()
        if self._clients:
            await asyncio.wait(self._clients)
        if self._server is not None:
            await self._server.wait_closed()

    async def serve_forever(
        self, on_ready: Callable[[SimulatorServer], None] | None = None
    ) -> None:
        """Start, call ``on_ready(self)``, and serve until cancelled."""
        await self.start()
        if on_ready is not None:
            on_ready(self)
        try:
            await asyncio.Event().wait()
        finally:
            await self.close()

    async def _client(self, reader: asyncio.StreamReader, writer: asyncio.StreamWriter) -> None:
        task = asyncio.current_task()
        assert task is not None
        self._clients.add(task)
        sock = writer.get_extra_info("socket")
        if sock is not None:
            sock.setsockopt(socket.IPPROTO_TCP, socket.TCP_NODELAY, 1)
        host, port = writer.get_extra_info("peername")[:2]
        peer = f"{host}:{port}"
        session = Session(peer)
        LOG.info("client %s connected", peer)
        try:
            await self._serve(session, reader, writer)
        except (ConnectionError, ValueError, asyncio.CancelledError) as exc:
            LOG.info("client %s: connection ended (%s)", peer, type(exc).__name__)
        finally:
            writer.close()
            with contextlib.suppress(ConnectionError, asyncio.CancelledError):
                await writer.wait_closed()
            self._clients.discard(task)
            self.instrument.bias.connection_closed(self.instrument.dut)
            LOG.info("client %s disconnected", peer)

    async def _serve(
        self, session: Session, reader: asyncio.StreamReader, writer: asyncio.StreamWriter
    ) -> None:
        """Run the client's messages in order until it closes (or a fault drops it).

        A client may send several messages before reading any reply: they wait in the socket
        and their replies come back in order. An overlong message (``ValueError``) ends the
        connection.
        """
        faults = self.faults
        while True:
            line = await reader.readline()
            if not line:
                return
            drop, errors = faults.message_arrived()
            if drop:
                LOG.info("client %s: dropping the connection (fault)", session.peer)
                return
            for code in errors:
                session.status.push(code)
            text = line.rstrip(b"\n").rstrip(b"\r").decode("latin-1")
            try:
                reply = await self.commands.execute(session, text)
            except Exception as exc:  # noqa: BLE001 - a simulator bug must not kill the session
                LOG.exception("client %s: internal error on %r", session.peer, text)
                session.status.push(-200, f"Execution error; internal simulator error: {exc}")
                reply = None
            out = None if reply is None else faults.reply(reply)
            faults.settle()
            if reply is None:
                continue
            if out is None:
                LOG.info("client %s: withholding a reply (fault)", session.peer)
                continue
            writer.write(out + b"\n")
            await writer.drain()
