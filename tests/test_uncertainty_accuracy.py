"""The meter's stated accuracy: the dialect's [accuracy] table, the Type B and Type A inputs,
the simulated meter keeping to what its dialect states, and the correction wrapper.

Sources: rectangular distribution, u = a/√3 (JCGM 100:2008 4.3.7); standard deviation of the
mean (JCGM 100:2008 4.2.2, 4.2.3), checked against Python's ``statistics.stdev``; values of the
documented formula worked by hand (computed).
"""

from __future__ import annotations

import dataclasses
import math
import statistics

import numpy as np
import pytest

from acquire.compensation import ReferenceSet
from acquire.errors import InputError
from acquire.uncertainty import (
    correct_with_uncertainty,
    half_width,
    mean_of_repeats,
    reading_uncertainty,
    repeatability,
)
from drivers.dialect_file import load_dialect
from drivers.errors import DialectError
from drivers.simulator import reading_error
from drivers.simulator.profiles import load_meter

ACC = load_dialect("simulated").accuracy


def test_half_width_and_type_b_by_hand():
    # a = 1e-3 · (1 + 1e7/1e7) · (1000 + (0.2 + 1e6/1e7)) = 2.0006 ohm (computed)
    a = half_width(1e7, 1000.0 + 0j, ACC)
    assert a == pytest.approx(2.0006, rel=1e-12)
    assert reading_uncertainty(1e7, 1000.0 + 0j, ACC) == pytest.approx(2.0006 / math.sqrt(3))
    # at 10 mV (r = reference level / 10 mV) the floors grow r-fold:
    # 1e-3·(1 + 1e-4)·(1 + r·0.2000001)
    r = ACC.reference_level / 0.01
    low = half_width(1e3, 1.0 + 0j, ACC, level=0.01)
    assert low == pytest.approx(1e-3 * (1 + 1e-4) * (1 + r * (0.2 + 1e-7)), rel=1e-12)
    assert np.isnan(half_width(1e3, complex(np.inf, np.inf), ACC))


def test_repeatability_by_speed_averaging_and_level():
    base = repeatability(1e3, 100.0 + 0j, ACC, speed="medium")
    # 5e-4 · (1 + 1e-4) · (100 + 0.2 + 1e-3) (computed)
    assert base == pytest.approx(5e-4 * (1 + 1e-4) * (100.201), rel=1e-12)
    assert repeatability(1e3, 100.0 + 0j, ACC, speed="fast") == pytest.approx(2 * base)
    assert repeatability(1e3, 100.0 + 0j, ACC, averaging=16) == pytest.approx(base / 4)
    with pytest.raises(InputError, match="speed 'turbo'"):
        repeatability(1e3, 100.0, ACC, speed="turbo")
    with pytest.raises(InputError, match="averaging"):
        repeatability(1e3, 100.0, ACC, averaging=0)


def test_mean_of_repeats_is_the_standard_deviation_of_the_mean():
    rng = np.random.default_rng(3)
    z = rng.normal(size=(7, 4)) + 1j * rng.normal(size=(7, 4))
    mean, u = mean_of_repeats(z)
    for i in range(4):
        assert mean[i] == pytest.approx(
            statistics.fmean(z[:, i].real) + 1j * statistics.fmean(z[:, i].imag)
        )
        assert u[i, 0] == pytest.approx(statistics.stdev(z[:, i].real) / math.sqrt(7))
        assert u[i, 1] == pytest.approx(statistics.stdev(z[:, i].imag) / math.sqrt(7))
    assert mean_of_repeats(z[:1])[1] is None


# -- the dialect's [accuracy] table ------------------------------------------------------------


def test_simulated_dialect_states_the_simulators_numbers():
    meter = load_meter("simulated-meter")
    assert ACC.relative == meter.systematic_accuracy
    assert ACC.repeatability == meter.accuracy_class
    assert ACC.low_impedance == meter.low_impedance_corner
    assert ACC.high_impedance == meter.high_impedance_corner
    assert ACC.frequency_corner == meter.frequency_corner
    assert ACC.reference_level == meter.reference_level
    # Each speed word sets a number of signal periods per reading (the dialect's set_speed);
    # the simulator's noise scales as sqrt(reference_periods / periods).
    periods = load_dialect("simulated").operations["set_speed"].choices
    assert ACC.speed_factors == {
        word: math.sqrt(meter.reference_periods / int(n)) for word, n in periods.items()
    }


def _with_accuracy(tmp_path, text: str):
    source = load_dialect("simulated").path.read_text(encoding="utf-8")
    head = source[: source.index("[accuracy]")]
    path = tmp_path / "variant.toml"
    path.write_text(head + text, encoding="utf-8")
    return path


GOOD = """[accuracy]
relative = 0.002
low_impedance = 0.1
high_impedance = 1e8
frequency_corner = 1e6
"""


def test_accuracy_table_is_optional_and_defaults(tmp_path):
    path = _with_accuracy(tmp_path, "")
    assert load_dialect(path).accuracy is None
    acc = load_dialect(_with_accuracy(tmp_path, GOOD)).accuracy
    assert (acc.relative, acc.reference_level, acc.repeatability, acc.speed_factors) == (
        0.002,
        1.0,
        0.0,
        {},
    )


@pytest.mark.parametrize(
    ("line", "key", "reason"),
    [
        ("relative = nan", "accuracy.relative", "finite"),
        ("relative = inf", "accuracy.relative", "finite"),
        ("relative = -0.001", "accuracy.relative", ">= 0"),
        ("high_impedance = 0", "accuracy.high_impedance", "> 0"),
        ('frequency_corner = "1 MHz"', "accuracy.frequency_corner", "number"),
        ("repeatability = -inf", "accuracy.repeatability", "finite"),
        (
            "speed_factors = { fast = 2.0, medium = 1.0, turbo = 0.5 }",
            "speed_factors.turbo",
            "speed word",
        ),
        ("speed_factors = { fast = 2.0, medium = 1.0 }", "accuracy.speed_factors", "'slow'"),
        (
            "speed_factors = { fast = 2.0, medium = nan, slow = 1 }",
            "speed_factors.medium",
            "finite",
        ),
        ("spread = 0.1", "accuracy.spread", "unknown key"),
    ],
)
def test_bad_accuracy_values_name_file_key_and_reason(tmp_path, line, key, reason):
    text = GOOD
    name = line.split("=")[0].strip()
    text = "\n".join(ln for ln in text.splitlines() if not ln.startswith(name + " ")) + "\n"
    path = _with_accuracy(tmp_path, text + line + "\n")
    with pytest.raises(DialectError) as info:
        load_dialect(path)
    message = str(info.value)
    assert str(path) in message and key in message and reason in message


def test_template_documents_every_key():
    text = (load_dialect("simulated").path.parent / "template.toml").read_text(encoding="utf-8")
    section = text[text.index("[accuracy]") :]
    for field in dataclasses.fields(ACC):
        assert f"{field.name} =" in section


# -- the simulated meter keeps to it -----------------------------------------------------------


def test_simulated_systematic_error_stays_within_its_bound_and_is_fixed_per_session():
    f = np.geomspace(10.0, 30e6, 200)
    z = np.geomspace(1e-3, 1e9, 200) * np.exp(1j * np.linspace(-1.5, 1.5, 200))
    bound = reading_error.error_bound(np.abs(z), f, 1e-3, 0.2, 1e7, 1e7)
    key = np.random.SeedSequence(4, spawn_key=(0,))
    err = reading_error.systematic_error(z, f, bound, key)
    assert np.all(np.abs(err.real) <= bound) and np.all(np.abs(err.imag) <= bound)
    # spread over the bound: a uniform draw has variance 1/3 (JCGM 100:2008 4.3.7)
    share = np.concatenate([err.real / bound, err.imag / bound])
    assert np.var(share) == pytest.approx(1 / 3, abs=0.1)
    np.testing.assert_array_equal(err, reading_error.systematic_error(z, f, bound, key))
    other = reading_error.systematic_error(z, f, bound, np.random.SeedSequence(5, spawn_key=(0,)))
    assert not np.any(other == err)


# -- the wrapper ---------------------------------------------------------------------------------


def _refs(**extra):
    f = np.array([1e3, 1e4, 1e5])
    return ReferenceSet(
        frequency=f,
        open=np.array([5e6 - 2e7j, 5e5 - 2e6j, 5e4 - 2e5j]),
        short=np.array([0.02 + 0.002j, 0.02 + 0.02j, 0.02 + 0.2j]),
        load=np.array([100.02 + 0.002j, 100.02 + 0.02j, 100.02 + 0.2j]),
        load_true=100.0 + 0j,
    )


def test_wrapper_corrects_like_the_reference_set_and_counts_type_b():
    refs = _refs()
    f = np.array([1e3, 3e3, 1e5])
    zm = np.array([5.0 + 60.0j, 5.0 + 190.0j, 6.0 + 6000.0j])
    none = correct_with_uncertainty(f, zm, None, refs)
    np.testing.assert_allclose(none.z, refs.correct(f, zm), rtol=1e-12)
    assert np.all(none.expanded == 0)
    typed = correct_with_uncertainty(f, zm, None, refs, ACC)
    np.testing.assert_allclose(typed.z, none.z)
    # the DUT's own reading alone already gives 2·√(a²/3 + σ²) at least (computed)
    own = 2 * np.hypot(reading_uncertainty(f, zm, ACC), repeatability(f, zm, ACC))
    assert np.all(typed.expanded[:, 0] >= 0.99 * own)
    assert typed.cov.shape == (3, 2, 2) and typed.expanded.shape == (3, 2)


def test_wrapper_uses_the_standards_type_a_when_the_set_has_it():
    """The contract's ``short_u`` (here on the set's grid, read off-grid by interpolation)
    replaces the stated one-reading repeatability of the short: a large one shows."""
    refs = _refs()

    class WithTypeA:
        frequency = refs.frequency
        repeats = 1
        open_u = None
        short_u = np.array([[0.05, 0.05], [0.05, 0.05], [0.05, 0.05]])
        load_u = None

        def at(self, f):
            return refs.at(f)

    zm = np.array([5.0 + 60.0j, 5.0 + 190.0j, 6.0 + 6000.0j])
    off = np.array([1e3, 3e3, 1e5])
    plain = correct_with_uncertainty(off, zm, None, refs, ACC)
    more = correct_with_uncertainty(off, zm, None, WithTypeA(), ACC)
    np.testing.assert_allclose(more.z, plain.z)
    assert np.all(more.expanded > plain.expanded)
    # On the grid: the variance grows by |dZx/dZs|²·(0.05² − σ²), σ the stated repeatability of
    # the short it replaces, the derivative by central differences of refs.correct (computed).
    f = refs.frequency
    plain = correct_with_uncertainty(f, zm, None, refs, ACC)
    more = correct_with_uncertainty(f, zm, None, WithTypeA(), ACC)
    h = 1e-7
    up = refs.with_standard("short", refs.short + h).correct(f, zm)
    down = refs.with_standard("short", refs.short - h).correct(f, zm)
    slope = np.abs((up - down) / (2 * h))
    sigma = repeatability(f, refs.short, ACC)
    expected = 2 * np.sqrt((plain.expanded[:, 0] / 2) ** 2 + slope**2 * (0.05**2 - sigma**2))
    np.testing.assert_allclose(more.expanded[:, 0], expected, rtol=1e-6)
