"""The simulated meter's command set, through pyvisa-py on a real socket.

Every command of drivers/simulator/COMMANDS.md is exercised here. Outside references: IEEE 488.2
(common commands, status registers, definite-length blocks, suffix multipliers) and SCPI-99
(error queue, codes and messages, 9.9E37 / 9.91E37), both from memory; pyvisa's own
``query_binary_values`` parses the binary blocks. Commands with no reply are sent in one
message with a query (pyvisa-py stalls ~40 ms on a write followed by a separate query).
"""

from __future__ import annotations

import re

import numpy as np
import pytest
import pyvisa

OVERRANGE = 9.9e37
INVALID = 9.91e37


@pytest.fixture(scope="module")
def sim_options():
    return {"seed": 3, "noise": True}


@pytest.fixture(scope="module")
def rm():
    manager = pyvisa.ResourceManager("@py")
    yield manager
    manager.close()


def _open(rm, sim, timeout_ms: int = 2000):
    inst = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
    inst.timeout = timeout_ms
    return inst


@pytest.fixture
def meter(rm, sim):
    inst = _open(rm, sim)
    inst.query(
        '*RST;*CLS;SIM:NOIS OFF;SIM:TIME 0;SIM:FAUL:CLE;SIM:DUT "air-core-coil";'
        'SIM:FIXT "bench-leads";SIM:SEED 3;*OPC?'
    )
    yield inst
    inst.close()


def numbers(reply: str) -> np.ndarray:
    return np.array([float(v) for v in reply.split(",")])


def replies(reply: str) -> list[str]:
    """Split a compound reply on the ``;`` outside quoted strings."""
    return re.findall(r'(?:[^;"]|"[^"]*")+', reply)


def errors(inst) -> list[int]:
    """Drain the error queue (one message), return the codes."""
    count = int(inst.query("SYST:ERR:COUN?"))
    if count == 0:
        return []
    reply = inst.query(";".join(["SYST:ERR?"] * count))
    return [int(item.split(",")[0]) for item in replies(reply)]


def test_identity_has_four_fields(meter, sim):
    fields = meter.query("*IDN?").split(",")
    assert fields == [
        sim.meter.manufacturer,
        sim.meter.model,
        sim.meter.serial,
        sim.meter.firmware,
    ]


def test_short_and_long_forms_and_case(meter):
    reply = meter.query(
        "FREQ 1234;FREQ?;:SOURCE:FREQUENCY:CW 2345;sour:freq?;source:frequency:cw 3456;Freq:Cw?"
    )
    assert numbers(reply.replace(";", ",")).tolist() == [1234.0, 2345.0, 3456.0]
    assert errors(meter) == []


def test_compound_message_replies_in_order_and_commands_from_root(meter):
    reply = meter.query("VOLT 0.25;PER 2;:AVER:COUN 4;VOLT?;PERIODS?;SENSE:AVERAGE:COUNT?")
    level, periods, count = reply.split(";")
    assert float(level) == 0.25 and periods == "2" and count == "4"


def test_suffixes_follow_ieee_488_2_multipliers(meter):
    # IEEE 488.2 suffix multipliers (from memory): M is milli, MA mega, except MHZ and MOHM.
    reply = meter.query("FREQ 2.5MHZ;FREQ?;FREQ 1kHz;FREQ?;FREQ 1MAHZ;FREQ?;VOLT 100mV;VOLT?")
    assert numbers(reply.replace(";", ",")).tolist() == [2.5e6, 1e3, 1e6, 0.1]
    meter.query("FREQ 1M;FREQ 2V;*OPC?")
    assert errors(meter) == [-131, -131]


def test_min_max_default_values_and_queries(meter):
    reply = meter.query("FREQ MAX;FREQ?;FREQ? MIN;FREQ DEF;FREQ?;VOLT MIN;VOLT?;VOLT? MAX")
    assert numbers(reply.replace(";", ",")).tolist() == [30e6, 10.0, 1e3, 0.002, 3.0]
    assert meter.query("AVER:COUN MAX;AVER:COUN?;AVER:COUN? MIN") == "500;1"
    assert meter.query("PER MAX;PER?;PER? MIN;PER DEF;PER?") == "1000;1;4"


def test_rst_restores_defaults(meter):
    meter.query("FREQ 5e3;VOLT 0.1;PER 16;AVER:COUN 8;TRIG:SOUR BUS;FORM REAL;*OPC?")
    meter.query("FORM:BORD SWAP;CIRC PAR;UNIT:ANGL RAD;FORM:PAIR IND,QUAL;*OPC?")
    meter.query("FREQ:MODE LIST;LIST:FREQ 1e3,2e3;*OPC?")
    reply = meter.query(
        "*RST;FREQ?;VOLT?;PER?;AVER:COUN?;TRIG:SOUR?;FORM?;FORM:BORD?;FORM:PAIR?;CIRC?;"
        "UNIT:ANGL?;FREQ:MODE?;LIST:FREQ:POIN?"
    )
    assert reply.split(";") == [
        "+1E+03",
        "+5E-01",
        "4",
        "1",
        "IMM",
        "ASC",
        "NORM",
        "REAL,IMAG",
        "SER",
        "DEG",
        "FIX",
        "0",
    ]


def test_error_queue_order_codes_and_empty_reply(meter):
    # SCPI-99: oldest first; 0,"No error" when empty; standard codes and messages.
    meter.query("BOGUS:CMD;FREQ 5;FREQ abc;CIRC TURBO;FREQ;FREQ 1,2;AVER:COUN 0;*OPC?")
    replies = [meter.query("SYST:ERR?") for _ in range(8)]
    assert replies == [
        '-113,"Undefined header; BOGUS:CMD"',
        '-222,"Data out of range; 5 outside 10 to 3e+07"',
        "-104,\"Data type error; expected a number, got 'abc'\"",
        "-224,\"Illegal parameter value; 'TURBO' is not one of SERies, PARallel\"",
        '-109,"Missing parameter; expected 1 parameter(s)"',
        '-108,"Parameter not allowed; at most 1 parameter(s)"',
        '-222,"Data out of range; 0 outside 1 to 500"',
        '0,"No error"',
    ]
    assert meter.query("SYST:ERROR:NEXT?") == '0,"No error"'


def test_error_queue_overflow_keeps_twenty_with_350_last(meter):
    meter.query(";".join(["NOPE"] * 25) + ";SYST:ERR:COUN?")
    codes = errors(meter)
    assert len(codes) == 20
    assert codes[:19] == [-113] * 19 and codes[19] == -350


def test_syntax_errors_and_a_failing_query_gives_no_reply(meter):
    assert meter.query("FREQ$ 5;SYST:ERR?") == "-102,\"Syntax error; bad header 'FREQ$'\""
    reply = meter.query("*RST;FETC?;SYST:ERR?")
    assert reply == '-230,"Data corrupt or stale; no completed measurement"'
    meter.write('FOO BAR";SYST:ERR?')  # one unterminated string: nothing runs, no reply
    assert meter.query("SYST:ERR?") == '-102,"Syntax error; unterminated string"'


def test_cls_clears_queue_and_event_status(meter):
    meter.query("NOPE;*OPC?")
    assert meter.query("SYST:ERR:COUN?;*ESR?") == "1;32"
    meter.query("NOPE;*CLS;*OPC?")
    assert meter.query("SYST:ERR:COUN?;*ESR?") == "0;0"


def test_status_registers(meter):
    # IEEE 488.2: *ESR? reads and clears; *STB? bit 5 summarises ESR & ESE; SCPI bit 2 errors.
    assert meter.query("*ESE 32;*ESE?;*STB?") == "32;0"
    meter.query("NOPE;*OPC?")
    assert meter.query("*STB?") == str(4 | 32)
    assert meter.query("*ESR?;*ESR?") == "32;0"
    assert meter.query("*OPC;*ESR?") == "1"
    assert meter.query("*TST?") == "0"
    assert meter.query("SYST:VERS?") == "1999.0"


def test_read_fetch_and_initiate(meter, sim):
    meter.query("FREQ 10kHz;*OPC?")
    expected = sim.seen_impedance(np.array([1e4]))[0]
    r, x = numbers(meter.query("READ?"))
    assert (r, x) == (expected.real, expected.imag)
    assert numbers(meter.query("FETC?")).tolist() == [r, x]
    reply = meter.query("FREQ 20kHz;INIT;*WAI;FETC?")
    assert numbers(reply)[1] == pytest.approx(sim.seen_impedance(2e4).imag, rel=1e-15)
    assert errors(meter) == []


def test_list_sweep_every_point_in_one_reply(meter, sim):
    reply = meter.query("LIST:FREQ 1e3,1e4,1e5,1e6;FREQ:MODE LIST;LIST:FREQ:POIN?;READ?")
    points, values = reply.split(";")
    assert points == "4"
    z = sim.seen_impedance(np.array([1e3, 1e4, 1e5, 1e6]))
    np.testing.assert_array_equal(numbers(values), np.column_stack([z.real, z.imag]).ravel())
    listed = numbers(meter.query("LIST:FREQ?"))
    assert listed.tolist() == [1e3, 1e4, 1e5, 1e6]


def test_log_list(meter):
    reply = meter.query("LIST:FREQ:LOG 100,1MHz,5;LIST:FREQ?")
    np.testing.assert_allclose(numbers(reply), [1e2, 1e3, 1e4, 1e5, 1e6], rtol=1e-14)
    meter.query("LIST:FREQ:LOG 100,1e3,1;LIST:FREQ:LOG 1e3,1e3,3;*OPC?")
    assert errors(meter) == [-222, -222]


def test_empty_list_is_a_settings_conflict(meter):
    meter.query("FREQ:MODE LIST;INIT;*OPC?")
    assert errors(meter) == [-221]


def test_bus_trigger(meter):
    reply = meter.query("TRIG:SOUR BUS;INIT;FETC?;SYST:ERR?;*TRG;*WAI;FETC?")
    error, values = replies(reply)
    assert error.startswith("-230,")
    assert len(numbers(values)) == 2
    meter.query("*TRG;READ?;*OPC?")
    assert errors(meter) == [-211, -221]


def test_init_while_armed_is_ignored(meter):
    meter.query("TRIG:SOUR BUS;INIT;INIT;*OPC?")
    assert errors(meter) == [-213]


def test_binary_block_parsed_by_pyvisa(meter):
    ascii_values = numbers(meter.query("LIST:FREQ:LOG 1e3,1e7,7;FREQ:MODE LIST;READ?"))
    # pyvisa's own IEEE 488.2 block parser is the outside reference for the format.
    big = meter.query_binary_values("FORM REAL,64;READ?", datatype="d", is_big_endian=True)
    little = meter.query_binary_values("FORM:BORD SWAP;READ?", datatype="d", is_big_endian=False)
    np.testing.assert_array_equal(big, ascii_values)
    np.testing.assert_array_equal(little, ascii_values)
    assert meter.query("FORM?;FORM:BORD?") == "REAL,64;SWAP"
    meter.query("FORM REAL,32;FORM ASC,3;*OPC?")
    assert errors(meter) == [-222, -108]


def test_every_reading_pair(meter, sim):
    # Circuit theory (from memory): Y = 1/Z = G + jB; series L or C from X = wLs = -1/(wCs);
    # parallel L or C from B = -1/(wLp) = wCp, Rp = 1/G; Q = X/R and D = R/X, signed.
    f = 2e5
    z = complex(sim.seen_impedance(f))
    w = 2 * np.pi * f
    y = 1 / z
    expected = [
        ("SER", "DEG", "REAL,IMAG", (z.real, z.imag)),
        ("SER", "DEG", "IMAG,REAL", (z.imag, z.real)),
        ("SER", "DEG", "MAGN,PHAS", (abs(z), np.degrees(np.angle(z)))),
        ("SER", "RAD", "MAGN,PHAS", (abs(z), np.angle(z))),
        ("PAR", "DEG", "COND,SUSC", (y.real, y.imag)),
        ("SER", "DEG", "IND,RES", (z.imag / w, z.real)),
        ("PAR", "DEG", "IND,RES", (-1 / (w * y.imag), 1 / y.real)),
        ("SER", "DEG", "CAP,RES", (-1 / (w * z.imag), z.real)),
        ("PAR", "DEG", "CAP,RES", (y.imag / w, 1 / y.real)),
        ("PAR", "DEG", "CAP,DISS", (y.imag / w, z.real / z.imag)),
        ("SER", "DEG", "IND,QUAL", (z.imag / w, z.imag / z.real)),
        ("PAR", "DEG", "QUAL,IND", (z.imag / z.real, -1 / (w * y.imag))),
    ]
    meter.query(f"FREQ {f};*OPC?")
    for circuit, unit, pair, (a, b) in expected:
        reply = meter.query(f"CIRC {circuit};UNIT:ANGL {unit};FORM:PAIR {pair};FORM:PAIR?;READ?")
        name, values = reply.split(";")
        assert name == pair
        np.testing.assert_allclose(numbers(values), [a, b], rtol=1e-12)


def test_retired_words_are_refused_naming_the_new_spelling(meter):
    meter.query("FORM:PAIR LSRS;FORM:PAIR ZRAD;SPE FAST;SPE?;*OPC?")
    assert meter.query("SYST:ERR?") == (
        '-224,"Illegal parameter value; LSRS is a retired reading-pair name; '
        'say CIRC SER;FORM:PAIR IND,RES"'
    )
    assert "UNIT:ANGL RAD;FORM:PAIR MAGN,PHAS" in meter.query("SYST:ERR?")
    for _ in range(2):
        code, text = meter.query("SYST:ERR?").split(",", 1)
        assert code == "-113" and "use PER <n>" in text
    assert meter.query("FORM:PAIR?") == "REAL,IMAG"


def test_two_words_that_are_not_a_pair_are_refused(meter):
    meter.query("FORM:PAIR REAL,DISS;FORM:PAIR IND,CAP;FORM:PAIR REAL;FORM:PAIR REAL,WHAT;*OPC?")
    assert errors(meter) == [-224, -224, -109, -224]
    assert meter.query("FORM:PAIR?") == "REAL,IMAG"


def test_dc_resistance(meter, sim):
    fx = sim.fixture
    expected = fx.series_resistance + 1 / (fx.shunt_conductance + 1 / sim.dut.dc_resistance)
    assert float(meter.query("MEAS:RDC?")) == pytest.approx(expected, rel=1e-14)


def test_overrange_and_invalid(meter):
    reply = meter.query('SIM:FIXT "direct";SIM:DUT OPEN;READ?;MEAS:RDC?;SIM:DUT NONE;READ?')
    assert numbers(reply.replace(";", ",")).tolist() == [OVERRANGE] * 3 + [INVALID] * 2


def test_simulate_dut_fixture_unit_noise_time_seed(meter, sim):
    reply = meter.query(
        'SIM:DUT "ferrite-choke";SIM:DUT?;SIM:FIXT "long-leads";SIM:FIXT?;SIM:UNIT?;'
        "SIM:UNIT:NEXT;SIM:UNIT?;SIM:NOIS?;SIM:NOIS ON;SIM:NOIS?;SIM:SEED 42;SIM:SEED?"
    )
    assert reply.split(";") == ['"ferrite-choke"', '"long-leads"', "0", "1", "0", "1", "42"]
    assert sim.dut.name == "ferrite-choke" and sim.fixture.name == "long-leads"
    assert sim.dut.inductance != 1e-3
    meter.query('SIM:DUT "no-such-coil";*OPC?')
    assert errors(meter) == [-224]


def test_measure_time_model(meter):
    # max(2 ms, periods / f) per reading; averaging multiplies (COMMANDS.md, computed by hand).
    reply = meter.query(
        "SIM:TIME?;SIM:TIME AUTO;PER 1;SIM:TIME?;PER 4;FREQ 10;SIM:TIME?;"
        "AVER:COUN 4;SIM:TIME?;SIM:TIME 20ms;SIM:TIME?"
    )
    np.testing.assert_allclose(numbers(reply.replace(";", ",")), [0, 0.002, 0.4, 1.6, 0.02])


def test_opc_sets_its_bit_when_the_measurement_ends(meter):
    assert meter.query("SIM:TIME 0.05;INIT;*OPC;*ESR?;*WAI;*ESR?") == "0;1"


def test_opc_query_waits_for_the_measurement(meter):
    reply = meter.query("SIM:TIME 0.05;INIT;*OPC?;FETC?")
    done, values = reply.split(";", 1)
    assert done == "1" and len(numbers(values)) == 2


def test_two_clients_share_the_meter_but_not_their_errors(rm, sim, meter):
    other = _open(rm, sim)
    try:
        meter.query("FREQ 4321;NOPE;*OPC?")
        assert float(other.query("FREQ?")) == 4321.0
        assert other.query("SYST:ERR:COUN?") == "0"
        assert meter.query("SYST:ERR:COUN?") == "1"
    finally:
        other.close()


def test_a_measurement_does_not_block_other_clients(rm, sim, meter):
    other = _open(rm, sim)
    try:
        meter.write("SIM:TIME 0.5;READ?")
        # While the first client's reading runs, the second is served: its INITiate is
        # refused because the (shared) meter is busy, and its queries are answered.
        assert other.query("INIT;SYST:ERR?").startswith("-213,")
        assert other.query("*IDN?").startswith(sim.meter.manufacturer)
        assert len(numbers(meter.read())) == 2
    finally:
        other.close()


def test_two_clients_reading_at_once(rm, sim, meter):
    other = _open(rm, sim)
    try:
        meter.query("SIM:TIME 0.02;*OPC?")
        meter.write("READ?")
        other.write("READ?")
        first, second = numbers(meter.read()), numbers(other.read())
        assert len(first) == len(second) == 2
        assert errors(meter) == [] and errors(other) == []
    finally:
        other.close()


def test_cr_lf_and_pipelined_messages(rm, sim):
    inst = rm.open_resource(sim.resource, read_termination="\n", write_termination="\r\n")
    inst.timeout = 2000
    try:
        inst.write_raw(b"*CLS\r\nFREQ 777\r\nFREQ?\r\nSYST:ERR:COUN?\r\n")
        assert float(inst.read()) == 777.0
        assert inst.read() == "0"
    finally:
        inst.close()
