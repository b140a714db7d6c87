"""Carry reference readings from their grid to other frequencies inside it, never beyond.

Form of the interpolation
-------------------------
Between two neighbouring grid frequencies each standard is interpolated linearly in
``log(f)``, not as the raw complex value but in a form in which a fixture's standard is nearly
constant, each with the fixture effects of the standards before it taken off:

- the short in impedance, as ``R`` and ``X/f``: a shorted fixture is a series resistance and
  inductance, ``Z = R + j*2*pi*f*L``, so ``R`` and ``X/f = 2*pi*L`` barely move;
- the open in admittance, as ``G`` and ``B/f``: an open fixture is a shunt conductance and
  capacitance, ``Y = G + j*2*pi*f*C``, so ``G`` and ``B/f = 2*pi*C`` barely move. The open is
  read through the same series residual as the short, so when a short was taken the admittance
  interpolated is that of ``Zo - Zs`` (the shunt part alone) and the interpolated short is
  added back;
- the load, after open-short correction with the references on the grid, in impedance (``R``,
  ``X/f``): what is left is the load standard itself plus what the L-section model misses, and
  it is put back through the interpolated open and short; without an open or short, the raw load
  in impedance;
- the load's true value in impedance (``R``, ``X/f``);
- each standard's Type A uncertainty (:func:`uncertainty_at`) linearly in ``log(f)`` as it is.

For a fixture that really is lumped R, L, G and C (an L section) this is exact at every
frequency, with or without the load; for frequency-dependent elements (skin effect, dielectric
loss, lines) the error is second order in the grid step. Linear pieces cannot overshoot, so
noise in the references is never amplified, and at a grid frequency the stored reading is
returned unchanged (bit for bit).

Frequencies outside ``[grid[0], grid[-1]]`` are refused with
:class:`~acquire.errors.CompensationError`: the references say nothing there. A frequency within
a relative ``1e-12`` of an end of the grid counts as that end (rounding in a frequency plan).
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property
from typing import Any

import numpy as np

from acquire.compensation import formulas
from acquire.errors import CompensationError
from acquire.impedance import computed_once

#: Relative distance from a grid end still taken as that end.
END_TOLERANCE = 1e-12
#: Up to this many placed frequencies the standards' forms are carried side by side.
SIDE_BY_SIDE_UP_TO = 512


@dataclass(frozen=True, eq=False)
class Placement:
    """Where frequencies ``f`` fall on a grid.

    ``index[i]`` is the grid point at or just below ``f[i]``; ``weight[i]`` the fraction of the
    way, in log frequency, to the next point (``upper[i]``, the last point at the top); ``exact[i]``
    whether ``f[i]`` is a grid point (then ``weight`` is 0). ``on_grid`` is true when all of them
    are (``weight`` and ``upper`` may then be None).
    """

    f: np.ndarray
    index: np.ndarray
    weight: np.ndarray | None
    exact: np.ndarray
    on_grid: bool
    upper: np.ndarray | None = None

    @computed_once
    def exact_at(self) -> tuple[np.ndarray, np.ndarray] | None:
        """Positions of the placed frequencies that are grid points and those grid points'
        indices, or None where there are none (worked out once, shared by every standard)."""
        if not self.exact.any():
            return None
        where = np.flatnonzero(self.exact)
        return where, self.index[where]

    def lerp(self, values: np.ndarray) -> np.ndarray:
        """``values`` (one per grid point) carried linearly, by ``weight``, to the placed
        frequencies: the value at ``index`` plus its share of the step to the next point."""
        a = values[self.index]
        if self.weight is None:
            return a
        upper = self.upper
        if upper is None:
            upper = np.minimum(self.index + 1, values.shape[0] - 1)
        return a + self.weight * (values[upper] - a)

    def lerp_side(self, values: np.ndarray) -> np.ndarray:
        """:meth:`lerp` of several quantities side by side, ``values`` of shape (grid point,
        quantity): the same operations, point by point, in one step for all of them."""
        a = values[self.index]
        if self.weight is None:
            return a
        upper = self.upper
        if upper is None:
            upper = np.minimum(self.index + 1, values.shape[0] - 1)
        return a + self.weight[:, None] * (values[upper] - a)


def place(grid: np.ndarray, f: np.ndarray, log_grid: np.ndarray | None = None) -> Placement:
    """Locate 1-D frequencies ``f`` on the strictly increasing ``grid``; refuse any outside it.

    ``log_grid`` is ``np.log(grid)`` when the caller keeps it (it is computed otherwise).
    """
    lo, hi = grid[0], grid[-1]
    low = high = lo
    if f.size:
        low, high = f.min(), f.max()
        if not (low > 0 and high < np.inf):  # false for NaN too
            raise CompensationError("frequencies to correct must be finite and above 0 Hz")
        if low < lo * (1 - END_TOLERANCE) or high > hi * (1 + END_TOLERANCE):
            _refuse_outside(grid, f)
        if low < lo or high > hi:
            f = np.clip(f, lo, hi)
            low, high = max(low, lo), min(high, hi)
    if grid.size == 1:
        index = np.zeros(f.shape, dtype=np.intp)
        return Placement(f, index, None, np.ones(f.shape, bool), True)
    index = np.searchsorted(grid, f, side="right") - 1
    # f is at or above grid[0] here, so index >= 0: only the top needs bounding (np.clip's
    # own checks cost more than the bound itself on a sweep's small chunks)
    np.minimum(index, grid.size - 2, out=index)
    exact = grid[index] == f
    if high >= hi:
        top = f == hi
        index[top] = grid.size - 1
        exact |= top
    if exact.all():
        return Placement(f, index, None, exact, True)
    if log_grid is None:
        log_grid = np.log(grid)
    upper = np.minimum(index + 1, grid.size - 1)
    base = log_grid[index]
    with np.errstate(divide="ignore", invalid="ignore"):
        weight = (np.log(f) - base) / (log_grid[upper] - base)
    weight[exact] = 0.0
    return Placement(f, index, weight, exact, False, upper)


def _refuse_outside(grid: np.ndarray, f: np.ndarray) -> None:
    from acquire.compensation.findings import hz  # the checks' wording, loaded for this message

    lo, hi = grid[0], grid[-1]
    outside = f[(f < lo * (1 - END_TOLERANCE)) | (f > hi * (1 + END_TOLERANCE))]
    what = (
        f"{hz(outside[0])} lies"
        if outside.size == 1
        else f"{outside.size} frequencies ({hz(outside.min())} to {hz(outside.max())}) lie"
    )
    raise CompensationError(
        f"{what} outside the reference grid ({hz(lo)} to {hz(hi)}); references are never "
        "extrapolated: capture them over the whole range of the sweep"
    )


def _flat(grid: np.ndarray, v: np.ndarray) -> np.ndarray:
    """``v`` in the form that is carried: real part as it is, imaginary part over ``f``."""
    out = np.empty(v.shape, dtype=complex)
    out.real = v.real
    np.divide(v.imag, grid, out=out.imag)
    return out


def _unflat(mid: np.ndarray, f: np.ndarray) -> np.ndarray:
    """The carried form back to impedance (or admittance): imaginary part times ``f``."""
    np.multiply(mid.imag, f, out=mid.imag)
    return mid


def _keep_exact(z_at: Any, z: Any, at: Placement) -> Any:
    """``z_at`` with the stored reading, bit for bit, at the placed grid frequencies."""
    exact = at.exact_at
    if exact is not None:
        z_at[exact[0]] = z[exact[1]]
    return z_at


def interpolate(
    grid: np.ndarray,
    z: np.ndarray,
    at: Placement,
    admittance: bool,
    series: tuple[np.ndarray, np.ndarray] | None = None,
) -> np.ndarray:
    """Impedance ``z`` (on ``grid``) at the placed frequencies, in the smooth form of the module.

    ``admittance`` selects the open's form (``G``, ``B/f``); otherwise ``R``, ``X/f``. ``series``,
    a pair (values on the grid, values at the placed frequencies), is an impedance in series with
    ``z`` that is removed before and added back after: the short for the open, so that only the
    fixture's shunt admittance ``1/(Zo - Zs)`` is interpolated.
    """
    if at.on_grid:
        return z[at.index]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        v = z if series is None else z - series[0]
        flat = _flat(grid, 1.0 / v if admittance else v)
        return _keep_exact(
            _carried(flat, at, admittance, None if series is None else series[1]), z, at
        )


def _carried(flat, at: Placement, admittance: bool, series_at) -> np.ndarray:
    z_at = _unflat(at.lerp(flat), at.f)
    if admittance:
        z_at = 1.0 / z_at
    if series_at is not None:
        z_at = z_at + series_at
    return z_at


#: Open, short, load and the load's true value; each None when the set does not have it.
Standards = tuple[np.ndarray | None, np.ndarray | None, np.ndarray | None, np.ndarray | None]


@dataclass(frozen=True, eq=False)
class GridForms:
    """One reference set's standards on its grid and the smooth forms they are carried in.

    ``grid`` is finite, positive and strictly increasing; ``zo``, ``zs``, ``zl``, ``zt`` the open,
    short, load and load's true value on it (each None when not taken). The log of the grid and
    each standard's form (:func:`standards_at`) are computed once, on first use, and reused for
    every later placement: a set is frozen, so they never change.
    """

    grid: np.ndarray
    zo: np.ndarray | None
    zs: np.ndarray | None
    zl: np.ndarray | None
    zt: np.ndarray | None

    @cached_property
    def log_grid(self) -> np.ndarray:
        return np.log(self.grid)

    @cached_property
    def _flats(self) -> Standards:
        grid, zo, zs, zl, zt = self.grid, self.zo, self.zs, self.zl, self.zt
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            o = None if zo is None else _flat(grid, 1.0 / (zo if zs is None else zo - zs))
            s = None if zs is None else _flat(grid, zs)
            t = None if zt is None else _flat(grid, zt)
            if zl is None or (zo is None and zs is None):
                lo = None if zl is None else _flat(grid, zl)
            else:
                lo = _flat(grid, formulas.correction(zo, zs, None, None).apply(zl))
        return o, s, lo, t

    @cached_property
    def _side(self) -> tuple[tuple[int, ...], np.ndarray | None]:
        """Which of the carried forms the set has, and those forms side by side (grid point,
        form), so that a placement carries them all in one step."""
        flats = self._flats
        held = tuple(i for i, a in enumerate(flats) if a is not None)
        side = np.stack([flats[i] for i in held], 1) if held else None  # type: ignore[misc]
        return held, side

    def place(self, f: np.ndarray) -> Placement:
        """:func:`place` on this grid, with its log kept."""
        return place(self.grid, f, self.log_grid if self.grid.size > 1 else None)

    def standards(self, at: Placement) -> Standards:
        """:func:`standards_at` for frequencies placed on this grid."""
        zo, zs, zl, zt = self.zo, self.zs, self.zl, self.zt
        if at.on_grid:
            i = at.index
            return tuple(None if z is None else z[i] for z in (zo, zs, zl, zt))  # type: ignore[return-value]
        flats = self._flats
        with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
            # a few points (a sweep's chunk): every form carried in one step (lerp, then the
            # imaginary part times f), as fewer numpy calls cost less than the arithmetic; many
            # points: each form on its own, contiguous. Either way each is then taken back from
            # its form as one at a time would be (the same operations, point by point)
            c: list[Any] = [None, None, None, None]
            if at.f.size > SIDE_BY_SIDE_UP_TO:
                o, s, lo, t = (None if a is None else _unflat(at.lerp(a), at.f) for a in flats)
            else:
                held, side = self._side
                if side is not None:
                    carried = _unflat(at.lerp_side(side), at.f[:, None])
                    for column, which in enumerate(held):
                        c[which] = carried[:, column]
                o, s, lo, t = c
            zs_at = None if s is None else _keep_exact(s, zs, at)
            if o is None:
                zo_at = None
            else:
                zo_at = 1.0 / o
                if zs_at is not None:
                    zo_at = zo_at + zs_at
                zo_at = _keep_exact(zo_at, zo, at)
            zt_at = None if t is None else _keep_exact(t, zt, at)
            if lo is None:
                zl_at = None
            elif zo is None and zs is None:
                zl_at = _keep_exact(lo, zl, at)
            else:
                zl_at = formulas.correction(zo_at, zs_at, None, None).reading(lo)
                zl_at = _keep_exact(zl_at, zl, at)
        return zo_at, zs_at, zl_at, zt_at


def standards_at(grid: np.ndarray, at: Placement, zo, zs, zl, zt) -> Standards:
    """Open, short, load and load's true value (each None or on ``grid``) at the placed frequencies.

    Each standard is interpolated with the fixture effects the ones before it describe taken
    off: the short as it is (impedance); the open in admittance, less the short; the load after
    open-short correction (what is left is the load standard itself, seen through whatever the
    L-section model misses), in impedance, then put back through the interpolated open and
    short. The load's true value is interpolated in impedance. A set that places many batches
    of frequencies keeps a :class:`GridForms` instead, which does the same with its forms kept.
    """
    return GridForms(grid, zo, zs, zl, zt).standards(at)


def uncertainty_at(grid: np.ndarray, u: np.ndarray | None, at: Placement) -> np.ndarray | None:
    """A standard's Type A uncertainty (ohm, on ``grid``) at the placed frequencies.

    Linear in ``log(f)`` between neighbouring grid points, as the standards are; the stored value
    bit for bit at a grid frequency. An uncertainty is a slowly varying, non-negative number, so
    no other form is needed and a linear piece never goes below its ends.
    """
    if u is None or at.on_grid:
        return None if u is None else u[at.index]
    with np.errstate(invalid="ignore"):
        return _keep_exact(at.lerp(u), u, at)
