"""Every fault of the simulated meter, through pyvisa-py on a real socket, and its determinism."""

from __future__ import annotations

import numpy as np
import pytest
import pyvisa

from drivers.errors import ProfileError
from drivers.simulator.faults import FaultSpec

IDN_PREFIX = "coil-acquire,"


@pytest.fixture(scope="module")
def sim_options():
    return {"seed": 7, "noise": True}


@pytest.fixture(scope="module")
def rm():
    manager = pyvisa.ResourceManager("@py")
    yield manager
    manager.close()


@pytest.fixture
def meter(rm, sim):
    sim.clear_faults()
    inst = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
    inst.timeout = 2000
    inst.query('*RST;*CLS;SIM:FAUL:CLE;SIM:SEED 7;SIM:DUT "air-core-coil";*OPC?')
    yield inst
    inst.close()
    sim.clear_faults()


def times_out(inst, message: str, timeout_ms: int = 150) -> bool:
    inst.timeout = timeout_ms
    try:
        inst.query(message)
    except pyvisa.errors.VisaIOError as exc:
        return exc.error_code == pyvisa.constants.StatusCode.error_timeout
    finally:
        inst.timeout = 2000
    return False


def test_drop_closes_the_connection_at_the_nth_message(rm, sim, meter):
    assert meter.query("SIM:FAUL DROP,2;*IDN?").startswith(IDN_PREFIX)
    assert meter.query("*IDN?").startswith(IDN_PREFIX)
    assert times_out(meter, "*IDN?")
    assert times_out(meter, "*IDN?")  # the socket is gone for good
    fresh = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
    try:
        assert fresh.query("*IDN?").startswith(IDN_PREFIX)
    finally:
        fresh.close()


def test_stall_withholds_one_reply_and_the_session_goes_on(meter):
    assert meter.query("SIM:FAUL STAL,2;*IDN?").startswith(IDN_PREFIX)
    assert meter.query("FREQ?") == "+1E+03"
    assert times_out(meter, "*IDN?")
    assert meter.query("*IDN?").startswith(IDN_PREFIX)


def test_garble_is_junk_and_repeats_under_the_seed(meter):
    clean = meter.query("SIM:SEED 1;SIM:FAUL GARB;*IDN?")
    garbled = meter.query("*IDN?")
    meter.query("SIM:SEED 1;SIM:FAUL GARB;*OPC?")
    again = meter.query("*IDN?")
    assert garbled == again != clean
    assert len(garbled) == len(clean) and garbled[0] in "@$%&?~!^"
    meter.query("SIM:FAUL GARB;*OPC?")
    reading = meter.query("READ?")
    with pytest.raises(ValueError):
        [float(v) for v in reading.split(",")]


def test_truncate_cuts_the_reply_short(meter):
    clean = meter.query("SIM:FAUL TRUN;*IDN?")
    cut = meter.query("*IDN?")
    assert 0 < len(cut) < len(clean) and clean.startswith(cut)
    assert meter.query("*IDN?") == clean


def test_count_drops_the_last_value_of_the_nth_reading(meter):
    reply = meter.query("SIM:FAUL COUN,2;LIST:FREQ 1e3,1e4,1e5;FREQ:MODE LIST;READ?")
    assert len(reply.split(",")) == 6  # the arming message's own reading is not counted
    assert len(meter.query("READ?").split(",")) == 6
    assert len(meter.query("READ?").split(",")) == 5
    assert len(meter.query("READ?").split(",")) == 6


def test_error_is_pushed_on_the_next_clients_queue(meter, sim):
    assert meter.query("SIM:FAUL ERR,-350;*IDN?").startswith(IDN_PREFIX)
    assert meter.query("SYST:ERR?") == '-350,"Queue overflow"'
    sim.inject("error", -222)
    assert meter.query("SYST:ERR?;SYST:ERR?") == '-222,"Data out of range";0,"No error"'


def test_overrange_at_chosen_frequencies(meter, sim):
    sim.inject("overrange", frequency=1e5)
    values = meter.query("LIST:FREQ 1e4,1.0005e5,1e6;FREQ:MODE LIST;READ?").split(",")
    assert [float(v) == 9.9e37 for v in values] == [False, False, True, True, False, False]
    meter.query("SIM:FAUL:CLE;SIM:FAUL OVER,1MHZ;*OPC?")
    values = meter.query("READ?").split(",")
    assert [float(v) == 9.9e37 for v in values] == [False, False, False, False, True, True]


def test_rate_faults_repeat_under_the_seed(meter):
    def pattern() -> list[bool]:
        meter.query("SIM:FAUL:CLE;SIM:SEED 3;SIM:FAUL:RATE GARB,0.3;*OPC?")
        return [meter.query("*TST?") != "0" for _ in range(30)]

    first = pattern()
    assert 3 <= sum(first) <= 20
    assert pattern() == first


def test_handle_inject_drop_and_clear(rm, sim, meter):
    spec = sim.inject("drop", 1)
    assert spec == FaultSpec("drop", n=1)
    sim.clear_faults()
    assert meter.query("*IDN?").startswith(IDN_PREFIX)
    sim.inject("stall")
    assert times_out(meter, "*IDN?")
    assert meter.query("*IDN?").startswith(IDN_PREFIX)


def test_handle_refuses_bad_faults(sim):
    with pytest.raises(ProfileError, match="unknown fault"):
        sim.inject("smoke")
    with pytest.raises(ProfileError, match="at least 1"):
        sim.inject("garble", 0)
    with pytest.raises(ProfileError, match="rate"):
        sim.inject("garble", rate=2.0)


def test_scpi_refuses_bad_faults(meter):
    meter.query("SIM:FAUL SMOKE;SIM:FAUL GARB,0;SIM:FAUL ERR;SIM:FAUL:RATE DROP,1.5;*OPC?")
    codes = [int(meter.query("SYST:ERR?").split(",")[0]) for _ in range(4)]
    assert codes == [-224, -224, -109, -222]


def test_profile_faults_are_armed_on_insert(meter, sim, tmp_path):
    path = tmp_path / "flaky-coil.toml"
    path.write_text(
        'kind = "coil"\ninductance = 1e-5\ndc_resistance = 0.1\n'
        '[[faults]]\nkind = "truncate"\nn = 2\n[[faults]]\nkind = "overrange"\nfrequency = 1e3\n'
    )
    clean = meter.query("*IDN?")
    sim.insert(path)  # a client names profiles only (test_hardening_files); counts from now
    assert [f.kind for f in sim.faults] == ["truncate", "overrange"]
    assert np.array([float(v) for v in meter.query("READ?").split(",")]).tolist() == [9.9e37] * 2
    cut = meter.query("*IDN?")
    assert len(cut) < len(clean) and clean.startswith(cut)
