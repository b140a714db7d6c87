"""The driver under faults and odd replies: identity, numbers, the error queue, reconnects.

Outside references (all from memory):
- IEEE 488.2-1992 clause 10.14: ``*IDN?`` answers the same four fields every time it is asked.
- IEEE 488.2-1992 clause 7.7.2 (<DECIMAL NUMERIC PROGRAM DATA>) and clauses 8.7.2 to 8.7.4
  (<NR1>, <NR2>, <NR3 NUMERIC RESPONSE DATA>): a number is an optional sign, ASCII digits with
  at most one decimal point, and an optional exponent ``E``/``e``, optional sign, ASCII digits;
  white space (7.4.1.2) may surround it and stand around the ``E`` in program data. Nothing else
  (no underscores, no non-ASCII digits, no words such as ``inf`` or ``nan``).
- SCPI-99 volume 2, 21.8: error/event numbers lie in [-32768, 32767]; -108 is "Parameter not
  allowed", -222 "Data out of range".
- IEEE 754 binary64: the largest finite value is 1.7976931348623157e308 (``sys.float_info.max``).
- VISA resource strings (IVI VPP-4.3): a raw LAN socket is ``TCPIP[board]::host::port::SOCKET``.
"""

from __future__ import annotations

import socket
import sys
import threading
from collections.abc import Callable, Iterator
from contextlib import contextmanager

import numpy as np
import pytest
import pyvisa

from acquire.cli import main
from acquire.units import format_si
from drivers import scpi
from drivers.dialect_file import load_dialect
from drivers.errors import ConnectionLost, InstrumentError, ReplyError
from drivers.meter import ImpedanceMeter
from drivers.session import Session
from drivers.simulator import running

# -- a scripted meter speaking the shipped "simulated" dialect -----------------------------------


class ScriptedMeter:
    """A line-based TCP meter on 127.0.0.1 whose readings are chosen by the test.

    ``pair`` is the text of one reading pair (e.g. ``"1_0,2_0"``); its error queue is shared by
    every connection, as on a meter with one queue. ``on_read(connection)`` may return
    ``"close"`` to drop the connection instead of answering a reading.
    """

    def __init__(self, pair: str, on_read: Callable[[int], str | None] | None = None) -> None:
        self.pair = pair
        self.on_read = on_read
        self.queue: list[str] = []
        self.received: list[tuple[int, str]] = []
        self.connections = 0
        self._listener = socket.create_server(("127.0.0.1", 0))
        self._listener.settimeout(0.2)
        self._stop = threading.Event()
        self._clients: list[socket.socket] = []
        threading.Thread(target=self._accept, daemon=True).start()

    @property
    def resource(self) -> str:
        return f"TCPIP0::127.0.0.1::{self._listener.getsockname()[1]}::SOCKET"

    def _accept(self) -> None:
        while not self._stop.is_set():
            try:
                client, _ = self._listener.accept()
            except OSError:
                continue
            self.connections += 1
            self._clients.append(client)
            threading.Thread(
                target=self._serve, args=(client, self.connections), daemon=True
            ).start()

    def _answer(self, number: int, message: str) -> str | None:
        points = 1
        out: list[str] = []
        for part in (p.strip() for p in message.split(";")):
            self.received.append((number, part))
            if part.startswith("LIST:FREQ "):
                points = len(part.split(","))
            elif part == "*CLS":
                self.queue.clear()
            elif part == "*IDN?":
                out.append("Scripted,Meter,0,1")
            elif part == "SYST:ERR?":
                out.append(self.queue.pop(0) if self.queue else '0,"No error"')
            elif part == "*OPC?":
                out.append("1")
            elif part in ("READ?", "FETC?"):
                if self.on_read is not None and self.on_read(number) == "close":
                    return "close"
                out.append(",".join([self.pair] * points))
            elif part.endswith("?"):
                out.append("0")
        return ";".join(out) if out else None

    def _serve(self, client: socket.socket, number: int) -> None:
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
                reply = self._answer(number, line.decode("ascii"))
                if reply == "close":
                    client.close()
                    return
                if reply is not None:
                    client.sendall(reply.encode("utf-8") + b"\n")

    def close(self) -> None:
        self._stop.set()
        self._listener.close()
        for client in self._clients:
            client.close()


@contextmanager
def scripted(
    pair: str, on_read: Callable[[int], str | None] | None = None
) -> Iterator[ScriptedMeter]:
    meter = ScriptedMeter(pair, on_read)
    try:
        yield meter
    finally:
        meter.close()


@pytest.fixture
def raw_rm() -> Iterator[pyvisa.ResourceManager]:
    manager = pyvisa.ResourceManager("@py")
    yield manager
    manager.close()


def clean_identity(rm: pyvisa.ResourceManager, resource: str) -> scpi.Identity:
    inst = rm.open_resource(resource, read_termination="\n", write_termination="\n")
    try:
        return scpi.parse_identity(inst.query("*IDN?"))
    finally:
        inst.close()


# -- a garbled or cut identity is asked again ----------------------------------------------------


@pytest.mark.parametrize("kind", ["garble", "truncate"])
def test_a_faulty_identity_reply_is_asked_again_over_20_seeds(sim, raw_rm, kind):
    clean = clean_identity(raw_rm, sim.resource)
    meter = ImpedanceMeter.open(sim.resource, retry_wait=0.0)
    try:
        for seed in range(20):
            sim.clear_faults()
            sim.reseed(seed)
            sim.inject(kind)
            assert meter.identify() == clean, f"seed {seed}"
    finally:
        meter.close()
        sim.clear_faults()


def test_a_meter_that_always_garbles_its_identity_is_refused(sim):
    meter = ImpedanceMeter.open(sim.resource, retry_wait=0.0)
    try:
        sim.reseed(3)
        sim.inject("garble", rate=1.0)
        with pytest.raises(InstrumentError, match="identity"):
            meter.identify()
    finally:
        sim.clear_faults()
        meter.close()


def test_identity_with_control_characters_is_refused():
    # IEEE 488.2 8.7.11 (arbitrary ASCII response data): bytes 0x00-0x7F; clause 10.14's fields
    # are printable text, so a NUL or ESC inside one is a garbled reply.
    with pytest.raises(ReplyError, match="identity"):
        scpi.parse_identity("Maker,Mo\x00del,1,2")
    with pytest.raises(ReplyError, match="identity"):
        scpi.parse_identity("Maker,Model,1,fw\x1b2")


# -- the largest double is shown, not a traceback ----------------------------------------------


@pytest.mark.parametrize("sign", [1.0, -1.0])
def test_the_largest_double_is_formatted(sign):
    value = sign * sys.float_info.max  # 1.7976931348623157e308, IEEE 754 binary64
    text = format_si(value, "Ω")
    assert text == ("-" if sign < 0 else "") + "1.798e+308 Ω"


@pytest.mark.parametrize("pair", ["1.7976931348623157e308,1", "1,-1.7976931348623157E+308"])
def test_identify_and_sweep_survive_the_largest_double(pair, tmp_path, capsys):
    with scripted(pair) as meter:
        assert main(["identify", "--resource", meter.resource, "--measure", "1k"]) == 0
        out = capsys.readouterr().out
        assert "1.798e+308 Ω" in out
        store = f"sqlite:///{tmp_path / 's.db'}"
        code = main(
            ["sweep", "--resource", meter.resource, "--store", store, "--points", "3", "--no-live"]
        )
        captured = capsys.readouterr()
        assert code == 0, captured.err
        assert "Traceback" not in captured.err


# -- the SCPI error parser and IEEE 488.2 numbers ---------------------------------------------


def test_an_error_code_of_4301_digits_is_a_reply_error():
    with pytest.raises(ReplyError, match="error-queue reply"):
        scpi.parse_error("9" * 4301 + ',"Huge"')


@pytest.mark.parametrize(("text", "code"), [('-32768,"low"', -32768), ('+32767,"high"', 32767)])
def test_error_codes_at_the_ends_of_the_scpi_range(text, code):
    assert scpi.parse_error(text).code == code


@pytest.mark.parametrize("text", ['-32769,"below"', '32768,"above"', '0012345678,"long"'])
def test_error_codes_outside_the_scpi_range_are_refused(text):
    with pytest.raises(ReplyError, match="error-queue reply"):
        scpi.parse_error(text)


ACCEPTED = [
    ("12", 12.0),  # NR1
    ("+12", 12.0),
    ("-0", 0.0),
    ("1.5", 1.5),  # NR2
    ("-.5", -0.5),
    ("1.", 1.0),
    ("+1.5E+03", 1500.0),  # NR3
    ("1.5E3", 1500.0),
    ("2e-3", 0.002),
    ("1 E 3", 1000.0),  # white space around the exponent mark (7.7.2 program data)
    (" \t-4.25E-01 ", -0.425),  # white space around the field
]

REFUSED = [
    "1_0",  # Python's float reads it as 10
    "\u0661\u0662",  # Arabic-Indic digits 1 2
    "\uff11",  # fullwidth digit one
    "inf",
    "-Infinity",
    "nan",
    "0x10",
    "#H1F",  # non-decimal numeric response data is not a reading
    "1e",
    "E3",
    "+",
    ".",
    "1.2.3",
    "1e3.5",
    "",
    "1\u00a0",  # no-break space is not IEEE 488.2 white space
]


@pytest.mark.parametrize(("text", "value"), ACCEPTED)
def test_ieee_488_2_numbers_are_read(text, value):
    assert scpi.parse_number(text) == value
    np.testing.assert_array_equal(scpi.parse_numbers(f"{text},{text}", expected=2), [value] * 2)


@pytest.mark.parametrize("text", REFUSED)
def test_anything_else_is_not_a_number(text):
    with pytest.raises(ReplyError):
        scpi.parse_number(text)
    with pytest.raises(ReplyError):
        scpi.parse_numbers(f"1,{text}", expected=2)


@pytest.mark.parametrize("pair", ["1_0,2_0", "inf,1", "1,nan"])
def test_a_meter_reply_outside_the_number_syntax_is_never_a_reading(pair):
    with scripted(pair) as fake:
        meter = ImpedanceMeter.open(fake.resource, retry_wait=0.0, retries=1)
        try:
            with pytest.raises(ReplyError):
                meter.measure(1e3)
        finally:
            meter.close()


def test_an_acknowledgement_must_be_the_number_one():
    with scripted("1,2") as fake:
        meter = ImpedanceMeter.open(fake.resource, retry_wait=0.0)
        try:
            ops = meter.dialect.operations
            assert meter._io._acknowledged(["1"], [ops["wait"]]) == ["1"]
            for reply in ("1_0", "\uff11", "+1.0E+00x"):
                with pytest.raises(ReplyError, match="acknowledgement"):
                    meter._io._acknowledged([reply], [ops["wait"]])
        finally:
            meter.close()


# -- the meter's own reason is read before anything clears it ------------------------------------


def test_a_refused_list_reports_the_meters_reason(sim, tmp_path):
    # The shipped dialect says 2000 points (the simulator's documented limit); one that claims
    # more sends a list the meter refuses, and the meter says why on its error queue.
    text = load_dialect("simulated").path.read_text(encoding="utf-8")
    path = tmp_path / "too-long.toml"
    path.write_text(text.replace("max_points = 2000", "max_points = 3000"), encoding="utf-8")
    meter = ImpedanceMeter.open(sim.resource, str(path), retry_wait=0.0)
    try:
        with pytest.raises(InstrumentError) as info:
            meter.sweep(np.geomspace(100, 1e6, 2500), mode="list")
    finally:
        meter.close()
    message = str(info.value)
    assert "-108" in message and "Parameter not allowed" in message
    assert "reading pair" not in message


def test_after_a_drop_the_queue_is_read_before_it_is_cleared():
    def refuse(connection: int) -> str:
        fake.queue.append('-222,"Data out of range"')
        return "close"

    with scripted("1,2", on_read=refuse) as fake:
        meter = ImpedanceMeter.open(fake.resource, retry_wait=0.0, retries=1)
        try:
            with pytest.raises(InstrumentError) as info:
                meter.measure(1e3)
        finally:
            meter.close()
        second = [part for n, part in fake.received if n == 2]
    assert second.index("SYST:ERR?") < second.index("*CLS")
    assert '-222,"Data out of range"' in str(info.value)


# -- a fault on the queue check after the readings arrived whole ---------------------------------


@pytest.mark.parametrize("transfer", ["ascii", "binary"])
@pytest.mark.parametrize("kind", ["garble", "truncate", "stall", "drop"])
def test_a_fault_on_the_queue_check_after_a_sweep_is_retried(sim, kind, transfer):
    f = np.geomspace(1e3, 1e5, 5)
    meter = ImpedanceMeter.open(sim.resource, retry_wait=0.0, timeout=0.5)
    try:
        meter.configure(transfer=transfer)
        sim.clear_faults()
        sim.inject(kind, 2)  # the readings are message/reply 1, the queue check is 2
        z = meter.sweep(f, mode="list")
        assert not sim.faults
    finally:
        sim.clear_faults()
        meter.close()
    np.testing.assert_allclose(z, sim.seen_impedance(f), rtol=1e-9)


# -- messages that tell the user what to do --------------------------------------------------


def test_a_resource_string_that_is_not_one_says_how_to_write_one():
    with pytest.raises(ConnectionLost) as info:
        Session("garbage", open_timeout=0.5).open()
    message = str(info.value)
    assert "read_termination" not in message and "meter is on" not in message
    assert "::SOCKET" in message and "\n" not in message


@pytest.mark.parametrize(
    ("resource", "missing"),
    [
        ("GPIB0::17::INSTR", "Please install linux-gpib (Linux) or gpib-ctypes.\nNo module 'gpib'"),
        ("USB0::0x1::0x2::SN::INSTR", "Please install PyUSB to use this resource type.\nNo 'usb'"),
    ],
)
def test_a_missing_bus_driver_is_named_not_the_meter(monkeypatch, resource, missing):
    # pyvisa-py's own words when a bus's Python package is not installed.
    def refuse(self, *args, **kwargs):
        raise ValueError(missing)

    monkeypatch.setattr(pyvisa.ResourceManager, "open_resource", refuse)
    with pytest.raises(ConnectionLost) as info:
        Session(resource).open()
    message = str(info.value)
    assert "meter is on" not in message and "\n" not in message
    assert "install" in message and resource.split("::")[0][:4] in message


def test_a_lan_resource_without_socket_is_hinted():
    probe = socket.create_server(("127.0.0.1", 0))
    port = probe.getsockname()[1]
    probe.close()
    with pytest.raises(ConnectionLost) as info:
        Session(f"TCPIP0::127.0.0.1::{port}", open_timeout=0.5).open()
    assert f"TCPIP0::127.0.0.1::{port}::SOCKET" in str(info.value)


def test_the_pyvisa_sim_backend_with_a_lan_resource_names_the_backend():
    with pytest.raises(ConnectionLost) as info:
        ImpedanceMeter.open("TCPIP0::127.0.0.1::5025::SOCKET", backend="@sim", retry_wait=0.0)
    message = str(info.value)
    assert "dialect" not in message and "next_error" not in message
    assert "@py" in message and "pyvisa-sim" in message


def test_losing_the_meter_mid_sweep_gives_the_advice_once():
    with running(noise=False, measure_time=0) as sim:
        meter = ImpedanceMeter.open(sim.resource, retry_wait=0.0, timeout=1.0)
    try:
        with pytest.raises(ConnectionLost) as info:
            meter.sweep([1e3, 1e4], mode="points")
    finally:
        meter.close()
    message = str(info.value)
    assert message.count("Check") == 1 and len(message) < 400, message
    assert meter.resource in message and "\n" not in message
