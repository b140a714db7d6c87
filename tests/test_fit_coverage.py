"""Coverage of the fit's reported 1σ uncertainties over many simulated sweeps.

For a standard uncertainty to mean what it says, the true value must lie within ±1σ of the
fitted one in about 68.3 % of repeated measurements (the coverage of ±1σ of a normal
distribution; JCGM 100:2008, the GUM, G.1 and table G.1). Each seed here is an independent
measurement of the demo coil through the simulated meter over a real socket: without a fixture,
and through the bench leads with open, short and load references captured for that seed
(the references' own noise included). The coil's physics (exact round-wire skin effect with
internal inductance, proximity loss) is richer than any of the fit's circuits, and its true
values come from the profile (:meth:`DutProfile.true_values`).

The per-point standard uncertainty handed to the fit is the simulator's documented noise model
(drivers/simulator/physics.py, ``noise_deviation``) written out again here and propagated
through the open-short-load formula to the corrected point (computed): the reading's noise and
each standard's noise enter through the formula's derivatives, which are complex numbers
because the formula is a holomorphic (bilinear) map, so a circular error of σ in a reading gives
a circular error of ``|∂Zx/∂Z|·σ`` in the corrected value. The standards are read at every
frequency of the sweep, so their errors are independent from point to point.

The goal is 68 % ± 10 points per parameter over the seeds. The binomial standard deviation of a
coverage over n seeds is ``√(0.683·0.317/n)`` (4.7 points for the 100 seeds here, computed),
so the band is about two of them: a test of honest uncertainties, not of luck, needs many seeds.
"""

from __future__ import annotations

import math

import numpy as np
import pytest

from acquire.coil import fit_sweep
from drivers.meter import ImpedanceMeter
from drivers.simulator import running
from drivers.simulator.profiles import load_dut, load_meter

SEEDS = range(100)
POINTS = 41
F = np.geomspace(100.0, 10e6, POINTS)
KEYS = ("L", "Rdc", "Cp", "SRF")
TARGET, BAND = 0.683, 0.10


def reading_sigma(z: np.ndarray, f: np.ndarray) -> np.ndarray:
    """The simulated meter's one-sigma noise per component at its default settings (1 V,
    medium speed, no averaging): a·(1 + f/f_corner)·(|Z| + Z_low + |Z|²/Z_high)."""
    m = load_meter()
    mag = np.abs(z)
    spread = mag + m.low_impedance_corner + mag**2 / m.high_impedance_corner
    return m.accuracy_class * (1 + f / m.frequency_corner) * spread


def open_short_load(zm, zo, zs, zl, zt):
    """Zx = Zt (Zo − Zl)(Zm − Zs) / ((Zl − Zs)(Zo − Zm)): the bilinear map taking the short
    to 0, the open to infinity and the load to its true value (computed)."""
    return zt * (zo - zl) * (zm - zs) / ((zl - zs) * (zo - zm))


def corrected_sigma(zm, zo, zs, zl, zt, f) -> np.ndarray:
    """Per-point standard uncertainty of the corrected value: each input's circular noise
    times the modulus of the formula's complex derivative (central differences, computed)."""
    inputs = [zm, zo, zs, zl]
    variance = np.zeros(f.size)
    for i, z in enumerate(inputs):
        h = 1e-7 * np.abs(z)
        up = [v + h if j == i else v for j, v in enumerate(inputs)]
        down = [v - h if j == i else v for j, v in enumerate(inputs)]
        derivative = (open_short_load(*up, zt) - open_short_load(*down, zt)) / (2 * h)
        variance += (np.abs(derivative) * reading_sigma(z, f)) ** 2
    return np.sqrt(variance)


def measure(seeds):
    """For each seed: (direct sweep, its sigma), (corrected sweep through leads, its sigma)."""
    out = []
    with (
        running(dut="demo-coil", fixture="direct", seed=0, measure_time=0) as sim,
        ImpedanceMeter.open(sim.resource) as meter,
    ):
        for seed in seeds:
            sim.reseed(seed)
            sim.set_fixture("direct")
            sim.insert("demo-coil")
            z = meter.sweep(F)
            direct = (z, reading_sigma(z, F))
            sim.set_fixture("bench-leads")
            readings = {}
            for standard in ("open", "short", "load", "demo-coil"):
                sim.insert(standard)
                readings[standard] = meter.sweep(F)
            zt = sim.load_true(F)
            zo, zs, zl, zm = (readings[k] for k in ("open", "short", "load", "demo-coil"))
            zx = open_short_load(zm, zo, zs, zl, zt)
            out.append((direct, (zx, corrected_sigma(zm, zo, zs, zl, zt, F))))
    return out


@pytest.fixture(scope="module")
def sweeps():
    return measure(SEEDS)


@pytest.fixture(scope="module")
def truth():
    return load_dut("demo-coil").true_values()


def coverage(sweeps, truth, which: int, use_sigma: bool = True) -> dict[str, float]:
    hits = {k: 0 for k in KEYS}
    counted = {k: 0 for k in KEYS}
    for pair in sweeps:
        z, sigma = pair[which]
        fit = fit_sweep(F, z, sigma=sigma) if use_sigma else fit_sweep(F, z)
        for key in KEYS:
            v = fit.get(key)
            assert v.value is not None and v.sigma is not None, (key, v.note)
            counted[key] += 1
            hits[key] += abs(v.value - truth[key]) <= v.sigma
    return {k: hits[k] / counted[k] for k in KEYS}


@pytest.mark.parametrize(("which", "label"), [(0, "no fixture"), (1, "through bench leads")])
def test_one_sigma_covers_the_truth_68_percent_of_the_time(sweeps, truth, which, label):
    result = coverage(sweeps, truth, which)
    print(f"coverage {label}: " + ", ".join(f"{k} {v:.0%}" for k, v in result.items()))
    for key, value in result.items():
        assert abs(value - TARGET) <= BAND, f"{label}: {key} covered {value:.0%} of {len(SEEDS)}"


def test_the_true_values_are_the_physics_not_the_fit_circuit(truth):
    # L at DC includes the wire's internal inductance mu0*l/(8 pi) (0.05e-6 H/m times the
    # 14.62 m of wire, computed); the SRF is the exact phase zero, between 1/(2 pi sqrt(LC))
    # with L at DC and with the external L alone (the internal part fades at high frequency).
    dut = load_dut("demo-coil")
    assert truth["L"] == pytest.approx(dut.inductance + 1e-7 / 2 * 14.62, rel=1e-6)
    at_dc = 1 / (2 * math.pi * math.sqrt(truth["L"] * truth["Cp"]))
    external = 1 / (2 * math.pi * math.sqrt(dut.inductance * truth["Cp"]))
    assert at_dc < truth["SRF"] < external
    z = dut.impedance(np.array([truth["SRF"] * (1 - 1e-9), truth["SRF"] * (1 + 1e-9)]))
    assert z[0].imag > 0 > z[1].imag
