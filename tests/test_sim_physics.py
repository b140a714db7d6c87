"""The simulated meter's physics, checked against circuit theory computed independently here.

References: the lumped equivalent circuit of a coil (series R-L shunted by its self-capacitance)
and the series-shunt L-network are standard circuit theory; the self-resonance of an L-C tank at
1/(2*pi*sqrt(LC)) is the textbook resonance formula; the skin-effect asymptote R ~ sqrt(f) follows
from the skin depth delta = sqrt(rho/(pi f mu)) (standard electromagnetics, from memory); the
open/short compensation equation is standard impedance-measurement practice (from memory);
scikit-rf's media and network cascade are an outside implementation of transmission lines and
lumped two-ports. Readings come through pyvisa-py on a real socket, with noise off.
"""

from __future__ import annotations

import tomllib

import numpy as np
import pytest
import pyvisa
from scipy.optimize import brentq

import sim_profiles

FREQUENCIES = np.geomspace(10.0, 30e6, 60)


def toml(name: str) -> dict:
    """Read a shipped profile's numbers straight from its file (not through the loader)."""
    with sim_profiles.path(f"{name}.toml").open("rb") as fh:
        return tomllib.load(fh)


def wire_reference(f: np.ndarray, p: dict) -> np.ndarray:
    """The winding's own impedance. A round wire: Z/R_dc = (j x/2)(ber x + j bei x)/(ber' x +
    j bei' x), x = sqrt(2) a/delta (the Kelvin-function form of the exact round-wire solution,
    e.g. H. B. Dwight, Electrical Coils and Conductors, McGraw-Hill 1945), the excess resistance
    times the profile's proximity factor; else the profile's resistance law."""
    from scipy.special import bei, beip, ber, berp

    rho = p.get("resistivity", 1 / 58e6)
    if "wire_diameter" not in p:
        corner = p["ac_corner_frequency"]
        return p["dc_resistance"] * np.sqrt(1 + (f / corner) ** 2) ** p.get("ac_exponent", 0.5)
    a = p["wire_diameter"] / 2
    rdc = p.get("dc_resistance") or rho * p["wire_length"] / (np.pi * a**2)
    x = np.sqrt(2) * a / np.sqrt(rho / (np.pi * f * 4e-7 * np.pi))
    ratio = 0.5j * x * (ber(x) + 1j * bei(x)) / (berp(x) + 1j * beip(x))
    return rdc * (1 + p.get("proximity_factor", 1.0) * (ratio.real - 1) + 1j * ratio.imag)


def coil_reference(f: np.ndarray, p: dict) -> np.ndarray:
    """Equivalent circuit, written as admittances: Y = jwC + 1/(Z_wire + jwL mu(f)), with the
    core's mu(f) = (1 - j tan(delta))/(1 + j f/f_r) (a Debye relaxation)."""
    w = 2 * np.pi * f
    mu = (1 - 1j * p.get("core_loss_tangent", 0.0)) / (
        1 + 1j * f / p.get("core_relaxation_frequency", np.inf)
    )
    branch = wire_reference(f, p) + 1j * w * p["inductance"] * mu
    return 1 / (1j * w * p.get("capacitance", 0.0) + 1 / branch)


def through_leads(f: np.ndarray, z_dut: np.ndarray, p: dict) -> np.ndarray:
    """L-network: series R_s + jwL_s towards the meter, shunt G + jwC across the DUT."""
    w = 2 * np.pi * f
    shunt = p["shunt_conductance"] + 1j * w * p["shunt_capacitance"]
    return p["series_resistance"] + 1j * w * p["series_inductance"] + 1 / (shunt + 1 / z_dut)


@pytest.fixture(scope="module")
def sim_options():
    return {"fixture": "direct"}


@pytest.fixture
def meter(sim):
    rm = pyvisa.ResourceManager("@py")
    inst = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
    inst.timeout = 5000
    inst.query('*RST;*CLS;SIM:NOIS OFF;SIM:FIXT "direct";SIM:SEED 0;*OPC?')
    yield inst
    inst.close()
    rm.close()


def measure(inst, f: np.ndarray) -> np.ndarray:
    """A list sweep in binary (exact float64) through pyvisa, as complex Z."""
    listed = ",".join(repr(float(v)) for v in f)
    inst.query(f"LIST:FREQ {listed};FREQ:MODE LIST;FORM REAL;*OPC?")
    values = np.array(inst.query_binary_values("READ?", datatype="d", is_big_endian=True))
    return values[0::2] + 1j * values[1::2]


def assert_close(actual: np.ndarray, expected: np.ndarray, rel: float) -> None:
    error = np.abs(actual - expected) / np.abs(expected)
    assert error.max() <= rel, f"worst relative error {error.max():.3g} at index {error.argmax()}"


@pytest.mark.parametrize("name", ["air-core-coil", "ferrite-choke", "rf-coil", "demo-coil"])
def test_coil_matches_its_equivalent_circuit(meter, name):
    meter.query(f'SIM:DUT "{name}";*OPC?')
    # 1e-10: two formulations of the round-wire Bessel functions agree to about 1e-11.
    assert_close(measure(meter, FREQUENCIES), coil_reference(FREQUENCIES, toml(name)), 1e-10)


@pytest.mark.parametrize("fixture", ["bench-leads", "long-leads"])
def test_coil_seen_through_the_leads(meter, fixture):
    meter.query(f'SIM:DUT "demo-coil";SIM:FIXT "{fixture}";*OPC?')
    z_dut = coil_reference(FREQUENCIES, toml("demo-coil"))
    expected = through_leads(FREQUENCIES, z_dut, toml(fixture))
    assert_close(measure(meter, FREQUENCIES), expected, 1e-10)


def test_cable_fixture_matches_scikit_rf_cascade(meter):
    import skrf
    from skrf.media import DefinedGammaZ0

    p = toml("cable-leads")
    line = p["line"]
    f = np.geomspace(1e3, 30e6, 25)
    meter.query('SIM:DUT "rf-coil";SIM:FIXT "cable-leads";*OPC?')
    measured = measure(meter, f)

    freq = skrf.Frequency.from_f(f, unit="hz")
    w = 2 * np.pi * f
    media = DefinedGammaZ0(
        freq, z0=line["impedance"], gamma=1j * w / (line["velocity_factor"] * 299_792_458.0)
    )
    z_dut = coil_reference(f, toml("rf-coil"))
    network = (
        media.line(line["length"], unit="m")
        ** media.resistor(p["series_resistance"])
        ** media.inductor(p["series_inductance"])
        ** media.shunt_capacitor(p["shunt_capacitance"])
        ** media.shunt(media.resistor(1 / p["shunt_conductance"]) ** media.short())
        ** media.load((z_dut - line["impedance"]) / (z_dut + line["impedance"]))
    )
    assert_close(measured, network.z[:, 0, 0], 1e-9)


def test_standards_through_the_leads(meter, sim):
    p = toml("bench-leads")
    f = np.geomspace(100.0, 10e6, 9)
    w = 2 * np.pi * f
    series = p["series_resistance"] + 1j * w * p["series_inductance"]
    shunt = p["shunt_conductance"] + 1j * w * p["shunt_capacitance"]
    load = toml("load")
    load_z = load["resistance"] + 1j * w * load["series_inductance"]
    meter.query('SIM:FIXT "bench-leads";SIM:DUT OPEN;*OPC?')
    assert_close(measure(meter, f), series + 1 / shunt, 1e-12)
    meter.query("SIM:DUT SHORT;*OPC?")
    assert_close(measure(meter, f), series, 1e-12)
    meter.query("SIM:DUT LOAD;*OPC?")
    assert_close(measure(meter, f), series + 1 / (shunt + 1 / load_z), 1e-12)
    assert_close(sim.load_true(f), load_z, 1e-15)


def test_open_short_compensation_recovers_the_dut(meter):
    # Open/short compensation equation (standard practice, from memory), exact for a series
    # residual towards the meter and a stray shunt across the DUT:
    # Zx = (Zm - Zs) / (1 - (Zm - Zs) (Zo - Zs)^-1).
    f = np.geomspace(100.0, 10e6, 9)
    readings = {}
    meter.query('SIM:FIXT "long-leads";*OPC?')
    for dut in ("OPEN", "SHORT", '"air-core-coil"'):
        meter.query(f"SIM:DUT {dut};*OPC?")
        readings[dut] = measure(meter, f)
    zo, zs, zm = readings["OPEN"], readings["SHORT"], readings['"air-core-coil"']
    zx = (zm - zs) / (1 - (zm - zs) / (zo - zs))
    assert_close(zx, coil_reference(f, toml("air-core-coil")), 1e-9)


def _zero_reactance(sim, profile, f0: float) -> float:
    sim.insert(profile)
    try:
        return brentq(lambda f: float(sim.dut_impedance(f).imag), 0.9 * f0, 1.1 * f0, xtol=1e-9)
    finally:
        sim.insert("air-core-coil")


def test_self_resonance_at_the_lc_frequency(sim, tmp_path):
    # An almost lossless coil: the reactance crosses zero at 1/(2 pi sqrt(LC)).
    L, C = 4.7e-6, 22e-12
    path = tmp_path / "tank.toml"
    path.write_text(
        f"kind = 'coil'\ninductance = {L!r}\ndc_resistance = 1e-6\ncapacitance = {C!r}\n"
    )
    f0 = 1 / (2 * np.pi * np.sqrt(L * C))
    assert _zero_reactance(sim, path, f0) == pytest.approx(f0, rel=1e-9)


@pytest.mark.parametrize("name", ["air-core-coil", "rf-coil", "demo-coil"])
def test_self_resonance_of_the_lossy_coils(sim, name):
    # (R + jwL) || C has zero reactance where w^2 = 1/(LC) - (R/L)^2 (standard circuit theory),
    # with R and L (external plus the wire's internal) taken at that frequency (solved here by
    # fixed-point iteration).
    p = toml(name)
    C = p["capacitance"]
    f0 = 1 / (2 * np.pi * np.sqrt(p["inductance"] * C))
    f = f0
    for _ in range(50):
        wire = wire_reference(np.array([f]), p)[0]
        r, L = wire.real, p["inductance"] + wire.imag / (2 * np.pi * f)
        f = np.sqrt(1 / (L * C) - (r / L) ** 2) / (2 * np.pi)
    assert _zero_reactance(sim, name, f0) == pytest.approx(f, rel=1e-9)
    assert f == pytest.approx(f0, rel=1e-3)  # the wire's internal inductance lowers it a little


def test_self_resonance_seen_through_pyvisa(meter):
    p = toml("rf-coil")
    f0 = 1 / (2 * np.pi * np.sqrt(p["inductance"] * p["capacitance"]))
    meter.query('SIM:DUT "rf-coil";*OPC?')
    f = f0 * np.linspace(0.98, 1.02, 201)
    z = measure(meter, f)
    assert z[0].imag > 0 > z[-1].imag
    # within a grid step and the 0.04 % by which the wire's internal inductance lowers it
    assert abs(f[np.argmax(np.abs(z))] / f0 - 1) <= 0.0006


def test_demo_coil_resonates_near_7_mhz():
    # Scenario consistency (demo data): L about 344 uH with 1.46 pF resonates near 7.1 MHz.
    p = toml("demo-coil")
    assert 1 / (2 * np.pi * np.sqrt(p["inductance"] * p["capacitance"])) == pytest.approx(
        7e6, rel=0.02
    )


def test_ac_resistance_follows_the_skin_effect_asymptote():
    from drivers.simulator.physics import ac_resistance

    rdc, fc = 0.05, 200e3
    assert ac_resistance(fc / 1e4, rdc, fc) == pytest.approx(rdc, rel=1e-8)
    f = np.array([1e4, 1e5]) * fc
    r = ac_resistance(f, rdc, fc)
    slope = np.log(r[1] / r[0]) / np.log(f[1] / f[0])
    assert slope == pytest.approx(0.5, abs=1e-6)
    assert np.array_equal(ac_resistance(f, rdc, None), [rdc, rdc])


def test_dut_impedance_and_seen_impedance_agree_with_readings(meter, sim):
    meter.query('SIM:DUT "ferrite-choke";SIM:FIXT "bench-leads";*OPC?')
    f = np.geomspace(1e3, 1e6, 5)
    assert_close(measure(meter, f), sim.seen_impedance(f), 1e-15)
    assert_close(sim.dut_impedance(f), coil_reference(f, toml("ferrite-choke")), 1e-12)
    assert sim.seen_impedance(1e3).shape == ()
