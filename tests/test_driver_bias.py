"""DC bias in the drivers: the dialect's bias operations, source dialects, and the supplies.

The supplies are driven against a small fake instrument of this file: it keeps a setpoint and
an output state, answers the dialect's commands, and records every message it received (and,
for the fake session, when the session was closed), so the tests check the exact commands
sent. Step values are computed by hand (5 A down to 0 A in steps of at most 1 A is 4, 3, 2, 1,
0). One test talks to the fake through pyvisa-py and a real loopback socket.
"""

from __future__ import annotations

import re
import socket
import threading
from collections.abc import Callable, Iterator
from pathlib import Path
from typing import Any, TypeVar

import pytest

from drivers.bias import NO_BIAS, CurrentSource, MeterBias
from drivers.dialect import DIRECTORY
from drivers.dialect_file import list_dialects, load_dialect, load_source_dialect
from drivers.errors import BiasError, DialectError, OutOfRange, ReplyError, SettingRefused
from drivers.meter import ImpedanceMeter
from drivers.supply import steps

T = TypeVar("T")
SIMULATED = DIRECTORY / "simulated.toml"
SOURCE = DIRECTORY / "simulated-source.toml"
NO_ERROR = '0,"No error"'


# -- the fake instrument -----------------------------------------------------------------------


class FakeInstrument:
    """Answers the simulated meter's bias commands and the simulated source's; records all."""

    def __init__(self, limit: float = 8.0) -> None:
        self.limit = limit
        self.setpoint = 0.0
        self.on = False
        self.received: list[str] = []
        self.errors: list[str] = []
        self.failing_reads: set[int] = set()  # which read-backs (counted from 1) fail
        self.reads = 0

    def handle(self, message: str) -> str | None:
        self.received.append(message)
        head, _, argument = message.partition(" ")
        if message == "SYST:ERR?":
            return self.errors.pop(0) if self.errors else NO_ERROR
        if head in ("BIAS:CURR", "SOUR:CURR") and argument != "MAX":
            self.setpoint = float(argument)
            return None
        if message in ("BIAS:STAT ON", "OUTP ON", "BIAS:STAT OFF", "OUTP OFF"):
            self.on = message.endswith("ON")
            return None
        if message in ("BIAS:MEAS?", "MEAS:CURR?"):
            self.reads += 1
            if self.reads in self.failing_reads:
                raise ReplyError(f"expected a number from the meter, got {'1.2.3'!r}")
            return repr(self.setpoint if self.on else 0.0)
        if message in ("BIAS:LIM?", "SOUR:CURR? MAX"):
            return repr(self.limit)
        if message == "*IDN?":
            return "Bench,FAKE-SOURCE,0001,1.0"
        if message in ("*CLS", "*RST"):
            return None
        raise AssertionError(f"the fake instrument does not know {message!r}")

    @property
    def sets(self) -> list[float]:
        """The currents set, in order."""
        return [float(m.split()[1]) for m in self.received if re.match(r"(BIAS|SOUR):CURR \d", m)]

    def commands(self) -> list[str]:
        """What was received, without the error-queue reads."""
        return [m for m in self.received if m != "SYST:ERR?"]


class FakeLink:
    """A session to the fake instrument: what a supply needs of one, and nothing more."""

    resource_name = "FAKE::INSTR"

    def __init__(self, instrument: FakeInstrument) -> None:
        self.instrument = instrument
        self.on_reopen: Callable[[], None] | None = None
        self.is_open = True

    def write(self, message: str) -> None:
        assert self.is_open, "written after close"
        assert self.instrument.handle(message) is None

    def query(self, message: str, timeout: float | None = None) -> str:
        assert self.is_open, "queried after close"
        reply = self.instrument.handle(message)
        assert reply is not None
        return reply

    def call(self, what: str, action: Callable[[], T], idempotent: bool = True) -> T:
        return action()

    def close(self) -> None:
        self.instrument.received.append("<closed>")
        self.is_open = False


def meter_bias(tmp_path: Path, limit: float = 8.0, **kw: Any) -> tuple[MeterBias, FakeInstrument]:
    instrument = FakeInstrument(limit)
    bias = MeterBias(FakeLink(instrument), load_dialect("simulated"), **kw)
    instrument.received.clear()
    return bias, instrument


def current_source(limit: float = 8.0, **kw: Any) -> tuple[CurrentSource, FakeInstrument]:
    instrument = FakeInstrument(limit)
    source = CurrentSource(FakeLink(instrument), load_source_dialect("simulated-source"), **kw)
    instrument.received.clear()
    return source, instrument


# -- dialects ----------------------------------------------------------------------------------


def variant(tmp_path: Path, base: Path, edits: dict[str, str], append: str = "") -> Path:
    """A copy of a shipped dialect with lines replaced (regex -> text) and text appended."""
    text = base.read_text()
    for pattern, replacement in edits.items():
        text, count = re.subn(pattern, replacement, text, flags=re.MULTILINE)
        assert count, f"pattern {pattern!r} not found in {base.name}"
    path = tmp_path / "variant.toml"
    path.write_text(text + append)
    return path


def test_the_simulated_dialect_declares_the_simulated_meters_bias():
    d = load_dialect("simulated")
    assert d.has_bias
    ops = d.operations
    assert ops["set_bias"].command == "BIAS:CURR {current}" and ops["set_bias"].maximum == 8.0
    assert (ops["bias_on"].command, ops["bias_off"].command) == ("BIAS:STAT ON", "BIAS:STAT OFF")
    assert (ops["read_bias"].command, ops["read_bias"].reply) == ("BIAS:MEAS?", "number")
    assert (ops["bias_limit"].command, ops["bias_limit"].reply) == ("BIAS:LIM?", "number")


def test_the_simulated_source_dialect_and_the_shipped_lists():
    d = load_source_dialect("simulated-source")
    ops = d.operations
    assert ops["set_current"].command == "SOUR:CURR {current}" and ops["set_current"].maximum
    assert (ops["output_on"].command, ops["output_off"].command) == ("OUTP ON", "OUTP OFF")
    assert (ops["read_current"].command, ops["current_limit"].command) == (
        "MEAS:CURR?",
        "SOUR:CURR? MAX",
    )
    assert (ops["reset"].command, ops["clear_status"].command) == ("*RST", "*CLS")
    assert list_dialects() == ["simulated"]
    assert list_dialects("current-source") == ["simulated-source"]
    with pytest.raises(DialectError, match="no shipped current-source dialect named 'nope'.*"):
        load_source_dialect("nope")


def test_the_template_documents_both_kinds(tmp_path):
    text = (DIRECTORY / "template.toml").read_text()
    assert load_dialect("template").has_bias
    for word in ('kind = "current-source"', "set_current", "output_on", "current_limit"):
        assert word in text
    # The commented example of a source dialect, uncommented, is a valid source dialect.
    block = text[text.index('#     schema = 1\n#     kind = "current-source"') :]
    lines = [line[6:] for line in block.splitlines() if line.startswith("#     ")]
    path = tmp_path / "example.toml"
    path.write_text("\n".join(lines) + "\n")
    assert load_source_dialect(path).operations["set_current"].maximum == 10.0


def test_a_meter_dialect_without_bias_or_without_bias_limit_loads(tmp_path):
    assert not load_dialect(
        variant(tmp_path, SIMULATED, {r"^(set_bias|bias_|read_bias).*$": ""})
    ).has_bias
    d = load_dialect(variant(tmp_path, SIMULATED, {r"^bias_limit.*$": ""}))
    assert d.has_bias and not d.has("bias_limit")


METER_REFUSALS = {
    "one bias operation missing": (
        {r"^read_bias.*$": ""},
        r"operations\.read_bias.*needs all of set_bias, bias_on, bias_off, read_bias "
        r"\(missing read_bias\)",
    ),
    "two bias operations missing": (
        {r"^bias_on.*$": "", r"^bias_off.*$": ""},
        r"operations\.bias_on.*\(missing bias_on, bias_off\)",
    ),
    "bias_limit alone": (
        {r"^(set_bias|bias_on|bias_off|read_bias).*$": ""},
        r"\(missing set_bias, bias_on, bias_off, read_bias\); add them, or delete bias_limit",
    ),
    "set_bias without {current}": (
        {r"^set_bias.*$": 'set_bias = { command = "BIAS:CURR 1", max = 8.0 }'},
        r"operations\.set_bias\.command.*must hold \{current\}",
    ),
    "set_bias without max": (
        {r"^set_bias.*$": 'set_bias = { command = "BIAS:CURR {current}" }'},
        r"operations\.set_bias\.max.*missing; give the largest current the meter allows",
    ),
    "set_bias max of zero": (
        {r"^set_bias.*$": 'set_bias = { command = "BIAS:CURR {current}", max = 0 }'},
        r"operations\.set_bias\.max.*must be above 0 A",
    ),
    "set_bias with min": (
        {r"^set_bias.*$": 'set_bias = { command = "BIAS:CURR {current}", min = 0.1, max = 8 }'},
        r"operations\.set_bias\.min.*not used: the current runs from 0 A up to max",
    ),
    "read_bias not a query": (
        {r"^read_bias.*$": 'read_bias = { command = "BIAS:MEAS?" }'},
        r"operations\.read_bias\.query.*must be true: this operation returns number",
    ),
    "read_bias replying ack": (
        {r"^read_bias.*$": 'read_bias = { command = "BIAS:MEAS?", query = true, reply = "ack" }'},
        r"operations\.read_bias\.reply.*must be 'number' for read_bias",
    ),
    "{current} in another operation": (
        {r"^bias_on.*$": 'bias_on = { command = "BIAS:STAT {current}" }'},
        r"operations\.bias_on\.command.*placeholder \{current\} is not available",
    ),
    "a source operation in a meter dialect": (
        {r"^bias_on.*$": 'bias_on = { command = "BIAS:STAT ON" }\noutput_on = { command = "X" }'},
        r"operations\.output_on.*unknown operation \(it belongs in a kind = \"current-source\"",
    ),
    "an unknown kind": (
        {r"^schema = 1$": 'schema = 1\nkind = "power-supply"'},
        r"kind': must be one of 'meter', 'current-source', got 'power-supply'",
    ),
}


@pytest.mark.parametrize("edits,message", METER_REFUSALS.values(), ids=METER_REFUSALS.keys())
def test_a_meter_dialect_with_bad_bias_operations_is_refused(tmp_path, edits, message):
    path = variant(tmp_path, SIMULATED, edits)
    with pytest.raises(DialectError, match=rf"variant\.toml: key '.*{message}"):
        load_dialect(path)


SOURCE_REFUSALS = {
    "an operation missing": (
        {r"^output_off.*$": ""},
        r"operations\.output_off.*missing; the driver needs it to switch the output off",
    ),
    "a meter's table": (
        {r"^\[errors\]$": "[frequency]\nmin = 10.0\nmax = 1e6\n\n[errors]"},
        r"frequency': not used by a current-source dialect; delete it",
    ),
    "a meter's sequence": (
        {r"^\[errors\]$": '[sequence]\npoint = ["read"]\n\n[errors]'},
        r"sequence': not used by a current-source dialect",
    ),
    "a compound message": (
        {r"^retries = 2$": "retries = 2\ncompound = true"},
        r"connection.compound': not used by a current-source dialect",
    ),
    "a meter's operation": (
        {r"^output_on.*$": 'output_on = { command = "OUTP ON" }\nset_bias = { command = "X" }'},
        r"operations\.set_bias.*unknown operation \(it belongs in a meter's dialect",
    ),
    "set_current without max": (
        {r"^set_current.*$": 'set_current = { command = "SOUR:CURR {current}" }'},
        r"operations\.set_current\.max.*missing; give the largest current the source allows",
    ),
    "read_current replying ack": (
        {r"^read_current.*$": 'read_current = { command = "A?", query = true, reply = "ack" }'},
        r"operations\.read_current\.reply.*must be 'number'",
    ),
    "{current} in output_on": (
        {r"^output_on.*$": 'output_on = { command = "OUTP {current}" }'},
        r"operations\.output_on\.command.*placeholder \{current\} is not available",
    ),
}


@pytest.mark.parametrize("edits,message", SOURCE_REFUSALS.values(), ids=SOURCE_REFUSALS.keys())
def test_a_bad_source_dialect_is_refused(tmp_path, edits, message):
    path = variant(tmp_path, SOURCE, edits)
    with pytest.raises(DialectError, match=rf"variant\.toml: key '.*{message}"):
        load_source_dialect(path)


def test_a_dialect_of_the_other_kind_is_refused_saying_which_it_is():
    with pytest.raises(DialectError, match=r"current source's dialect, not a meter's"):
        load_dialect(SOURCE)
    with pytest.raises(DialectError, match=r"meter's dialect, not a current source's.*kind ="):
        load_source_dialect(SIMULATED)
    with pytest.raises(DialectError, match="current source's dialect, not a meter's"):
        ImpedanceMeter.open("TCPIP0::127.0.0.1::1::SOCKET", dialect="simulated-source")


# -- the meter's own bias ----------------------------------------------------------------------


def test_the_limit_is_the_smaller_of_the_dialects_max_and_the_meters_report(tmp_path):
    assert meter_bias(tmp_path, limit=6.5)[0].limit == 6.5
    assert meter_bias(tmp_path, limit=20.0)[0].limit == 8.0
    instrument = FakeInstrument(6.5)
    no_query = load_dialect(variant(tmp_path, SIMULATED, {r"^bias_limit.*$": ""}))
    assert MeterBias(FakeLink(instrument), no_query).limit == 8.0
    assert instrument.received == []


def test_set_switch_and_read_back_send_the_dialects_commands(tmp_path):
    bias, instrument = meter_bias(tmp_path)
    bias.set_current(2.5)
    bias.switch(True)
    assert bias.applied() == 2.5
    bias.switch(False)
    assert instrument.received == [
        "BIAS:CURR 2.5",
        "SYST:ERR?",
        "BIAS:STAT ON",
        "SYST:ERR?",
        "BIAS:MEAS?",
        "BIAS:STAT OFF",
        "SYST:ERR?",
    ]


@pytest.mark.parametrize(
    "amps,message",
    [
        (8.01, r"DC bias of 8\.01 A is above the limit of 8 A \(the max of operations\.set_bias"),
        (-0.5, r"DC bias must be a finite number of ampere, 0 or more, got -0\.5"),
        (float("nan"), r"got nan; nothing was sent"),
        (float("inf"), r"got inf; nothing was sent"),
    ],
)
def test_a_current_out_of_range_sends_nothing(tmp_path, amps, message):
    bias, instrument = meter_bias(tmp_path)
    with pytest.raises(OutOfRange, match=message):
        bias.set_current(amps)
    with pytest.raises(OutOfRange, match=message):
        bias.ramp_to(amps, step=1.0)
    assert instrument.received == []


def test_above_the_meters_own_limit_sends_nothing_and_says_whose_limit(tmp_path):
    bias, instrument = meter_bias(tmp_path, limit=5.0)
    with pytest.raises(OutOfRange, match=r"above the limit of 5 A \(as FAKE::INSTR reports it\)"):
        bias.set_current(5.5)
    assert instrument.received == []


def test_a_bias_the_meter_refuses_is_reported(tmp_path):
    bias, instrument = meter_bias(tmp_path)
    instrument.errors = ['-222,"Data out of range"']
    with pytest.raises(SettingRefused, match=r"setting the DC bias to 3 A.*-222"):
        bias.set_current(3.0)


def test_ramping_down_from_5_a_in_steps_of_1_a(tmp_path):
    bias, instrument = meter_bias(tmp_path)
    bias.set_current(5.0)
    bias.switch(True)
    instrument.received.clear()
    assert bias.ramp_to(0.0, step=1.0) == 0.0
    assert instrument.sets == [4.0, 3.0, 2.0, 1.0, 0.0]  # computed: 5 A - k x 1 A
    assert instrument.commands()[-1] == "BIAS:STAT OFF" and not instrument.on
    assert instrument.commands().count("BIAS:MEAS?") == 5


def test_ramping_down_goes_on_past_a_failing_read_back_and_still_switches_off(tmp_path):
    bias, instrument = meter_bias(tmp_path)
    bias.set_current(5.0)
    bias.switch(True)
    instrument.received.clear()
    instrument.failing_reads = {2}  # the read-back after the step to 3 A
    with pytest.raises(BiasError, match=r"1 failure.*the step to 3 A.*was switched off"):
        bias.ramp_to(0.0, step=1.0)
    assert instrument.sets == [4.0, 3.0, 2.0, 1.0, 0.0]
    assert instrument.commands()[-1] == "BIAS:STAT OFF" and not instrument.on


def test_ramping_down_from_an_unknown_state_starts_from_the_read_back(tmp_path):
    bias, instrument = meter_bias(tmp_path)
    instrument.setpoint, instrument.on = 3.0, True  # left on by an earlier session
    bias.ramp_to(0.0, step=1.5)
    assert instrument.commands()[0] == "BIAS:MEAS?"
    assert instrument.sets == [1.5, 0.0]
    assert instrument.commands()[-1] == "BIAS:STAT OFF"


def test_ramping_up_starts_at_zero_and_never_steps_more_than_asked(tmp_path):
    bias, instrument = meter_bias(tmp_path)
    assert bias.ramp_to(2.5, step=1.0) == 2.5
    # From off: the current is set to what flows (0 A) before the output goes on.
    assert instrument.commands()[:3] == ["BIAS:MEAS?", "BIAS:CURR 0.0", "BIAS:STAT ON"]
    assert instrument.sets[1:] == pytest.approx([2.5 / 3, 5.0 / 3, 2.5])  # computed: 2.5 A / 3
    assert instrument.on
    instrument.received.clear()
    bias.ramp_to(4.0, step=1.0)
    assert instrument.sets == [3.25, 4.0]  # computed: from the setpoint 2.5 A, two steps


def test_ramping_up_stops_at_the_first_failure(tmp_path):
    bias, instrument = meter_bias(tmp_path)
    instrument.failing_reads = {3}
    with pytest.raises(ReplyError):
        bias.ramp_to(4.0, step=1.0)
    assert instrument.sets == [0.0, 1.0, 2.0]


def test_steps_are_even_and_end_on_the_target():
    assert steps(5.0, 0.0, 1.0) == [4.0, 3.0, 2.0, 1.0, 0.0]
    assert steps(0.0, 0.0, 1.0) == [0.0]
    assert steps(0.0, 1.0, 0.3) == pytest.approx([0.25, 0.5, 0.75, 1.0])  # computed: 4 steps


def test_a_meter_without_bias_operations_says_to_give_a_source(tmp_path):
    dialect = load_dialect(variant(tmp_path, SIMULATED, {r"^(set_bias|bias_|read_bias).*$": ""}))
    meter = ImpedanceMeter(FakeLink(FakeInstrument()), dialect)  # type: ignore[arg-type]
    with pytest.raises(DialectError, match=re.escape(NO_BIAS)):
        meter.bias()
    assert "--bias-source RESOURCE" in NO_BIAS


def test_the_meter_ramps_its_bias_down_before_closing(tmp_path):
    instrument = FakeInstrument()
    meter = ImpedanceMeter(FakeLink(instrument), load_dialect("simulated"))  # type: ignore[arg-type]
    bias = meter.bias()
    assert meter.bias() is bias
    bias.ramp_step = 2.0
    bias.ramp_to(4.0, step=4.0)
    instrument.received.clear()
    meter.close()
    assert instrument.sets == [2.0, 0.0]
    assert instrument.commands()[-2:] == ["BIAS:STAT OFF", "<closed>"]


# -- a current source --------------------------------------------------------------------------


def test_a_current_source_speaks_its_dialect_and_ramps_down_before_closing():
    source, instrument = current_source(limit=10.0, ramp_step=1.0)
    assert source.limit == 8.0  # the dialect's max is the smaller
    source.ramp_to(5.0, step=5.0)
    assert instrument.commands()[1:] == ["SOUR:CURR 0.0", "OUTP ON", "SOUR:CURR 5.0", "MEAS:CURR?"]
    instrument.received.clear()
    with source:
        pass
    assert instrument.sets == [4.0, 3.0, 2.0, 1.0, 0.0]
    assert instrument.commands()[-2:] == ["OUTP OFF", "<closed>"]
    source.close()  # twice: nothing more
    assert instrument.received[-1] == "<closed>"


def test_a_current_source_closes_its_session_even_when_the_ramp_fails():
    source, instrument = current_source(ramp_step=2.0)
    source.ramp_to(4.0, step=4.0)
    instrument.received.clear()
    instrument.failing_reads = {instrument.reads + 1}
    with pytest.raises(BiasError, match=r"the step to 2 A"):
        source.close()
    assert instrument.sets == [2.0, 0.0]
    assert instrument.commands()[-2:] == ["OUTP OFF", "<closed>"]


# -- through pyvisa and a real socket ----------------------------------------------------------


@pytest.fixture
def fake_server() -> Iterator[tuple[FakeInstrument, int, threading.Event]]:
    """The fake instrument on a loopback port (one connection at a time, one line a message)."""
    instrument = FakeInstrument(limit=6.0)
    listener = socket.create_server(("127.0.0.1", 0))
    listener.settimeout(0.2)
    closed = threading.Event()
    stop = threading.Event()

    def serve() -> None:
        while not stop.is_set():
            try:
                conn, _ = listener.accept()
            except TimeoutError:
                continue
            with conn, conn.makefile("rwb") as stream:
                for line in stream:
                    reply = instrument.handle(line.decode().strip())
                    if reply is not None:
                        stream.write(reply.encode() + b"\n")
                        stream.flush()
            instrument.received.append("<closed>")
            closed.set()

    thread = threading.Thread(target=serve, daemon=True)
    thread.start()
    yield instrument, listener.getsockname()[1], closed
    stop.set()
    thread.join(5)
    listener.close()


def test_a_current_source_opened_by_resource(fake_server):
    instrument, port, closed = fake_server
    resource = f"TCPIP0::127.0.0.1::{port}::SOCKET"
    with CurrentSource.open(resource, ramp_step=1.5) as source:
        assert source.limit == 6.0  # the source's own report is the smaller
        assert source.identify().model == "FAKE-SOURCE"
        source.ramp_to(3.0, step=3.0)
        assert source.applied() == 3.0
    assert closed.wait(5)
    sent = instrument.commands()
    assert "*RST" not in sent  # a reset could break a current already flowing
    assert sent[:2] == ["*CLS", "SOUR:CURR? MAX"]
    assert instrument.sets[-2:] == [1.5, 0.0]
    assert sent[-2:] == ["OUTP OFF", "<closed>"]
