"""A temperature-rise run: hold a DC current through a winding and watch its resistance rise.

:func:`measure_rise` reads the winding's DC resistance cold (no current; the winding at the
ambient given), then holds the current (:mod:`acquire.bias.ramp`) and reads the DC resistance
every ``interval`` seconds. The rise above the ambient follows by the resistance method
(:func:`acquire.bias.resistance_rise.temperature_rise`); the current is held until the rise has
settled (:func:`~acquire.bias.resistance_rise.has_settled`) or ``time_limit`` passes.

With a target rise (``settings.target_rise``) the run searches the current: from the settled
rise at one current it tries :func:`~acquire.bias.resistance_rise.current_for_rise`, never above
``maximum``, until the settled rise is within ``rise_tolerance`` of the target. If even the
largest allowed current stays below the target, the run says so.

Times are the ``clock``'s seconds (wall time by default). Whatever ends the run, the current is
ramped to zero and switched off before the function returns; the readings taken are kept.
"""

from __future__ import annotations

import time
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np

from acquire import signals
from acquire.bias.ramp import Energised, energised
from acquire.bias.records import COMPLETE, INTERRUPTED, RiseResult, RiseSettings
from acquire.bias.resistance_rise import (
    current_for_rise,
    has_settled,
    settled_rise,
    temperature_rise,
)
from acquire.bias.sweep_run import stop_note
from acquire.errors import BiasError

#: The most currents a search tries before it gives up (it usually needs three or four).
SEARCH_TRIES = 8


class RiseWriter(Protocol):
    """Where each reading goes as it is taken (the results store's temperature-rise writer)."""

    def add_reading(self, t: float, r: float, rise: float) -> None: ...

    def finish(self, result: RiseResult) -> None: ...


@dataclass(frozen=True)
class RiseReading:
    """One reading: seconds since the current started, the current (A), resistance (ohm), rise
    (K)."""

    t: float
    current: float
    resistance: float
    rise: float


@dataclass(frozen=True)
class RiseOutcome:
    """The result, and what stopped the run early (None when it ended by itself)."""

    result: RiseResult
    error: BaseException | None


@dataclass
class _Run:
    """What a run has gathered so far."""

    r_cold: float
    t0: float
    times: list[float]
    resistance: list[float]
    rise: list[float]
    steps: list[tuple[float, float]]
    current: float = 0.0
    settled: bool = False
    note: str = ""


def measure_rise(
    meter: Any,
    supply: Any,
    settings: RiseSettings,
    *,
    maximum: float,
    step: float,
    interval: float,
    dwell: float = 0.0,
    rise_tolerance: float = 1.0,
    writer: RiseWriter | None = None,
    on_reading: Callable[[RiseReading], None] | None = None,
    clock: Callable[[], float] = time.monotonic,
    sleep: Callable[[float], None] = time.sleep,
) -> RiseOutcome:
    """Run the temperature-rise measurement ``settings`` describe (see the module)."""
    if not 0 < settings.current <= maximum:
        raise BiasError(
            f"the current {settings.current:g} A is outside 0 to {maximum:g} A (the largest "
            "allowed here); nothing was sent"
        )
    if settings.target_rise is not None and not settings.target_rise > 0:
        raise BiasError("the rise searched for must be above 0 K")
    r_cold = float(meter.dc_resistance())
    if not (np.isfinite(r_cold) and r_cold > 0):
        raise BiasError(
            f"the cold DC resistance read {r_cold} ohm; check that the winding is in the fixture"
        )
    run = _Run(r_cold, clock(), [], [], [], [])
    error: BaseException | None = None
    try:
        with energised(supply, maximum, step, dwell) as held:
            run.t0 = clock()
            _search(meter, held, settings, run, maximum, interval, rise_tolerance, writer,
                    on_reading, clock, sleep)  # fmt: skip
    except BaseException as exc:  # noqa: BLE001 - kept with the readings; the caller decides
        error = exc
    with signals.held():
        result = RiseResult(
            settings=settings,
            r_cold=r_cold,
            t_cold=settings.ambient,
            current=run.current,
            times=np.array(run.times),
            resistance=np.array(run.resistance),
            rise=np.array(run.rise),
            settled=run.settled,
            status=COMPLETE if error is None else INTERRUPTED,
            steps=tuple(run.steps),
            note=stop_note(error) if error is not None else run.note,
        )
        if writer is not None:
            writer.finish(result)
    return RiseOutcome(result, error)


def _search(
    meter: Any,
    held: Energised,
    settings: RiseSettings,
    run: _Run,
    maximum: float,
    interval: float,
    rise_tolerance: float,
    writer: RiseWriter | None,
    on_reading: Callable[[RiseReading], None] | None,
    clock: Callable[[], float],
    sleep: Callable[[float], None],
) -> None:
    """Hold the current (and, with a target, the next ones) until settled."""
    current = settings.current
    target = settings.target_rise
    for _ in range(SEARCH_TRIES if target is not None else 1):
        run.current = current
        with signals.held():  # a stop waits for the ramp's replies (see acquire.bias.sweep_run)
            held.go(current)
        rise = _hold(meter, settings, run, current, interval, writer, on_reading, clock, sleep)
        run.steps.append((current, rise))
        if not run.settled:
            run.note = (
                f"the rise had not settled within the time limit at {current:.3g} A "
                f"(last {rise:.3g} K)"
            )
            return
        if target is None or abs(rise - target) <= rise_tolerance:
            return
        if rise < target and current >= maximum:
            run.note = (
                f"{target:g} K not reached at the largest allowed {maximum:.3g} A: "
                f"rise {rise:.3g} K"
            )
            return
        current = min(current_for_rise(current, max(rise, 1e-6), target), maximum)
    run.note = (
        f"no current found within {rise_tolerance:g} K of {target:g} K in {SEARCH_TRIES} tries"
    )


def _hold(
    meter: Any,
    settings: RiseSettings,
    run: _Run,
    current: float,
    interval: float,
    writer: RiseWriter | None,
    on_reading: Callable[[RiseReading], None] | None,
    clock: Callable[[], float],
    sleep: Callable[[float], None],
) -> float:
    """Read the resistance every ``interval`` until the rise settles or the time limit; the
    last rise (K)."""
    began = clock()
    times: list[float] = []
    rises: list[float] = []
    run.settled = False
    while True:
        with signals.held():
            r = float(meter.dc_resistance())
        t = clock() - run.t0
        rise = float(temperature_rise(r, run.r_cold, settings.ambient, settings.ambient))
        run.times.append(t)
        run.resistance.append(r)
        run.rise.append(rise)
        times.append(t)
        rises.append(rise)
        if writer is not None:
            writer.add_reading(t, r, rise)
        if on_reading is not None:
            on_reading(RiseReading(t, current, r, rise))
        if has_settled(np.array(times), np.array(rises), settings.settle_window,
                       settings.settle_tolerance):  # fmt: skip
            run.settled = True
            return settled_rise(np.array(times), np.array(rises), settings.settle_window)
        if clock() - began >= settings.time_limit:
            return rise
        sleep(interval)
