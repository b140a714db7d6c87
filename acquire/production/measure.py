"""Measuring one production unit: one list sweep over the plan's frequencies, then DC resistance.

:func:`measure_unit` runs :func:`acquire.sweep.run_sweep` once over the plan's distinct
frequencies (the whole list in one ``meter.sweep`` call, so a meter with a list mode measures
them in one list sweep), corrected with the station's reference set, with each point's
uncertainty from the meter's stated accuracy and, when the plan reads each frequency
``repeats ≥ 2`` times, from the unit's own scatter (Type A). Each check's value and expanded
uncertainty (``k = 2``) come from :func:`acquire.impedance.quantities` and
:func:`acquire.uncertainty.quantity_uncertainty` of the corrected (else raw) impedance and its
covariance.

When the plan checks ``Rdc``, the DC resistance is read ``repeats`` times and handed to
:mod:`acquire.production.dc_resistance`: the fixture's leads are removed (the real part of the
reference set's short at its lowest frequency, when the set has a short and that frequency is at
most 1 kHz, where the leads' skin effect is negligible; otherwise nothing is removed) and the
value is corrected to 20 °C with copper's temperature coefficient. The meter's stated accuracy
(its dialect's ``[accuracy]``) is applied to a DC reading as to an impedance at ``f = 0``.

A plan with checks under a DC bias then measures, inside
:func:`acquire.bias.ramp.energised` (the plan's largest bias, ramp step and dwell), at each bias
level in ascending order: the frequencies of the checks at that level and of every saturation
check whose sweep has a point there, in one list sweep per level. Every bias is ramped back to
zero and switched off before :func:`measure_unit` returns or raises, whatever ended it. The
references were captured at zero bias and correct the readings under bias as they are. A
saturation check's value and U come from :mod:`acquire.production.saturation_check`.

A meter fault (any :class:`drivers.errors.InstrumentError`) never raises: the unit comes back
with ``error`` set and no values, to be judged "error". Ctrl-C during the sweep is raised again.
The plan's meter settings are applied once per session by :func:`apply_settings`, not per unit.
"""

from __future__ import annotations

import math
import time
from collections.abc import Callable
from dataclasses import dataclass, field, replace
from typing import Any

import numpy as np

from acquire.bias.ramp import energised
from acquire.errors import InputError
from acquire.impedance import KEYS, quantities
from acquire.plan import FrequencyPlan
from acquire.production import dc_resistance as dc
from acquire.production.conformance import combined_standard
from acquire.production.plan import DC_RESISTANCE, Check, TestPlan
from acquire.production.saturation_check import saturation_value
from acquire.sweep import run_sweep
from acquire.sweep_uncertainty import PointUncertainty
from acquire.uncertainty import half_width, quantity_uncertainty, repeatability
from drivers.errors import InstrumentError

#: The short reference gives the leads' resistance only up to this frequency (Hz).
LEADS_MAX_FREQUENCY = 1e3


@dataclass(frozen=True, eq=False)
class UnitMeasurement:
    """What was measured on one unit.

    ``values`` and ``uncertainty`` map each check's :attr:`~acquire.production.plan.Check.key`
    to its value (SI) and expanded uncertainty (``k = 2``, NaN when unknown); both are empty
    when ``error`` is set. ``frequency``, ``raw`` and ``corrected`` are the sweep's points
    (``corrected`` None without a reference set); ``dc_resistance`` the mean DC reading with
    the leads removed (ohm, before the temperature correction; None when the plan has no DC
    step); ``temperature`` the winding temperature used (°C; None without a DC step);
    ``error`` '' or the meter's fault; ``meter_seconds`` the time spent waiting for the meter.
    ``bias`` maps each check measured under bias to the bias read back (A);  ``inductance``
    is the zero-bias Ls at the lowest frequency measured (H; None when unmeasured), for the
    energy the unit stores at the plan's largest bias.
    """

    values: dict[str, float]
    uncertainty: dict[str, float]
    frequency: np.ndarray
    raw: np.ndarray
    corrected: np.ndarray | None
    dc_resistance: float | None
    temperature: float | None
    error: str
    meter_seconds: float
    bias: dict[str, float] = field(default_factory=dict)
    inductance: float | None = None

    @property
    def ok(self) -> bool:
        """True when the meter gave every reading (the values may still fail their limits)."""
        return not self.error


def apply_settings(meter: Any, plan: TestPlan) -> None:
    """Apply the plan's meter settings (level, speed, averaging) once, at the session's start.

    Refuses, before anything is measured, a plan that checks the DC resistance on a meter whose
    dialect cannot read it (:class:`drivers.errors.DialectError`).
    """
    if plan.needs_dc_resistance and not meter.has("dc_resistance"):
        meter.dialect.operation("dc_resistance", "measure the DC resistance the plan checks")
    s = plan.meter
    meter.configure(level=s.level, speed=s.speed, averaging=s.averaging)


def measure_unit(
    meter: Any,
    plan: TestPlan,
    references: Any,
    temperature: float | None = None,
    supply: Any = None,
) -> UnitMeasurement:
    """Measure one unit in the fixture as ``plan`` says; see the module docstring.

    ``references`` is the station's :class:`acquire.compensation.ReferenceSet` (None: raw
    readings). ``temperature`` is the winding temperature (°C) for the DC resistance; None takes
    the plan's fixed temperature. A plan that checks ``Rdc`` with no temperature known raises
    :class:`~acquire.errors.InputError`, and a reference set whose grid does not cover the
    plan's frequencies :class:`~acquire.errors.CompensationError`, before anything is measured.
    ``supply`` is the DC bias supply (:class:`drivers.bias.BiasSupply`) for a plan with bias
    checks; None takes the meter's own (``meter.bias()``). A plan whose largest bias is above
    the supply's limit raises :class:`~acquire.errors.BiasError` before any bias flows.
    """
    t = _temperature(plan, temperature)
    timed = _TimedMeter(meter)
    uncertainty = PointUncertainty.for_meter(meter, _ac_names(plan))
    f = plan.frequencies
    empty = np.zeros(0)
    freq, raw, corrected = empty, empty.astype(complex), None
    values: dict[str, float] = {}
    u: dict[str, float] = {}
    curve: dict[float, list[tuple[float, float, float]]] = {}
    if f.size:
        outcome = run_sweep(
            timed,
            FrequencyPlan(f),
            references,
            block=None,
            uncertainty=uncertainty,
            repeats=plan.meter.repeats,
        )
        freq, raw, corrected = outcome.frequency, outcome.raw, outcome.corrected
        if isinstance(outcome.error, KeyboardInterrupt):
            raise outcome.error
        if outcome.interrupted:
            return UnitMeasurement(
                {}, {}, freq, raw, corrected, None, t, outcome.reason, timed.seconds
            )
        assert outcome.cov is not None  # an uncertainty model was given
        values, u = _ac_values(plan, outcome.frequency, outcome.shown, outcome.cov)
        _add_to_curve(curve, 0.0, outcome.frequency, outcome.shown, outcome.cov)
    r_dut = None
    if plan.needs_dc_resistance:
        assert t is not None
        try:
            readings = [timed.dc_resistance() for _ in range(max(plan.meter.repeats, 1))]
        except InstrumentError as exc:
            fault = f"meter fault: {exc}"
            return UnitMeasurement({}, {}, freq, raw, corrected, None, t, fault, timed.seconds)
        r_dut, values[DC_RESISTANCE], u[DC_RESISTANCE] = _dc_values(
            readings, references, uncertainty, plan, t
        )
    done = UnitMeasurement(values, u, freq, raw, corrected, r_dut, t, "", timed.seconds)
    if f.size:
        done = replace(done, inductance=curve[float(f[0])][0][1])
    if not plan.needs_bias:
        return done
    return _under_bias(timed, plan, references, supply, uncertainty, done, curve)


def _under_bias(
    timed: _TimedMeter,
    plan: TestPlan,
    references: Any,
    supply: Any,
    uncertainty: PointUncertainty,
    done: UnitMeasurement,
    curve: dict[float, list[tuple[float, float, float]]],
) -> UnitMeasurement:
    """Measure the checks under bias, level by level, ascending; then the saturation checks."""
    if supply is None:
        supply = timed.meter.bias()
    ramp = plan.bias
    assert ramp.maximum is not None  # the plan file requires it when any check has a bias
    values, u = dict(done.values), dict(done.uncertainty)
    applied: dict[str, float] = {}
    try:
        with energised(supply, ramp.maximum, ramp.step, ramp.dwell) as held:
            for level in plan.bias_levels:
                read_back = held.go(level)
                outcome = run_sweep(
                    timed,
                    FrequencyPlan(plan.frequencies_at(level)),
                    references,
                    block=None,
                    uncertainty=uncertainty,
                    repeats=plan.meter.repeats,
                )
                if isinstance(outcome.error, KeyboardInterrupt):
                    raise outcome.error
                if outcome.interrupted:
                    fault = f"{outcome.reason} (under a bias of {level:g} A)"
                    return replace(done, values={}, uncertainty={}, error=fault,
                                   meter_seconds=timed.seconds)  # fmt: skip
                assert outcome.cov is not None
                more, more_u = _ac_values(
                    plan, outcome.frequency, outcome.shown, outcome.cov, level
                )
                values |= more
                u |= more_u
                applied |= dict.fromkeys(more, read_back)
                _add_to_curve(curve, level, outcome.frequency, outcome.shown, outcome.cov)
    except InstrumentError as exc:
        fault = f"meter fault under bias: {exc}"
        return replace(done, values={}, uncertainty={}, error=fault, meter_seconds=timed.seconds)
    for check in plan.checks:
        if check.saturation:
            values[check.key], u[check.key] = _saturation(plan, check, curve)
    return replace(done, values=values, uncertainty=u, bias=applied, meter_seconds=timed.seconds)


def _add_to_curve(
    curve: dict[float, list[tuple[float, float, float]]],
    level: float,
    f: np.ndarray,
    z: np.ndarray,
    cov: np.ndarray,
) -> None:
    """Append (bias, Ls, U of Ls) at each frequency swept to ``curve[frequency]``."""
    ls = quantities(f, z)["Ls"]
    big_u = quantity_uncertainty(f, z, cov, ("Ls",))["Ls"]
    for fi, li, ui in zip(f, ls, big_u, strict=True):
        curve.setdefault(float(fi), []).append((level, float(li), float(ui)))


def _saturation(
    plan: TestPlan, check: Check, curve: dict[float, list[tuple[float, float, float]]]
) -> tuple[float, float]:
    """A saturation check's value and U from the Ls measured at its sweep's points."""
    assert check.frequency is not None and check.drop is not None
    points = set(plan.sweep(check))
    rows = sorted(r for r in curve[float(check.frequency)] if r[0] in points)
    current, ls, big_u = (np.array(col) for col in zip(*rows, strict=True))
    value, U, _ = saturation_value(current, ls, big_u, check.drop, check.limit)
    return value, U


def _temperature(plan: TestPlan, given: float | None) -> float | None:
    if not plan.needs_dc_resistance:
        return None
    t = given
    if t is None and plan.temperature.source == "fixed":
        t = plan.temperature.value
    if t is None:
        raise InputError(
            "the plan checks the DC resistance (Rdc) but no winding temperature is known; "
            "give the lot's temperature, or a fixed temperature in the plan's [temperature]"
        )
    dc.temperature_factor(t)
    return float(t)


def _ac_names(plan: TestPlan) -> tuple[str, ...]:
    """The impedance quantities the plan's AC checks need (Ls for a saturation check)."""
    names = ("Ls" if c.saturation else c.quantity for c in plan.checks if c.frequency is not None)
    return tuple(dict.fromkeys(names))


def _ac_values(
    plan: TestPlan, f: np.ndarray, z: np.ndarray, cov: np.ndarray, bias: float | None = None
) -> tuple[dict[str, float], dict[str, float]]:
    """The value and U of each AC check at ``bias`` (None: zero) from the sweep's (corrected,
    else raw) points."""
    names = tuple(n for n in _ac_names(plan) if n in KEYS)
    q = quantities(f, z)
    big_u = quantity_uncertainty(f, z, cov, names)
    where = {float(fi): i for i, fi in enumerate(f)}
    values, u = {}, {}
    for check in plan.checks:
        if check.frequency is None or check.saturation or check.bias != bias:
            continue
        i = where[float(check.frequency)]
        values[check.key] = float(q[check.quantity][i])
        u[check.key] = float(big_u[check.quantity][i])
    return values, u


def _dc_values(
    readings: list[float], references: Any, model: PointUncertainty, plan: TestPlan, t: float
) -> tuple[float, float, float]:
    """(resistance with leads removed, R20, U of R20) from the DC readings."""
    mean, s = dc.mean_and_deviation(readings)
    leads, u_leads = _leads(references, model)
    r = dc.remove_leads(mean, leads)
    r20 = dc.to_reference_temperature(r, t)
    u_reading = _reading_u(mean, s, len(readings), model)
    if not math.isfinite(r20):
        return r, r20, math.nan
    big_u = dc.expanded_uncertainty(r, t, u_reading, u_leads, plan.temperature.half_width)
    return r, r20, big_u


def _reading_u(mean: float, s: float | None, n: int, model: PointUncertainty) -> float:
    """Standard uncertainty of the mean DC reading: Type A (else the stated repeatability of one
    reading) with the stated bound as Type B; NaN when the dialect states no accuracy and the
    reading was taken once."""
    acc = model.accuracy
    if not math.isfinite(mean):
        return math.nan
    b = None if acc is None else float(half_width(0.0, mean, acc, model.level))
    if s is None:
        if acc is None:
            return math.nan
        s = float(repeatability(0.0, mean, acc, model.level, model.speed, model.averaging or 1))
    return combined_standard(s, n, b)


def _leads(references: Any, model: PointUncertainty) -> tuple[float, float]:
    """The leads' resistance and its standard uncertainty: the short reference's real part at
    the set's lowest frequency when that is at most :data:`LEADS_MAX_FREQUENCY`, else (0, 0)."""
    short = None if references is None else getattr(references, "short", None)
    if short is None:
        return 0.0, 0.0
    f0 = float(references.frequency[0])
    if f0 > LEADS_MAX_FREQUENCY:
        return 0.0, 0.0
    zs = complex(short[0])
    short_u = getattr(references, "short_u", None)
    acc = model.accuracy
    if short_u is not None:
        type_a = float(short_u[0])
    elif acc is not None:
        one = repeatability(f0, zs, acc, model.level, model.speed, model.averaging or 1)
        type_a = float(one) / math.sqrt(getattr(references, "repeats", 1))
    else:
        return zs.real, math.nan
    b = 0.0 if acc is None else float(half_width(f0, zs, acc, model.level)) / math.sqrt(3.0)
    return zs.real, math.hypot(type_a, b)


class _TimedMeter:
    """The meter as a sweep sees it, counting the seconds spent inside its calls (less the
    time the sweep's own chunk handler takes while the meter calls it)."""

    def __init__(self, meter: Any) -> None:
        self.meter = meter
        self.seconds = 0.0

    @property
    def frequency_range(self) -> tuple[float, float]:
        return self.meter.frequency_range

    def sweep(self, frequencies: np.ndarray, on_points: Callable | None = None) -> np.ndarray:
        began = time.perf_counter()
        inside = 0.0
        handler = None
        if on_points is not None:
            sink = on_points

            def handler(*args: Any) -> None:
                nonlocal inside
                start = time.perf_counter()
                try:
                    sink(*args)
                finally:
                    inside += time.perf_counter() - start

        try:
            return self.meter.sweep(frequencies, on_points=handler)
        finally:
            self.seconds += time.perf_counter() - began - inside

    def dc_resistance(self) -> float:
        began = time.perf_counter()
        try:
            return self.meter.dc_resistance()
        finally:
            self.seconds += time.perf_counter() - began
