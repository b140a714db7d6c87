"""A bias sweep: the inductance of a choke at one frequency, stepped through DC bias currents.

:func:`sweep_bias` measures the zero-bias point first (the supply still off), then each bias
current in ascending order: the supply moves there in steps (:mod:`acquire.bias.ramp`), waits,
reads back the current that flows, and the meter reads Z at the frequency (averaged over
``repeats`` readings). A reference set corrects each reading; its open and short were captured
at zero bias, so the correction removes the fixture's leads, not any effect of the bias on them.
Each point goes to the writer and to ``on_point`` as it completes; at the end the saturation
current is interpolated at each drop (:func:`acquire.bias.saturation.drop_currents`).

Whatever ends the sweep (its end, Ctrl-C, SIGTERM through :mod:`acquire.signals`, a meter fault,
any error) the bias is ramped to zero and switched off before the function returns, and the
completed points are kept: the result is marked interrupted and the writer finished with them.
A stop signal that arrives while a step talks to the instruments takes effect when the step's
replies are in (:func:`acquire.signals.held`), so no exchange is cut in half.
"""

from __future__ import annotations

import math
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from datetime import UTC, datetime
from typing import Any, Protocol

import numpy as np

from acquire import signals
from acquire.bias.ramp import energised
from acquire.bias.records import COMPLETE, INTERRUPTED, BiasCurve, BiasSettings, BiasSweepResult
from acquire.bias.saturation import DropCurrent, drop_currents
from acquire.errors import AcquireError, BiasError
from acquire.impedance import quantities
from drivers.errors import InstrumentError


class BiasSweepWriter(Protocol):
    """Where each point goes as it completes (the results store's bias-sweep writer)."""

    def add_point(
        self,
        i: int,
        setpoint: float,
        applied: float,
        raw: complex,
        corrected: complex | None,
        ls: float,
        rs: float,
        q: float,
    ) -> None: ...

    def finish(self, status: str, drops: tuple[DropCurrent, ...], note: str) -> None: ...


@dataclass(frozen=True)
class BiasPoint:
    """One completed step: index, currents (A), readings (ohm) and Ls (H), Rs (ohm), Q."""

    i: int
    total: int
    setpoint: float
    applied: float
    raw: complex
    corrected: complex | None
    ls: float
    rs: float
    q: float


@dataclass(frozen=True)
class BiasSweepOutcome:
    """The result, and what stopped the sweep early (None when it completed)."""

    result: BiasSweepResult
    error: BaseException | None


def bias_currents(start: float, stop: float, points: int) -> np.ndarray:
    """``points`` evenly spaced currents from ``start`` to ``stop`` (A); zero first, always
    (the reference of every drop), so a start above zero adds a zero-bias point before it."""
    if points < 2:
        raise BiasError("a bias sweep needs at least 2 points")
    if not (math.isfinite(start) and math.isfinite(stop) and 0 <= start < stop):
        raise BiasError(
            f"the bias currents must rise from 0 A or more: --start {start:g} A, --stop {stop:g} A"
        )
    currents = np.linspace(start, stop, points)
    return currents if start == 0 else np.concatenate([[0.0], currents])


def sweep_bias(
    meter: Any,
    supply: Any,
    settings: BiasSettings,
    references: Any = None,
    writer: BiasSweepWriter | None = None,
    on_point: Callable[[BiasPoint], None] | None = None,
    repeats: int = 1,
) -> BiasSweepOutcome:
    """Run the sweep ``settings`` describe (see the module's docstring)."""
    currents = np.asarray(settings.currents, dtype=float)
    if currents.size < 2 or currents[0] != 0 or np.any(np.diff(currents) <= 0):
        raise BiasError("the bias currents must start at 0 A and rise from point to point")
    if currents[-1] > settings.maximum:
        raise BiasError(
            f"the largest bias asked, {currents[-1]:g} A, is above the largest allowed, "
            f"{settings.maximum:g} A; nothing was sent"
        )
    started = now()
    points: list[BiasPoint] = []
    error: BaseException | None = None
    try:
        with energised(supply, settings.maximum, settings.step, settings.dwell) as held:
            for i, amps in enumerate(currents):
                # A stop that comes mid-exchange waits for the step's replies: cutting a reply
                # short would leave the connection out of step, to be closed with bias flowing.
                with signals.held():
                    applied = float(supply.applied()) if amps == 0 else held.go(float(amps))
                    point = _measure(meter, settings.frequency, references, repeats)
                done = BiasPoint(i, currents.size, float(amps), applied, *point)
                points.append(done)
                if writer is not None:
                    writer.add_point(i, done.setpoint, applied, *point)
                if on_point is not None:
                    on_point(done)
    except BaseException as exc:  # noqa: BLE001 - kept with the points; the caller decides
        error = exc
    with signals.held():  # the points measured are recorded before a stop ends the program
        result = _result(settings, points, references is not None, error, started)
        if writer is not None:
            writer.finish(result.status, result.drops, result.note)
    return BiasSweepOutcome(result, error)


def _measure(
    meter: Any, frequency: float, references: Any, repeats: int
) -> tuple[complex, complex | None, float, float, float]:
    f = np.array([frequency])
    readings = [complex(meter.sweep(f)[0]) for _ in range(max(repeats, 1))]
    raw = complex(np.mean(readings))
    corrected = None if references is None else complex(references.correct(f, np.array([raw]))[0])
    q = quantities(f, np.array([raw if corrected is None else corrected]))
    return raw, corrected, float(q["Ls"][0]), float(q["Rs"][0]), float(q["Q"][0])


def stop_note(error: BaseException | None) -> str:
    """How the sweep ended early, for the operator and the store ('' when it completed)."""
    if error is None:
        return ""
    if isinstance(error, KeyboardInterrupt):
        return signals.stop_reason(error)
    if isinstance(error, InstrumentError):
        return f"meter fault: {error}"
    if isinstance(error, AcquireError):
        return f"stopped: {error}"
    return f"stopped by an error: {type(error).__name__}: {error}"


def curve_of(points: Sequence[BiasPoint], corrected: bool) -> BiasCurve:
    """The points as the arrays of a :class:`BiasCurve`."""

    def column(name: str, kind: type = float) -> np.ndarray:
        return np.array([getattr(p, name) for p in points], dtype=kind)

    return BiasCurve(
        setpoint=column("setpoint"),
        applied=column("applied"),
        raw=column("raw", complex),
        corrected=column("corrected", complex) if corrected else None,
        ls=column("ls"),
        rs=column("rs"),
        q=column("q"),
    )


def curve_drops(curve: BiasCurve, drops: Sequence[float]) -> tuple[DropCurrent, ...]:
    """The saturation current at each drop, against the current read back when it rises from
    zero point to point (else against the setpoints); () with fewer than two usable points."""
    current = curve.applied
    if current.size < 2 or current[0] != 0 or np.any(np.diff(current) <= 0):
        current = curve.setpoint
    try:
        return drop_currents(current, curve.ls, drops)
    except BiasError:
        return ()


def _result(
    settings: BiasSettings,
    points: list[BiasPoint],
    corrected: bool,
    error: BaseException | None,
    started: str,
) -> BiasSweepResult:
    curve = curve_of(points, corrected)
    return BiasSweepResult(
        settings=settings,
        curve=curve,
        drops=curve_drops(curve, settings.drops),
        status=COMPLETE if error is None else INTERRUPTED,
        note=stop_note(error),
        started=started,
        ended=now(),
    )


def now() -> str:
    return datetime.now(UTC).isoformat(timespec="seconds")
