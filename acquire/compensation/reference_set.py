"""The reference set: open, short and load readings of one fixture on one frequency grid.

A :class:`ReferenceSet` is plain data (a frozen dataclass of numpy arrays and metadata) with the
operations that belong to it: correcting readings, judging itself, saving and loading. The
formulas are in :mod:`acquire.compensation.formulas`, the interpolation between grid points in
:mod:`acquire.compensation.interpolation`, the checks in :mod:`acquire.compensation.checks` and
the file format in :mod:`acquire.compensation.refs_file`.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from datetime import UTC, datetime
from functools import cached_property
from pathlib import Path
from typing import Any

import numpy as np

from acquire.compensation import checks, formulas, refs_file
from acquire.compensation.findings import Finding
from acquire.compensation.interpolation import GridForms, uncertainty_at
from acquire.compensation.protocol import (
    GRID_SPACINGS,
    IMPEDANCE_FIELDS,
    STANDARDS,
    UNCERTAINTY_FIELDS,
)
from acquire.errors import CompensationError

__all__ = ["IMPEDANCE_FIELDS", "STANDARDS", "UNCERTAINTY_FIELDS", "ReferenceSet"]


@dataclass(frozen=True, eq=False, repr=False)
class ReferenceSet:
    """Open, short and load readings of a fixture, and what is known about their capture.

    ``frequency`` (Hz, 1-D) is the grid; ``open``, ``short`` and ``load`` are the meter's complex
    readings (ohm) on that grid with the fixture empty, shorted, and holding the load standard;
    ``load_true`` is the load standard's true impedance (an array on the grid, or one number that
    is broadcast). Any of them may be None. ``captured_at`` is a timezone-aware time (kept in
    UTC), ``temperature`` the fixture temperature in degrees Celsius if known.

    ``open_u``, ``short_u`` and ``load_u`` are the Type A standard uncertainties of the mean
    readings (JCGM 100:2008, 4.2: the experimental standard deviation of the mean), in ohm, one
    value per grid frequency that holds for the real and for the imaginary part alike, or None
    when the standard was read once; ``repeats`` is how many readings each mean is of.
    ``grid_spacing`` says how the grid was made: ``"log"`` or ``"linear"`` (evenly spaced: a gap
    is a fault :meth:`check` reports), ``"list"`` (any spacing) or ``""`` (not recorded).

    Arrays are copied and made read-only at construction; equality is identity (compare the
    arrays or :meth:`to_dict` to compare contents). Construction refuses only what cannot be
    represented (wrong shapes, non-numbers, a naive time); a grid that is not strictly
    increasing, NaN or overrange readings and the like are reported by :meth:`check`, and
    :meth:`correct` refuses a grid it cannot use.
    """

    frequency: np.ndarray
    open: np.ndarray | None = None
    short: np.ndarray | None = None
    load: np.ndarray | None = None
    #: Stored as an array on the grid; one number given at construction is broadcast.
    load_true: np.ndarray | None = None
    captured_at: datetime | None = None
    fixture: str = ""
    meter: str = ""
    temperature: float | None = None
    notes: str = ""
    open_u: np.ndarray | None = None
    short_u: np.ndarray | None = None
    load_u: np.ndarray | None = None
    repeats: int = 1
    grid_spacing: str = ""

    def __post_init__(self) -> None:
        grid = _array(self.frequency, float, "frequency")
        if grid.ndim != 1 or grid.size == 0:
            raise CompensationError(
                "the frequency grid must be a non-empty list of frequencies, "
                f"not an array of shape {grid.shape}"
            )
        object.__setattr__(self, "frequency", _frozen(grid))
        for name in IMPEDANCE_FIELDS:
            value = getattr(self, name)
            if value is None:
                continue
            z = _array(value, complex, name)
            if name == "load_true" and z.ndim == 0:
                z = np.full(grid.shape, complex(z))
            if z.shape != grid.shape:
                raise CompensationError(
                    f"{name} has {z.size} values of shape {z.shape} but the grid has {grid.size} "
                    "frequencies; give one value per grid frequency"
                )
            object.__setattr__(self, name, _frozen(z))
        for name in UNCERTAINTY_FIELDS:
            value = getattr(self, name)
            if value is None:
                continue
            u = _array(value, float, name)
            if u.shape != grid.shape or np.any(u < 0):
                raise CompensationError(
                    f"{name} must hold one non-negative uncertainty (ohm) per grid frequency"
                )
            if getattr(self, name[:-2]) is None:
                raise CompensationError(f"{name} is given but the {name[:-2]} reading is not")
            object.__setattr__(self, name, _frozen(u))
        if type(self.repeats) is not int or self.repeats < 1:
            raise CompensationError("repeats must be a whole number of readings, 1 or more")
        if self.grid_spacing not in GRID_SPACINGS:
            raise CompensationError(
                f"grid_spacing must be one of {', '.join(map(repr, GRID_SPACINGS))}"
            )
        object.__setattr__(self, "captured_at", _utc(self.captured_at))
        if self.temperature is not None:
            t = float(self.temperature)
            if not math.isfinite(t):
                raise CompensationError("temperature must be a finite number of °C, or None")
            object.__setattr__(self, "temperature", t)
        for name in ("fixture", "meter", "notes"):
            if not isinstance(getattr(self, name), str):
                raise CompensationError(f"{name} must be text")

    def __repr__(self) -> str:
        grid = self.frequency
        return (
            f"ReferenceSet(method={self.method!r}, points={grid.size}, "
            f"from {grid[0]:g} Hz to {grid[-1]:g} Hz, fixture={self.fixture!r})"
        )

    @property
    def method(self) -> str:
        """The correction the standards give: ``"open-short-load"``, ``"short"``, ... ``"none"``."""
        return formulas.method_name(*(getattr(self, name) is not None for name in STANDARDS))

    @property
    def standards(self) -> tuple[str, ...]:
        """Names of the standards measured, in the order ``open``, ``short``, ``load``."""
        return tuple(name for name in STANDARDS if getattr(self, name) is not None)

    @property
    def points(self) -> int:
        """Number of grid frequencies."""
        return int(self.frequency.size)

    def correct(self, f, z) -> np.ndarray:
        """The DUT's impedance from readings ``z`` (complex ohm) taken at frequencies ``f`` (Hz).

        ``f`` and ``z`` have one shape (1-D, or scalars for a spot reading). The method follows
        from the standards present (:attr:`method`; formulas in
        :mod:`acquire.compensation.formulas`). Frequencies on the grid use the readings as
        captured (no interpolation); others inside the grid use the references interpolated as
        in :mod:`acquire.compensation.interpolation`; any outside the grid raise
        :class:`~acquire.errors.CompensationError`, as do a set without standards, a load without
        its true value and a grid that is not strictly increasing. A reading that is not finite
        gives a result that is not finite.
        """
        f, z, shape = self._points(f, z)
        return self._correction_at(f).apply(z).reshape(shape)

    def expected_reading(self, f, z_dut) -> np.ndarray:
        """What the meter would read through this fixture for a DUT of impedance ``z_dut``.

        The inverse of :meth:`correct` (the fixture model the standards imply), under the same
        rules for frequencies.
        """
        f, z, shape = self._points(f, z_dut)
        return self._correction_at(f).reading(z).reshape(shape)

    def at(self, f) -> ReferenceSet:
        """This set carried to the 1-D grid ``f`` (inside the grid), metadata unchanged except
        ``grid_spacing``, which becomes ``"list"`` (the new grid's spacing is the caller's).

        The standards move as :meth:`correct` moves them, their uncertainties as in
        :func:`~acquire.compensation.interpolation.uncertainty_at`.
        """
        f = _array(f, float, "frequency")
        forms = self._forms
        at = forms.place(np.atleast_1d(f))
        zo, zs, zl, zt = forms.standards(at)
        return dataclasses.replace(
            self,
            frequency=at.f,
            grid_spacing="list",
            open=zo,
            short=zs,
            load=zl,
            load_true=zt,
            open_u=uncertainty_at(self._grid, self.open_u, at),
            short_u=uncertainty_at(self._grid, self.short_u, at),
            load_u=uncertainty_at(self._grid, self.load_u, at),
        )

    def check(self, dut=None, f=None) -> list[Finding]:
        """Findings a user can act on, about these references and, if given, a DUT's readings.

        ``dut`` are complex readings at ``f`` (default: the grid). The rules are listed in
        :mod:`acquire.compensation.checks`. An empty list means nothing was found.
        """
        return checks.check(self, dut, f)

    def with_standard(self, name: str, z, u=None) -> ReferenceSet:
        """A copy with ``name`` (``open``, ``short``, ``load`` or ``load_true``) set to ``z``
        and, for a standard, its Type A uncertainty ``name_u`` set to ``u`` (None: read once)."""
        if name not in IMPEDANCE_FIELDS:
            raise CompensationError(
                f"unknown standard {name!r}; use one of {', '.join(IMPEDANCE_FIELDS)}"
            )
        if name in STANDARDS:
            return dataclasses.replace(self, **{name: z, f"{name}_u": u})
        return dataclasses.replace(self, **{name: z})

    def to_dict(self) -> dict[str, Any]:
        """A JSON-ready dict that :meth:`from_dict` turns back into an identical set."""
        return refs_file.to_dict(self)

    @classmethod
    def from_dict(cls, d: dict[str, Any]) -> ReferenceSet:
        """The set described by ``d`` (from :meth:`to_dict`); refuses a malformed or unknown one."""
        return cls(**refs_file.fields_from_dict(d))

    def save(self, path: str | Path) -> None:
        """Write the set to ``path`` in the self-describing JSON of :mod:`.refs_file`.

        Read it back with :meth:`ReferenceSet.read`.
        """
        refs_file.write(Path(path), self.to_dict())

    @classmethod
    def read(cls, path: str | Path) -> ReferenceSet:
        """The set in the file at ``path`` (written by :meth:`save`, format version 1 or 2);
        refuses a damaged file or one of an unknown version."""
        return cls.from_dict(refs_file.read(Path(path)))

    @property
    def _impedances(self) -> tuple[np.ndarray | None, ...]:
        return tuple(getattr(self, name) for name in IMPEDANCE_FIELDS)

    @cached_property
    def _grid(self) -> np.ndarray:
        grid = self.frequency
        if not np.all(np.isfinite(grid)) or grid[0] <= 0 or np.any(np.diff(grid) <= 0):
            raise CompensationError(
                "the reference grid is not finite, positive and strictly increasing; "
                "run check() on the set for details and capture the references again"
            )
        return grid

    @cached_property
    def _forms(self) -> GridForms:
        return GridForms(self._grid, *self._impedances)

    @property
    def grid_forms(self) -> GridForms:
        """The set's grid and standards with their carried forms, kept for every later batch of
        frequencies (refuses a grid that is not finite, positive and strictly increasing)."""
        return self._forms

    @cached_property
    def _grid_correction(self) -> formulas.Correction:
        self._grid  # noqa: B018 - validates the grid once
        return self._build(self.open, self.short, self.load, self.load_true)

    def _build(self, zo, zs, zl, zt) -> formulas.Correction:
        if self.method == "none":
            raise CompensationError(
                "this reference set holds no open, short or load reading; capture at least a short"
            )
        if zl is not None and zt is None:
            raise CompensationError(
                "the load reading cannot be used without the load's true impedance (load_true)"
            )
        return formulas.correction(zo, zs, zl, zt)

    def _correction_at(self, f: np.ndarray) -> formulas.Correction:
        grid = self._grid
        if f is grid or (f.shape == grid.shape and np.array_equal(f, grid)):
            return self._grid_correction
        forms = self._forms
        at = forms.place(f)
        if at.on_grid:
            return self._grid_correction.take(at.index)
        return self._build(*forms.standards(at))

    def _points(self, f, z) -> tuple[np.ndarray, np.ndarray, tuple[int, ...]]:
        f = np.asarray(f, dtype=float)
        z = np.asarray(z, dtype=complex)
        if f.shape != z.shape or f.ndim > 1:
            raise CompensationError(
                f"give one frequency per reading: {f.size} frequencies of shape {f.shape}, "
                f"{z.size} readings of shape {z.shape}"
            )
        return f.reshape(-1), z.reshape(-1), z.shape


def _array(value, dtype, name: str) -> np.ndarray:
    try:
        return np.array(value, dtype=dtype)
    except (TypeError, ValueError) as exc:
        raise CompensationError(f"{name} must be numbers ({exc})") from exc


def _frozen(a: np.ndarray) -> np.ndarray:
    a.setflags(write=False)
    return a


def _utc(when: datetime | None) -> datetime | None:
    if when is None:
        return None
    if not isinstance(when, datetime):
        raise CompensationError(f"captured_at must be a datetime, not {type(when).__name__}")
    if when.tzinfo is None or when.utcoffset() is None:
        raise CompensationError(
            "captured_at must carry a time zone (for example datetime.now(timezone.utc))"
        )
    return when.astimezone(UTC)
