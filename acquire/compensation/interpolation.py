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

import numpy as np

from acquire.compensation import formulas
from acquire.compensation.findings import hz
from acquire.errors import CompensationError

#: Relative distance from a grid end still taken as that end.
END_TOLERANCE = 1e-12


@dataclass(frozen=True, eq=False)
class Placement:
    """Where frequencies ``f`` fall on a grid.

    ``index[i]`` is the grid point at or just below ``f[i]``; ``weight[i]`` the fraction of the
    way, in log frequency, to the next point; ``exact[i]`` whether ``f[i]`` is a grid point (then
    ``weight`` is 0). ``on_grid`` is true when all of them are.
    """

    f: np.ndarray
    index: np.ndarray
    weight: np.ndarray
    exact: np.ndarray
    on_grid: bool

    def lerp(self, values: np.ndarray) -> np.ndarray:
        """``values`` (one per grid point) carried linearly, by ``weight``, to the placed
        frequencies: the value at ``index`` plus its share of the step to the next point."""
        upper = np.minimum(self.index + 1, values.shape[0] - 1)
        a = values[self.index]
        return a + self.weight * (values[upper] - a)


def place(grid: np.ndarray, f: np.ndarray) -> Placement:
    """Locate 1-D frequencies ``f`` on the strictly increasing ``grid``; refuse any outside it."""
    if f.size and (not np.all(np.isfinite(f)) or np.any(f <= 0)):
        raise CompensationError("frequencies to correct must be finite and above 0 Hz")
    lo, hi = grid[0], grid[-1]
    below = f < lo * (1 - END_TOLERANCE)
    above = f > hi * (1 + END_TOLERANCE)
    if np.any(below) or np.any(above):
        outside = f[below | above]
        what = (
            f"{hz(outside[0])} lies"
            if outside.size == 1
            else f"{outside.size} frequencies ({hz(outside.min())} to {hz(outside.max())}) lie"
        )
        raise CompensationError(
            f"{what} outside the reference grid ({hz(lo)} to {hz(hi)}); references are never "
            "extrapolated: capture them over the whole range of the sweep"
        )
    f = np.clip(f, lo, hi)
    if grid.size == 1:
        index = np.zeros(f.shape, dtype=np.intp)
        return Placement(f, index, np.zeros(f.shape), np.ones(f.shape, bool), True)
    index = np.searchsorted(grid, f, side="right") - 1
    np.clip(index, 0, grid.size - 2, out=index)
    exact = grid[index] == f
    top = f == hi
    index[top] = grid.size - 1
    exact |= top
    if np.all(exact):
        return Placement(f, index, np.zeros(f.shape), exact, True)
    log_grid = np.log(grid)
    upper = np.minimum(index + 1, grid.size - 1)
    span = log_grid[upper] - log_grid[index]
    with np.errstate(divide="ignore", invalid="ignore"):
        weight = np.where(exact, 0.0, (np.log(f) - log_grid[index]) / span)
    return Placement(f, index, weight, exact, False)


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
        if admittance:
            v = 1.0 / v
        flat = v.real + 1j * (v.imag / grid)
        mid = at.lerp(flat)
        z_at = mid.real + 1j * (mid.imag * at.f)
        if admittance:
            z_at = 1.0 / z_at
        if series is not None:
            z_at = z_at + series[1]
    return np.where(at.exact, z[at.index], z_at)


#: Open, short, load and the load's true value; each None when the set does not have it.
Standards = tuple[np.ndarray | None, np.ndarray | None, np.ndarray | None, np.ndarray | None]


def standards_at(grid: np.ndarray, at: Placement, zo, zs, zl, zt) -> Standards:
    """Open, short, load and load's true value (each None or on ``grid``) at the placed frequencies.

    Each standard is interpolated with the fixture effects the ones before it describe taken
    off: the short as it is (impedance); the open in admittance, less the short; the load after
    open-short correction (what is left is the load standard itself, seen through whatever the
    L-section model misses), in impedance, then put back through the interpolated open and
    short. The load's true value is interpolated in impedance.
    """
    zs_at: np.ndarray | None = None
    series: tuple[np.ndarray, np.ndarray] | None = None
    if zs is not None:
        zs_at = interpolate(grid, zs, at, admittance=False)
        series = (zs, zs_at)
    zo_at = None if zo is None else interpolate(grid, zo, at, admittance=True, series=series)
    zt_at = None if zt is None else interpolate(grid, zt, at, admittance=False)
    if zl is None or (zo is None and zs is None) or at.on_grid:
        zl_at = None if zl is None else interpolate(grid, zl, at, admittance=False)
    else:
        seen = formulas.correction(zo, zs, None, None)
        bare_at = interpolate(grid, seen.apply(zl), at, admittance=False)
        zl_at = formulas.correction(zo_at, zs_at, None, None).reading(bare_at)
        zl_at = np.where(at.exact, zl[at.index], zl_at)
    return zo_at, zs_at, zl_at, zt_at


def uncertainty_at(grid: np.ndarray, u: np.ndarray | None, at: Placement) -> np.ndarray | None:
    """A standard's Type A uncertainty (ohm, on ``grid``) at the placed frequencies.

    Linear in ``log(f)`` between neighbouring grid points, as the standards are; the stored value
    bit for bit at a grid frequency. An uncertainty is a slowly varying, non-negative number, so
    no other form is needed and a linear piece never goes below its ends.
    """
    if u is None or at.on_grid:
        return None if u is None else u[at.index]
    with np.errstate(invalid="ignore"):
        return np.where(at.exact, u[at.index], at.lerp(u))
