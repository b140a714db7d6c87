"""The VISA session over pyvisa-py sockets, against a tiny scripted loopback server.

The server here misbehaves on purpose (drops, late replies, unsolicited bytes) in ways the
simulated meter does not, to pin down what the session guarantees.
"""

from __future__ import annotations

import select
import socket
import struct
import threading
import time
from collections.abc import Callable, Iterator
from contextlib import contextmanager

import pytest
from pyvisa import util as visa_util

from drivers.errors import ConnectionLost, MeterTimeout
from drivers.session import Session

#: handler(connection number, line) -> reply bytes, or None for no reply, or "close", or a
#: tuple of those sent one after the other 50 ms apart.
Handler = Callable[[int, bytes], object]


class Loopback:
    """A line-based TCP server on 127.0.0.1 with a scripted handler; one thread per client."""

    def __init__(self, handler: Handler, greeting: bytes = b"") -> None:
        self.handler = handler
        self.greeting = greeting
        self.received: list[tuple[int, bytes]] = []
        self.connections = 0
        self._listener = socket.create_server(("127.0.0.1", 0))
        self._listener.settimeout(0.2)
        self._clients: list[socket.socket] = []
        self._stop = threading.Event()
        self._thread = threading.Thread(target=self._accept, daemon=True)
        self._thread.start()

    @property
    def resource(self) -> str:
        return f"TCPIP0::127.0.0.1::{self._listener.getsockname()[1]}::SOCKET"

    def _accept(self) -> None:
        while not self._stop.is_set():
            try:
                client, _ = self._listener.accept()
            except (TimeoutError, OSError):
                continue
            self.connections += 1
            self._clients.append(client)
            threading.Thread(
                target=self._serve, args=(client, self.connections), daemon=True
            ).start()

    def _serve(self, client: socket.socket, number: int) -> None:
        try:
            client.settimeout(0.2)
            if self.greeting:
                client.sendall(self.greeting)
        except OSError:
            return
        buffer = b""
        while not self._stop.is_set():
            try:
                data = client.recv(65536)
            except TimeoutError:
                continue
            except OSError:
                return
            if not data:
                return
            buffer += data
            while b"\n" in buffer:
                line, buffer = buffer.split(b"\n", 1)
                self.received.append((number, line))
                reply = self.handler(number, line)
                pieces = reply if isinstance(reply, tuple) else (reply,)
                for i, piece in enumerate(pieces):
                    if i:
                        time.sleep(0.05)
                    if piece == "close":
                        client.close()
                        return
                    if piece is not None:
                        try:
                            client.sendall(piece)
                        except OSError:
                            return

    def close(self) -> None:
        self._stop.set()
        self._listener.close()
        for client in self._clients:
            client.close()
        self._thread.join(1.0)


@contextmanager
def loopback(handler: Handler, greeting: bytes = b"") -> Iterator[Loopback]:
    server = Loopback(handler, greeting)
    try:
        yield server
    finally:
        server.close()


def echo(number: int, line: bytes) -> bytes | None:
    return b"ok:" + line + b"\n" if line.endswith(b"?") else None


def session_for(server: Loopback, **kw) -> Session:
    kw.setdefault("timeout", 2.0)
    kw.setdefault("retry_wait", 0.0)
    return Session(server.resource, "@py", **kw).open()


def test_nagle_is_switched_off_on_the_socket():
    with loopback(echo) as server:
        session = session_for(server)
        try:
            assert session.nodelay is True
            assert session.query("A?") == "ok:A?"
        finally:
            session.close()


def test_closed_connection_is_noticed_as_lost_not_as_a_timeout():
    with loopback(lambda n, line: "close") as server:
        session = session_for(server, timeout=30.0)
        try:
            with pytest.raises(ConnectionLost, match="closed the connection"):
                session.query("A?")
        finally:
            session.close()


def test_a_connection_closed_in_the_middle_of_a_reply_is_lost_not_a_timeout():
    with loopback(lambda n, line: (b"1.25E+01,6.2", "close")) as server:
        session = session_for(server, timeout=5.0)
        try:
            with pytest.raises(ConnectionLost, match="closed the connection"):
                session.query("READ?")
        finally:
            session.close()


def test_a_reply_arriving_in_pieces_is_read_whole():
    with loopback(lambda n, line: (b"1.25E+01,", b"6.2E+02;", b"1\n")) as server:
        session = session_for(server)
        try:
            assert session.query("READ?;*OPC?") == "1.25E+01,6.2E+02;1"
        finally:
            session.close()


def test_a_line_sent_after_the_reply_is_never_the_next_answer():
    def two_lines_first(number: int, line: bytes) -> bytes:
        return b"first\nextra\n" if line == b"A?" else b"ok:" + line + b"\n"

    with loopback(two_lines_first) as server:
        session = session_for(server)
        try:
            assert session.query("A?") == "first"
            assert session.query("B?") == "ok:B?"
        finally:
            session.close()


def test_a_query_on_a_socket_waits_twice_as_a_bare_pyvisa_query_does(monkeypatch):
    """One look for bytes nobody asked for (and a closed connection) before sending, one wait
    for the reply: the two selects pyvisa-py's own write and read make (its write waits until
    the socket takes data, its read until the reply comes)."""
    calls = []
    real = select.select

    def counted(*args):
        calls.append(args)
        return real(*args)

    rounds = []
    with loopback(echo) as server:
        session = session_for(server)
        try:
            session.query("A?")
            monkeypatch.setattr(select, "select", counted)
            for _ in range(3):  # a loaded machine can split a reply: one more wait, that round
                calls.clear()
                for i in range(10):
                    assert session.query(f"B{i}?") == f"ok:B{i}?"
                rounds.append(len(calls))
                if rounds[-1] == 20:
                    break
        finally:
            session.close()
    assert min(rounds) == 20, rounds


def test_unasked_bytes_are_discarded_before_a_query():
    with loopback(echo, greeting=b"junk left over\n") as server:
        session = session_for(server)
        try:
            time.sleep(0.05)  # let the greeting arrive
            assert session.query("A?") == "ok:A?"
        finally:
            session.close()


def test_a_late_reply_is_never_the_answer_to_the_next_query():
    def slow_first(number: int, line: bytes) -> bytes:
        if number == 1:
            time.sleep(0.4)  # answers, but after the client gave up
        return b"answer to " + line + b"\n"

    with loopback(slow_first) as server:
        session = session_for(server, timeout=0.1)
        try:
            with pytest.raises(MeterTimeout):
                session.query("FREQ 1;READ?")
            time.sleep(0.5)  # the late reply has been sent by now
            assert session.query("FREQ 2;READ?", timeout=2.0) == "answer to FREQ 2;READ?"
            assert server.connections == 2
        finally:
            session.close()


def test_idempotent_operation_is_repeated_after_a_reconnect():
    def drop_first(number: int, line: bytes):
        return "close" if number == 1 else echo(number, line)

    reopened = []
    with loopback(drop_first) as server:
        session = session_for(server, on_reopen=lambda: reopened.append(True))
        try:
            assert session.call("asking", lambda: session.query("A?")) == "ok:A?"
            assert session.reconnects == 1 and reopened == [True]
            assert [n for n, line in server.received if line == b"A?"] == [1, 2]
        finally:
            session.close()


def test_operation_that_is_not_idempotent_is_not_repeated():
    def drop_first(number: int, line: bytes):
        return "close" if number == 1 else echo(number, line)

    with loopback(drop_first) as server:
        session = session_for(server)
        try:
            with pytest.raises(
                ConnectionLost, match="not repeated because repeating it is not safe"
            ):
                session.call("popping", lambda: session.query("POP?"), idempotent=False)
            assert [line for _, line in server.received] == [b"POP?"]
            assert session.is_open and session.query("B?") == "ok:B?"
        finally:
            session.close()


def test_gives_up_after_a_bounded_number_of_attempts_naming_the_resource():
    with loopback(lambda n, line: "close") as server:
        session = session_for(server, retries=2)
        try:
            with pytest.raises(ConnectionLost) as info:
                session.call("asking", lambda: session.query("A?"))
            message = str(info.value)
            assert server.resource in message and "tried 3 times" in message
            assert server.connections == 3
        finally:
            session.close()


def test_meter_gone_for_good_is_reported_after_trying_to_reopen():
    server = Loopback(lambda n, line: "close")
    session = session_for(server, retries=1, open_timeout=0.5)
    server.close()
    try:
        with pytest.raises(ConnectionLost, match="could not reopen"):
            session.call("asking", lambda: session.query("A?"))
    finally:
        session.close()


def test_unreachable_resource():
    probe = socket.create_server(("127.0.0.1", 0))
    port = probe.getsockname()[1]
    probe.close()
    session = Session(f"TCPIP0::127.0.0.1::{port}::SOCKET", open_timeout=0.5)
    with pytest.raises(ConnectionLost, match=f"cannot open TCPIP0::127.0.0.1::{port}::SOCKET"):
        session.open()


def test_binary_block_after_an_acknowledgement_with_line_feeds_in_the_data():
    values = [struct.unpack(">d", b"\x3f\xf0\x0a\x0a\x0a\x0a\x0a\x0a")[0], 2.0, -3.5]
    block = visa_util.to_ieee_block(values, "d", True)
    assert b"\n" in block

    def blocky(number: int, line: bytes) -> bytes:
        return b"1;" + block + b";1\n"

    with loopback(blocky) as server:
        session = session_for(server)
        try:
            prefix, raw, offset, length, suffix = session.query_block("*OPC?;FETC?;*OPC?")
            assert (prefix, suffix) == ("1;", ";1")
            assert raw[offset : offset + length] == block[-length:]
            assert session.query_block("*OPC?;FETC?;*OPC?")[0] == "1;"  # nothing left behind
        finally:
            session.close()
