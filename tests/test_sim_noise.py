"""Noise of the simulated meter: seeded, unbiased, of the documented size, and shaped by settings.

The noise model itself is our own (common practice for such meters, no published source): a
relative floor by accuracy class with absolute floors that grow the relative noise at extreme
|Z|. What is checked against outside knowledge is statistics: the sample standard deviation of
N independent normal readings estimates sigma within about 1/sqrt(2N) (relative), the mean within
sigma/sqrt(N), and averaging n readings divides sigma by sqrt(n) (standard results).
"""

from __future__ import annotations

import numpy as np
import pytest
import pyvisa

N = 400


@pytest.fixture(scope="module")
def sim_options():
    return {"fixture": "direct", "seed": 11, "noise": True}


@pytest.fixture
def meter(sim):
    rm = pyvisa.ResourceManager("@py")
    inst = rm.open_resource(sim.resource, read_termination="\n", write_termination="\n")
    inst.timeout = 5000
    inst.query(
        '*RST;*CLS;VOLT 1;SIM:NOIS ON;SIM:FIXT "direct";SIM:DUT "air-core-coil";SIM:SEED 11;'
        f"LIST:FREQ {','.join(['1e4'] * N)};FREQ:MODE LIST;FORM REAL;*OPC?"
    )
    yield inst
    inst.close()
    rm.close()


def readings(inst, setup: str = "") -> np.ndarray:
    """N readings of the same point (a list of N equal frequencies), as complex Z."""
    if setup:
        inst.query(f"{setup};*OPC?")
    values = np.array(inst.query_binary_values("READ?", datatype="d", is_big_endian=True))
    return values[0::2] + 1j * values[1::2]


def spread(z: np.ndarray) -> float:
    return float(np.std(z.real, ddof=1))


def test_noise_is_unbiased_and_of_the_model_size(meter, sim):
    z = readings(meter)
    exact = complex(sim.seen_impedance(1e4))
    m, magnitude = sim.meter, abs(exact)
    # The documented model (COMMANDS.md, "Time and noise") at 4 periods per reading (the meter's
    # reference), 1 V (r = reference level / 1 V), no averaging.
    r = m.reference_level / 1.0
    sigma = (
        m.accuracy_class
        * (1 + 1e4 / m.frequency_corner)
        * (
            np.sqrt(r) * magnitude
            + r * (m.low_impedance_corner + magnitude**2 / m.high_impedance_corner)
        )
    )
    # The mean is off by at most the meter's systematic error (measurement.py), within its bound.
    bound = (
        m.systematic_accuracy
        * (1 + 1e4 / m.frequency_corner)
        * (magnitude + r * (m.low_impedance_corner + magnitude**2 / m.high_impedance_corner))
    )
    for part, truth in ((z.real, exact.real), (z.imag, exact.imag)):
        assert abs(part.mean() - truth) < bound + 5 * sigma / np.sqrt(N)
        assert np.std(part, ddof=1) == pytest.approx(sigma, rel=5 / np.sqrt(2 * N))


def test_seeded_noise_repeats(meter):
    first = readings(meter, "SIM:SEED 5")
    again = readings(meter, "SIM:SEED 5")
    other = readings(meter, "SIM:SEED 6")
    np.testing.assert_array_equal(first, again)
    assert not np.array_equal(first, other)


def test_fewer_periods_per_reading_are_noisier(meter):
    one, four, sixteen = (spread(readings(meter, f"PER {n}")) for n in (1, 4, 16))
    assert one / four == pytest.approx(2.0, rel=0.25)  # sqrt(4 / 1)
    assert four / sixteen == pytest.approx(2.0, rel=0.25)  # sqrt(16 / 4)


def test_lower_level_is_noisier(meter):
    assert spread(readings(meter, "VOLT 10mV")) > 3 * spread(readings(meter, "VOLT 1"))


def test_averaging_divides_the_noise_by_sqrt_n(meter):
    single = spread(readings(meter, "AVER:COUN 1"))
    sixteen = spread(readings(meter, "AVER:COUN 16"))
    assert single / sixteen == pytest.approx(4.0, rel=0.25)


def test_relative_noise_grows_at_extreme_impedance(meter):
    def relative(setup: str, f: float = 1e4) -> float:
        z = readings(meter, f"{setup};LIST:FREQ {','.join([repr(f)] * N)}")
        return spread(z) / abs(z.mean())

    middle = relative('SIM:DUT "load"')  # 100 ohm
    assert relative('SIM:DUT SHORT;SIM:FIXT "bench-leads"') > 5 * middle  # about 27 mohm
    assert relative('SIM:DUT OPEN;SIM:FIXT "bench-leads"', 100.0) > 5 * middle  # about 200 Mohm


def test_noise_off_is_exact(meter, sim):
    z = readings(meter, "SIM:NOIS OFF")
    assert np.all(z == sim.seen_impedance(1e4))
