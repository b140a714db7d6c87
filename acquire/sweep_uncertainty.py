"""Each sweep point's expanded uncertainty and flags, evaluated chunk by chunk as points arrive.

:class:`PointUncertainty` holds what the evaluation needs besides the readings: the meter's
stated accuracy (a dialect's ``[accuracy]`` table, or None when the dialect states none), the
meter settings the readings were taken at (test level, speed, averaging; those not set are taken
at the dialect's reference conditions) and the quantities the sweep shows. Its
:meth:`~PointUncertainty.evaluate` turns a chunk of readings into :class:`PointValues`:

- with a reference set: the corrected impedance, its covariance and expanded uncertainty from
  :func:`acquire.uncertainty.correct_with_uncertainty` (readings, standards and their repeats);
- without one: the raw reading's own Type B (the stated accuracy) and Type A (the scatter of
  repeated readings, else the stated repeatability of one reading);
- without a stated accuracy, only Type A is counted; unless every reading has one (the DUT read
  with repeats, each standard of the set too) the uncertainty is not known (NaN), since a
  reading without one would count as exact.

Each point's flags text is ``beyond-accuracy`` where a shown quantity is past what the tool can
measure (as :func:`acquire.uncertainty.point_flags` judges it), ``overrange`` or ``invalid``
where the meter gave no usable reading, else ''. Everything is vectorised over the chunk.
"""

from __future__ import annotations

from collections.abc import Sequence
from dataclasses import dataclass
from functools import cache
from typing import Any

import numpy as np

from acquire.compensation.interpolation import GridForms
from acquire.impedance import _angular as angular
from acquire.uncertainty import (
    COVERAGE_FACTOR,
    correct_with_uncertainty,
    flags_from,
    reading_covariance,
)
from acquire.uncertainty.flags import check_names
from acquire.uncertainty.flags import judge as judge_points
from acquire.uncertainty.prepared import PreparedCorrection

#: Quantities judged for the display besides the shown ones (the latest-point panel's |Z| and
#: theta).
ALSO_JUDGED = ("Z", "theta")
OVERRANGE, INVALID = "overrange", "invalid"


@dataclass(frozen=True, eq=False)
class PointValues:
    """One chunk's uncertainty: ``cov`` (n, 2, 2) ohm² (NaN where unknown; its expanded
    uncertainty is :func:`acquire.uncertainty.expanded` of it), ``flags`` (n,) texts and
    ``beyond`` (name -> (n,) bool) per judged quantity."""

    corrected: np.ndarray | None
    cov: np.ndarray
    flags: np.ndarray
    beyond: dict[str, np.ndarray]


@dataclass(frozen=True)
class PointUncertainty:
    """How a sweep's points get their uncertainty: accuracy, settings and the shown quantities.

    ``level`` (V rms), ``speed`` (a speed word) and ``averaging`` are the meter settings of the
    sweep; None where the sweep set none (the accuracy's reference conditions hold there).
    """

    accuracy: Any = None
    level: float | None = None
    speed: str | None = None
    averaging: int | None = None
    names: tuple[str, ...] = ("Ls", "Rs", "Q")

    @classmethod
    def for_meter(cls, meter: Any, names: Sequence[str] = ("Ls", "Rs", "Q")) -> PointUncertainty:
        """From a meter: its dialect's accuracy and the settings last applied to it."""
        accuracy = getattr(getattr(meter, "dialect", None), "accuracy", None)
        settings = dict(getattr(meter, "settings", None) or {})
        return cls(
            accuracy=accuracy,
            level=settings.get("level"),
            speed=settings.get("speed"),
            averaging=settings.get("averaging"),
            names=tuple(names),
        )

    @property
    def unset(self) -> list[str]:
        """The settings the sweep did not set (taken at the dialect's reference conditions)."""
        values = {"level": self.level, "speed": self.speed, "averaging": self.averaging}
        return [name for name, value in values.items() if value is None]

    def note(self) -> str:
        """One line saying what the uncertainty counts (for the view and the stored settings)."""
        if self.accuracy is None:
            return "uncertainty: Type A only (the dialect states no accuracy)"
        text = "uncertainty: expanded, k = 2, from the meter's stated accuracy and repeatability"
        unset = self.unset
        if unset:
            words = ", ".join(unset[:-1]) + (" and " if len(unset) > 1 else "") + unset[-1]
            meant = {
                "level": f"test level {self.accuracy.reference_level:g} V",
                "speed": "the stated repeatability",
                "averaging": "one reading per point",
            }
            text += (
                f"; {words} not set: the dialect's reference conditions are assumed "
                f"({', '.join(meant[name] for name in unset)})"
            )
        return text

    def describe(self) -> dict[str, Any]:
        """What the sweep's stored settings say about its uncertainty."""
        out: dict[str, Any] = {"coverage_factor": COVERAGE_FACTOR, "note": self.note()}
        if self.accuracy is not None and self.unset:
            out["reference_conditions_assumed"] = self.unset
        return out

    def _settings(self) -> dict[str, Any]:
        return {"level": self.level, "speed": self.speed, "averaging": self.averaging or 1}

    def evaluate(self, f, raw, references: Any = None, u_m=None) -> PointValues:
        """The chunk's corrected impedance (with ``references``), uncertainty and flags.

        ``u_m`` is the Type A standard uncertainty of the readings (from repeats; None for a
        single reading each)."""
        f = np.asarray(f, dtype=float)
        raw = np.asarray(raw, dtype=complex)
        judged = _judged(self.names)
        corrected = None
        with np.errstate(all="ignore"):
            if references is not None:
                corrected, cov = self._correct(f, raw, u_m, references)
                if self.accuracy is None and not _all_type_a(references, u_m):
                    cov = np.full(cov.shape, np.nan)
            else:
                cov = self._raw_cov(f, raw, u_m, self._settings())
            z = raw if corrected is None else corrected
            known = np.isfinite(cov)
            judge = cov if known.all() else np.where(known, cov, 0.0)
            beyond = judge_points(angular(f), z, judge, judged)
            flags = flags_from(beyond, self.names).astype(object)
            if not np.isfinite(raw).all():
                flags[np.isinf(raw.real) | np.isinf(raw.imag)] = OVERRANGE
                flags[np.isnan(raw.real) | np.isnan(raw.imag)] = INVALID
        return PointValues(corrected, cov, flags, beyond)

    def _correct(self, f, raw, u_m, references) -> tuple[np.ndarray, np.ndarray]:
        """Corrected readings and their covariance; a reference set is prepared once (its forms,
        the accuracy's constants, the settings checked) and kept for the sweep's later chunks."""
        kept = self.__dict__.get("_prepared")
        if kept is not None and kept.refs is references:
            return kept.batch(f, raw, u_m)
        settings = self._settings()
        if not isinstance(getattr(references, "grid_forms", None), GridForms):
            cp = correct_with_uncertainty(f, raw, u_m, references, self.accuracy, **settings)
            return cp.z, cp.cov
        kept = PreparedCorrection(references, self.accuracy, **settings)
        object.__setattr__(self, "_prepared", kept)
        return kept.batch(f, raw, u_m)

    def _raw_cov(self, f, raw, u_m, settings) -> np.ndarray:
        if self.accuracy is None and u_m is None:
            return np.full(raw.shape + (2, 2), np.nan)
        return reading_covariance(f, raw, u_m, self.accuracy, settings)


@cache
def _judged(names: tuple[str, ...]) -> tuple[str, ...]:
    """The quantities judged for a sweep showing ``names`` (checked once per set of names; an
    unknown name is refused every time, as a refusal is not kept)."""
    judged = tuple(dict.fromkeys((*names, *ALSO_JUDGED)))
    check_names(judged)
    return judged


def _all_type_a(references: Any, u_m) -> bool:
    """Whether, without a stated accuracy, every reading has a Type A of its own: the DUT's
    (``u_m``, from repeats) and each standard the set holds. A reading without one would count
    as exact and the uncertainty would look smaller than it is, so it is then not known."""
    if u_m is None:
        return False
    held = [s for s in ("open", "short", "load") if getattr(references, s, None) is not None]
    return all(getattr(references, f"{s}_u", None) is not None for s in held)
