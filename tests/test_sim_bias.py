"""DC bias on the simulated meter and its DC current source; saturating and warming chokes.

Outside references: the copper resistance law of the resistance method, ``R2/R1 = (234.5 +
T2)/(234.5 + T1)`` (IEC 60076-2, inferred zero-resistance temperature 234.5 °C; from memory);
SCPI-99 error -222 "Data out of range" (from memory); scipy's root finder and ODE integrator as
reference libraries for the saturation curve's closed form and the thermal model's exact step.
The meter is reached through pyvisa-py on a real loopback socket.
"""

from __future__ import annotations

import math
import os
import signal
import subprocess
import sys
import time

import numpy as np
import pytest
import pyvisa
from scipy.integrate import solve_ivp
from scipy.optimize import brentq

from drivers.errors import ProfileError
from drivers.simulator import running, thermal
from drivers.simulator.profiles import dut_from_dict, load_dut
from drivers.simulator.saturation import drop_current, inductance_factor

F = 10e3  # Hz: the chokes' self-capacitance moves Ls by under 2e-6 here (computed, w^2 L C)


@pytest.fixture(scope="module")
def rm():
    manager = pyvisa.ResourceManager("@py")
    yield manager
    manager.close()


@pytest.fixture
def bench():
    with running(
        dut="powder-choke", fixture="direct", noise=False, measure_time=0, source_port=0
    ) as sim:
        yield sim


def _open(rm, resource: str):
    inst = rm.open_resource(resource, read_termination="\n", write_termination="\n")
    inst.timeout = 3000
    return inst


def _numbers(reply: str) -> list[float]:
    return [float(v) for part in reply.split(";") for v in part.split(",")]


def _log(inst, entries: int) -> list[float]:
    """The bias log once it holds ``entries`` (the server notices a close a moment later)."""
    for _ in range(200):
        reply = inst.query("SIM:BIAS:LOG?")
        values = [float(v) for v in reply.split(",")] if reply else []
        if len(values) >= entries:
            return values
        time.sleep(0.01)
    raise AssertionError(f"the bias log never reached {entries} entries: {reply!r}")


# The saturation curve and its closed form


@pytest.mark.parametrize("name", ["powder-choke", "ferrite-power-choke"])
@pytest.mark.parametrize("drop", [0.1, 0.2, 0.3])
def test_drop_current_closed_form_matches_a_root_of_the_curve(name, drop):
    profile = load_dut(name)
    v = profile.values
    # reference: scipy's brentq on L(I)/L0 = 1 - d
    root = brentq(
        lambda i: (
            float(inductance_factor(i, v["saturation_current"], v["saturation_sharpness"]))
            - (1 - drop)
        ),
        0.0,
        100.0,
        xtol=1e-13,
    )
    assert drop_current(profile, drop) == pytest.approx(root, rel=1e-10)


def test_drop_current_worked_example():
    # computed: I_s = 10 A, p = 2, d = 0.2: 10 * (0.2/0.8)^(1/2) = 10 * 0.5 = 5 A
    assert drop_current((10.0, 2.0), 0.2) == pytest.approx(5.0, rel=1e-15)
    # computed: I_s = 5 A, p = 8, d = 0.1: 5 * (1/9)^(1/8) = 3.7992...
    assert drop_current({"saturation_current": 5.0, "saturation_sharpness": 8.0}, 0.1) == (
        pytest.approx(5.0 * (1 / 9) ** 0.125)
    )


def test_shipped_chokes_drops_fit_a_zero_to_six_amp_sweep():
    soft, hard = load_dut("powder-choke"), load_dut("ferrite-power-choke")
    for profile in (soft, hard):
        for drop in (0.1, 0.2):
            assert 0 < drop_current(profile, drop) < 6.0
    assert soft.saturation_sharpness < hard.saturation_sharpness
    assert drop_current(soft, 0.3) > 6.0  # "above 6 A" can be tested on the soft core


def test_saturation_and_thermal_keys_come_in_pairs():
    base = {"kind": "coil", "inductance": 1e-5, "dc_resistance": 0.1}
    with pytest.raises(ProfileError, match="saturation_sharpness"):
        dut_from_dict(base | {"saturation_current": 3.0}, "x")
    with pytest.raises(ProfileError, match="thermal_time_constant"):
        dut_from_dict(base | {"thermal_resistance": 30.0}, "x")


# Copper's resistance law and the thermal model


def test_copper_resistance_worked_example():
    # computed from IEC 60076-2's law: R60/R20 = (234.5 + 60)/(234.5 + 20) = 294.5/254.5
    assert thermal.copper_resistance(1.0, 20.0, 60.0) == pytest.approx(1.1571709233791749)


def test_steady_state_rise_worked_example():
    # computed: powder choke at 5 A, R20 = 0.030 ohm, R_th = 45 K/W, ambient 23 degC:
    # g = 25*45*0.030/254.5 = 33.75/254.5 = 0.1326130, dT = g*(234.5 + 23)/(1 - g)
    # = 34.14784/0.8673870 = 39.36863 K
    rise = thermal.steady_state_rise(5.0, 0.030, 20.0, 23.0, 45.0)
    assert rise == pytest.approx(39.36863, rel=1e-6)
    # the rise solves dT = I^2 R_th R(T_amb + dT)
    assert rise == pytest.approx(25 * 45 * thermal.copper_resistance(0.030, 20.0, 23.0 + rise))


def test_thermal_step_is_exact_against_an_ode_integrator():
    args = (4.0, 0.05, 20.0, 23.0, 35.0, 150.0)  # I, R_ref, T_ref, T_amb, R_th, tau

    def slope(t, y):
        current, r_ref, t_ref, t_amb, r_th, tau = args
        power = current**2 * thermal.copper_resistance(r_ref, t_ref, y[0])
        return [(power * r_th - (y[0] - t_amb)) / tau]

    # reference: scipy's solve_ivp (RK45, tight tolerances)
    ref = solve_ivp(slope, (0, 200.0), [30.0], rtol=1e-11, atol=1e-11).y[0, -1]
    assert thermal.advance(30.0, 200.0, *args) == pytest.approx(ref, rel=1e-8)


# Over the socket


def test_bias_commands_and_limit(rm, bench):
    m = _open(rm, bench.resource)
    assert m.query("BIAS:LIM?;BIAS:CURR?;BIAS:STAT?;BIAS:MEAS?") == "+8E+00;+0E+00;0;+0E+00"
    assert m.query("BIAS:CURR 2.5;BIAS:CURR?;BIAS:MEAS?") == "+2.5E+00;+0E+00"  # off: no current
    assert m.query("BIAS:STAT ON;BIAS:STAT?;BIAS:MEAS?") == "1;+2.5E+00"
    assert m.query("BIAS:CURR 500mA;:BIAS:CURRENT?") == "+5E-01"
    # SCPI-99 -222 "Data out of range" beyond the meter's limit; the setpoint stays
    assert m.query("BIAS:CURR 8.5;SYST:ERR?;BIAS:CURR?").startswith("-222,")
    assert m.query("BIAS:CURR?") == "+5E-01"
    assert m.query("BIAS:CURR -1;SYST:ERR?").startswith("-222,")
    assert m.query("*RST;BIAS:STAT?;BIAS:CURR?;BIAS:MEAS?") == "0;+0E+00;+0E+00"
    m.close()


def test_inductance_under_bias_follows_the_closed_form_in_every_reading_path(rm, bench):
    m = _open(rm, bench.resource)
    l0 = bench.dut.inductance
    m.query(f"FREQ {F};FORM:PAIR IND,RES;BIAS:STAT ON;*OPC?")
    for amps in (0.0, 2.0, 5.0, 7.5):
        point = _numbers(m.query(f"BIAS:CURR {amps};FREQ:MODE FIX;READ?"))
        listed = _numbers(m.query(f"LIST:FREQ {F},{F};FREQ:MODE LIST;READ?"))
        expected = l0 / (1 + (amps / 10.0) ** 2)  # the powder choke: I_s = 10 A, p = 2
        assert point[0] == pytest.approx(expected, rel=1e-5)
        assert listed[0] == listed[2] == pytest.approx(expected, rel=1e-5)
    m.close()


def test_bias_leaves_a_coil_without_saturation_keys_exactly_alone(rm, bench):
    m = _open(rm, bench.resource)
    m.query('SIM:DUT "air-core-coil";FORM:PAIR IND,RES;FREQ 100kHz;*OPC?')
    before = m.query("READ?;MEAS:RDC?")
    after = m.query("BIAS:CURR 8;BIAS:STAT ON;READ?;MEAS:RDC?")
    assert before == after
    m.query('SIM:DUT "open";*OPC?')
    assert m.query("BIAS:MEAS?") == "+0E+00"  # no DC path, no bias current
    m.close()


def test_winding_settles_at_the_closed_form_rise_and_rdc_follows_copper(rm, bench):
    m = _open(rm, bench.resource)
    assert float(m.query("SIM:TEMP?")) == pytest.approx(23.0)
    rdc_cold = float(m.query("MEAS:RDC?"))
    # copper law from 20 degC to the ambient 23 degC: 0.030 * 257.5/254.5 (computed)
    assert rdc_cold == pytest.approx(0.030 * 257.5 / 254.5, rel=1e-12)
    m.query("SIM:WARP 100000;BIAS:CURR 5;BIAS:STAT ON;*OPC?")
    time.sleep(0.1)  # at least 10 000 thermal seconds, over 100 time constants of 90 s
    m.query("SIM:WARP 0;*OPC?")  # freeze the thermal clock
    temperature = float(m.query("SIM:TEMP?"))
    # closed form, worked above (computed): 23 + 39.36863 degC
    assert temperature == pytest.approx(23.0 + 39.36863, rel=1e-6)
    rdc_hot = float(m.query("MEAS:RDC?"))
    assert rdc_hot == pytest.approx(0.030 * (234.5 + temperature) / 254.5, rel=1e-12)
    # the resistance method (IEC 60076-2) gives the rise back from the two readings
    rise = rdc_hot / rdc_cold * (234.5 + 23.0) - (234.5 + 23.0)
    assert rise == pytest.approx(39.36863, rel=1e-6)
    m.close()


def test_disconnects_log_the_current_flowing(rm, bench):
    watcher = _open(rm, bench.resource)
    assert watcher.query("SIM:BIAS:LOG?") == ""
    first = _open(rm, bench.resource)
    first.query("BIAS:CURR 3;BIAS:STAT ON;*OPC?")
    first.close()  # leaves 3 A flowing
    assert _log(watcher, 1) == [3.0]
    second = _open(rm, bench.resource)
    second.query("BIAS:CURR 1.5;BIAS:CURR 0;*OPC?")
    second.close()  # brought it to zero first
    assert _log(watcher, 2) == [3.0, 0.0]
    assert bench.bias_log == [3.0, 0.0]
    watcher.close()


def test_dc_source_adds_its_current_to_the_meter_bias(rm, bench):
    m = _open(rm, bench.resource)
    s = _open(rm, bench.source_resource)
    assert s.query("*IDN?").startswith("coil-acquire,Simulated DC Current Source,")
    assert s.query("SOUR:CURR? MAX;SOUR:CURR?;OUTP?;MEAS:CURR?") == "+1E+01;+0E+00;0;+0E+00"
    assert s.query("SOUR:CURR 11;SYST:ERR?").startswith("-222,")
    s.query("SOUR:CURR 3;OUTP ON;*IDN?")
    assert s.query("OUTP?;MEAS:CURR?") == "1;+3E+00"
    m.query(f"FREQ {F};FORM:PAIR IND,RES;BIAS:CURR 2;BIAS:STAT ON;*OPC?")
    ls = _numbers(m.query("READ?"))[0]
    assert ls == pytest.approx(bench.dut.inductance / (1 + (5.0 / 10.0) ** 2), rel=1e-5)
    s.close()  # 5 A flowing as the source's client leaves
    assert _log(m, 1) == [5.0]
    s = _open(rm, bench.source_resource)
    s.query("*RST;*IDN?")
    assert s.query("OUTP?;SOUR:CURR?;SYST:ERR?") == '0;+0E+00;0,"No error"'
    s.close()
    m.close()


def test_cli_prints_the_source_resource_second():
    env = dict(os.environ, PYTHONUNBUFFERED="1")
    proc = subprocess.Popen(
        [sys.executable, "-m", "acquire", "sim", "--port", "0", "--source-port", "0",
         "--profile", "ferrite-power-choke", "--quiet"],
        stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, env=env,
    )  # fmt: skip
    try:
        meter, source = proc.stdout.readline().strip(), proc.stdout.readline().strip()
        assert meter != source and source.endswith("::SOCKET")
        rm = pyvisa.ResourceManager("@py")
        inst = _open(rm, source)
        assert "Simulated DC Current Source" in inst.query("*IDN?")
        inst.close()
        rm.close()
    finally:
        proc.send_signal(signal.SIGINT)
        proc.communicate(timeout=20)
    assert proc.returncode == 0


def test_thermal_runaway_stops_at_the_limit():
    # g = I^2 R_th R_ref / 254.5 >= 1 has no steady state (computed)
    assert math.isinf(thermal.steady_state_rise(20.0, 1.0, 20.0, 23.0, 1.0))
    hot = thermal.advance(23.0, 1e6, 20.0, 1.0, 20.0, 23.0, 1.0, 10.0)
    assert hot == thermal.RUNAWAY_LIMIT
    assert np.isfinite(hot)
