"""One measurement of the simulated meter: how long it takes, what it reads, how it is sent.

A reading is the DUT seen through the fixture (:mod:`drivers.simulator.physics`), plus the
meter's errors, with overrange (``|Z|`` above the meter's limit, or an armed overrange fault)
and invalid (nothing in the fixture) points flagged. It is encoded as pairs of values named by
``FORMat:PAIR`` (with ``CIRCuit`` and ``UNIT:ANGLe``), in ASCII or as a block of IEEE 754 float64.

The meter's errors (what the simulated dialect's ``[accuracy]`` states, and what makes its
stated uncertainty honest) are two independent parts, both off with ``SIMulate:NOISe OFF``:

- a *systematic* error per session (seed), per half-decade of frequency and per decade of
  ``|Z|``, uniform within ``±b`` on R and on X (:func:`error_bound`,
  :func:`drivers.simulator.reading_error.systematic_error`); repeats and averaging do not remove it;
- *noise*: normal, independent per reading and part, standard deviation ``σ``
  (:func:`noise_deviation`), divided by ``√n`` when the meter averages ``n`` readings.

With ``b = 0.1 %`` and ``σ = 0.05 %`` of ``|Z|`` in mid-range (sim_profiles/simulated-meter.toml)
the two are of the same size (``b/√3 ≈ 0.058 %``): the sum of a rectangular and a normal error
of about equal standard deviations is close to normal, so ``U = 2u`` covers about 96 % of the
errors of one reading (computed), and more standards in the correction bring it closer to 95 %.
A single rectangular error alone would be covered 100 % at ``k = 2``; a normal error alone,
95.4 %. The systematic draws come from the session's seed and the cell alone (not from the noise
stream), so the noise draws are exactly those of a meter without systematic error.
"""

from __future__ import annotations

import struct
from dataclasses import dataclass, field

import numpy as np

from drivers.scpi import INVALID, OVERRANGE
from drivers.simulator import reading_error
from drivers.simulator.profiles import DutProfile, FixtureProfile, MeterProfile
from drivers.simulator.scpi_parser import block, format_number


@dataclass(frozen=True, eq=False)
class Reading:
    """Complex impedance per frequency, with overrange and invalid points flagged.

    ``texts`` keeps the reading's values written as ASCII reply fields, per ``(pair, circuit,
    angle unit)`` (:func:`ascii_values`), so that a reply prepared while the measurement runs is
    not written again when it is sent."""

    frequency: np.ndarray
    z: np.ndarray
    overrange: np.ndarray
    invalid: np.ndarray
    texts: dict[tuple[tuple[str, str], str, str], list[str]] = field(
        default_factory=dict, repr=False
    )


@dataclass(frozen=True)
class Conditions:
    """Everything a measurement depends on, captured when it starts."""

    frequency: tuple[float, ...]
    level: float
    periods: int
    averaging: int
    noise: bool
    dut: DutProfile
    fixture: FixtureProfile
    meter: MeterProfile
    time_override: float | None


def point_time(conditions: Conditions, f: float) -> float:
    """Seconds one point takes: the override, or ``n_avg · max(t_min, periods/f)``."""
    if conditions.time_override is not None:
        return conditions.time_override
    t_min = conditions.meter.minimum_reading_time
    return conditions.averaging * max(t_min, conditions.periods / f)


def dc_time(conditions: Conditions) -> float:
    """Seconds a DC resistance reading takes: the override, or ``n_avg · periods · t_min``."""
    if conditions.time_override is not None:
        return conditions.time_override
    return conditions.averaging * conditions.periods * conditions.meter.minimum_reading_time


def periods_factor(conditions: Conditions) -> float:
    """How the noise scales with the periods per reading: ``sqrt(periods_ref / periods)``."""
    return float(np.sqrt(conditions.meter.reference_periods / conditions.periods))


def duration(conditions: Conditions) -> float:
    """Seconds the whole measurement takes."""
    return sum(point_time(conditions, f) for f in conditions.frequency)


def remaining(duration: float, spent: float) -> float:
    """Seconds left of a measurement of ``duration`` after ``spent`` seconds of computing it."""
    return max(0.0, duration - spent)


def noise_deviation(conditions: Conditions, magnitude: np.ndarray, f: np.ndarray) -> np.ndarray:
    """One-sigma noise in ohm for readings of ``magnitude`` at ``f`` under ``conditions``."""
    meter = conditions.meter
    return reading_error.noise_deviation(
        magnitude,
        f,
        meter.accuracy_class,
        meter.low_impedance_corner,
        meter.high_impedance_corner,
        meter.frequency_corner,
        level_ratio=meter.reference_level / conditions.level,
        speed_factor=periods_factor(conditions),
        averaging=conditions.averaging,
    )


def error_bound(conditions: Conditions, magnitude: np.ndarray, f: np.ndarray) -> np.ndarray:
    """Bound in ohm on the systematic error of R and of X of readings of ``magnitude`` at ``f``."""
    meter = conditions.meter
    return reading_error.error_bound(
        magnitude,
        f,
        meter.systematic_accuracy,
        meter.low_impedance_corner,
        meter.high_impedance_corner,
        meter.frequency_corner,
        level_ratio=meter.reference_level / conditions.level,
    )


def read_impedance(
    conditions: Conditions,
    normals: np.ndarray,
    forced_overrange: np.ndarray,
    key: np.random.SeedSequence,
) -> Reading:
    """The reading at ``conditions.frequency``: DUT through fixture, plus the meter's errors, flags.

    ``normals`` holds one pair of standard normal draws per frequency (see
    :mod:`drivers.simulator.streams`); ``key`` fixes the session's systematic errors.
    """
    f = np.asarray(conditions.frequency, dtype=float)
    seen = conditions.fixture.seen(f, conditions.dut.impedance(f))
    invalid = np.isnan(seen)
    magnitude = np.abs(seen)
    overrange = ~invalid & (~np.isfinite(seen) | (magnitude > conditions.meter.max_impedance))
    overrange |= forced_overrange & ~invalid
    z = np.where(invalid | overrange, 0.0, seen)
    if conditions.noise:
        magnitude = np.abs(z)
        deviation = noise_deviation(conditions, magnitude, f)
        bound = error_bound(conditions, magnitude, f)
        z = reading_error.add_noise(z, deviation, normals) + reading_error.systematic_error(
            z, f, bound, key
        )
    return Reading(frequency=f, z=z, overrange=overrange, invalid=invalid)


def read_dc_resistance(conditions: Conditions, normal: float) -> float:
    """DC resistance seen through the fixture, with noise (at ``f = 0``), or a flag value.

    ``normal`` is this reading's standard normal draw.
    """
    value = conditions.fixture.seen_dc(conditions.dut.dc_value)
    if np.isnan(value):
        return INVALID
    if not np.isfinite(value) or value > conditions.meter.max_impedance:
        return OVERRANGE
    if conditions.noise:
        deviation = float(noise_deviation(conditions, np.array([value]), np.array([0.0]))[0])
        value += deviation * normal
    return float(value)


def quantity(word: str, f: np.ndarray, z: np.ndarray, circuit: str, angle_unit: str) -> np.ndarray:
    """One quantity per point, named by its ``FORMat:PAIR`` short form (SI units).

    ``circuit`` (``SER``/``PAR``) says which equivalent circuit inductance, capacitance and
    resistance belong to; ``angle_unit`` (``DEG``/``RAD``) the unit of the phase. Quality is
    ``X/R`` and dissipation ``R/X`` (signed, the same in both circuits).
    """
    w = 2.0 * np.pi * f
    r, x = z.real, z.imag
    series = circuit == "SER"
    with np.errstate(divide="ignore", invalid="ignore"):
        y = 1.0 / z
        g, b = y.real, y.imag
        if word == "REAL":
            return r
        if word == "IMAG":
            return x
        if word == "MAGN":
            return np.abs(z)
        if word == "PHAS":
            return np.angle(z, deg=angle_unit == "DEG")
        if word == "COND":
            return g
        if word == "SUSC":
            return b
        if word == "IND":
            return x / w if series else -1.0 / (w * b)
        if word == "CAP":
            return -1.0 / (w * x) if series else b / w
        if word == "RES":
            return r if series else 1.0 / g
        if word == "QUAL":
            return x / r
        if word == "DISS":
            return r / x
    raise ValueError(f"unknown quantity {word!r}")


def reading_values(
    reading: Reading, pair: tuple[str, str], circuit: str = "SER", angle_unit: str = "DEG"
) -> np.ndarray:
    """Flat array ``a1, b1, a2, b2, ...`` with 9.9E37 for overrange and 9.91E37 for invalid."""
    f, z = reading.frequency, reading.z
    values = np.column_stack([quantity(w, f, z, circuit, angle_unit) for w in pair])
    values = np.where(np.isnan(values), INVALID, values)
    values = np.where(np.isinf(values), np.sign(values) * OVERRANGE, values)
    values[reading.overrange] = OVERRANGE
    values[reading.invalid] = INVALID
    return values.ravel()


def ascii_values(
    reading: Reading, pair: tuple[str, str], circuit: str = "SER", angle_unit: str = "DEG"
) -> list[str]:
    """:func:`reading_values` written as ASCII reply fields (:func:`format_number`), kept on the
    reading: the meter prepares them within the measurement's time, as a real meter's reply is
    ready when its measurement ends (:meth:`Instrument._measure`)."""
    key = (pair, circuit, angle_unit)
    texts = reading.texts.get(key)
    if texts is None:
        values = reading_values(reading, pair, circuit, angle_unit)
        texts = reading.texts[key] = [format_number(v) for v in values.tolist()]
    return texts


def encode(values: np.ndarray, data_format: str, byte_order: str) -> bytes:
    """ASCII (``a,b,...`` with 17 digits) or a definite-length block of float64."""
    if data_format == "ASC":
        return ",".join(format_number(float(v)) for v in values).encode("ascii")
    endian = ">" if byte_order == "NORM" else "<"
    return block(struct.pack(f"{endian}{len(values)}d", *values))
