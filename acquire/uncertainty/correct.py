"""Correcting readings with a reference set, and carrying every uncertainty to the result.

:func:`correct_with_uncertainty` takes DUT readings, their Type A uncertainty, a reference set
(:class:`acquire.compensation.ReferenceSet`) and the meter's stated accuracy, and returns the
corrected impedance with the covariance of its real and imaginary parts and its expanded
uncertainty (``k = 2``). What it counts, per reading (the DUT's and each standard's):

- Type B: the stated accuracy's bound as a rectangular distribution
  (:func:`acquire.uncertainty.accuracy.reading_uncertainty`), when ``accuracy`` is given;
- Type A: the standard uncertainty of the mean of repeated readings when there were repeats
  (``u_m`` for the DUT; the set's ``open_u``, ``short_u``, ``load_u`` for the standards), else
  the stated one-reading repeatability divided by ``√repeats``
  (:func:`acquire.uncertainty.accuracy.repeatability`), when ``accuracy`` is given;
- the load standard's own tolerance ``load_true_u`` (for example from its certificate);
- with open and short but no load, the correction's model error: it is exact only for a fixture
  whose stray sits after its series part, and is off by up to about ``2·|Zs/Zo|`` of the value
  for others (a cable, say); see :func:`_open_short_model`.

The readings are taken as independent of each other. Where the meter's errors of two readings
are in fact correlated (the same range, the same frequency) the correction cancels part of them
and the result is better than stated: the uncertainty errs on the safe side.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from acquire.compensation.interpolation import GridForms
from acquire.errors import InputError
from acquire.uncertainty.accuracy import reading_uncertainty, repeatability
from acquire.uncertainty.prepared import PreparedCorrection
from acquire.uncertainty.propagation import as_covariance, expanded, propagate

STANDARD_NAMES = ("open", "short", "load")


@dataclass(frozen=True, eq=False)
class CorrectedPoints:
    """Corrected impedance with its uncertainty, per frequency.

    ``frequency`` (Hz, shape ``(n,)``), ``z`` (complex ohm, ``(n,)``), ``cov`` (``(n, 2, 2)``,
    covariance of (R, X) in ohm²) and ``expanded`` (``(n, 2)``: U of R and of X in ohm, k = 2).
    """

    frequency: np.ndarray
    z: np.ndarray
    cov: np.ndarray
    expanded: np.ndarray


def _standard_u(refs, at, name: str, f: np.ndarray) -> np.ndarray | None:
    """The set's Type A of standard ``name`` at ``f`` (None when it has none)."""
    u = getattr(at, f"{name}_u", None)
    if u is not None:
        u = np.asarray(u, dtype=float)
        if u.shape[:1] == f.shape:
            return u
    u = getattr(refs, f"{name}_u", None)
    if u is None:
        return None
    u = np.asarray(u, dtype=float)
    grid = np.log(np.asarray(refs.frequency, dtype=float))
    if u.shape[:1] != grid.shape:
        raise InputError(
            f"{name}_u has {u.shape[0]} values but the set has {grid.size} frequencies"
        )
    x = np.log(f)
    if u.ndim == 1:
        return np.interp(x, grid, u)
    return np.stack([np.interp(x, grid, u[:, i]) for i in range(u.shape[1])], axis=-1)


def reading_covariance(f, z, u_a, accuracy, settings, repeats: int = 1) -> np.ndarray:
    """Covariance of readings ``z``: their Type A ``u_a`` (or, without it, the stated
    repeatability of the mean of ``repeats`` readings) plus their Type B; zero without either."""
    shape = z.shape
    if u_a is not None:
        cov = as_covariance(u_a, shape)
    elif accuracy is not None:
        cov = as_covariance(repeatability(f, z, accuracy, **settings) / np.sqrt(repeats), shape)
    else:
        cov = np.zeros(shape + (2, 2))
    if accuracy is not None:
        cov = cov + as_covariance(reading_uncertainty(f, z, accuracy, **settings), shape)
    return cov


def correct_with_uncertainty(
    f,
    zm,
    u_m,
    refs,
    accuracy=None,
    *,
    level: float | None = None,
    speed: str | None = None,
    averaging: int = 1,
    load_true_u=None,
) -> CorrectedPoints:
    """Correct readings ``zm`` taken at ``f`` with ``refs`` and propagate their uncertainties.

    ``u_m`` is the Type A standard uncertainty of the DUT readings (None when each was read
    once; any form :func:`acquire.uncertainty.as_covariance` takes). ``accuracy`` is the
    dialect's :class:`drivers.dialect.MeterAccuracy` (None: count only Type A). ``level``,
    ``speed`` and ``averaging`` are the meter's settings for the readings (the same are assumed
    for the standards). ``load_true_u`` is the standard uncertainty of the load's true value.
    The standards at ``f`` come from ``refs.at(f)``; a
    :class:`~acquire.compensation.ReferenceSet` goes through
    :class:`~acquire.uncertainty.prepared.PreparedCorrection` (the same numbers, with the set's
    kept forms), which a caller correcting many batches with one set keeps.
    """
    f = np.atleast_1d(np.asarray(f, dtype=float))
    zm = np.atleast_1d(np.asarray(zm, dtype=complex))
    if f.shape != zm.shape or f.ndim != 1:
        raise InputError(f"give one frequency per reading: {f.shape} and {zm.shape}")
    if isinstance(getattr(refs, "grid_forms", None), GridForms):
        prepared = PreparedCorrection(refs, accuracy, level, speed, averaging, load_true_u)
        zx, cov = prepared.correct(f, zm, u_m)
        return CorrectedPoints(frequency=f, z=zx, cov=cov, expanded=expanded(cov))
    at = refs.at(f)
    settings = {"level": level, "speed": speed, "averaging": averaging}
    repeats = max(1, int(getattr(refs, "repeats", 1) or 1))
    z_std = {name: getattr(at, name) for name in STANDARD_NAMES}
    u_std: dict[str, np.ndarray | None] = {}
    for name, z in z_std.items():
        if z is None:
            u_std[name] = None
            continue
        z = np.asarray(z, dtype=complex)
        u_a = _standard_u(refs, at, name, f)
        u_std[name] = reading_covariance(f, z, u_a, accuracy, settings, repeats)
    u_dut = reading_covariance(f, zm, u_m, accuracy, settings, 1)
    zx, cov = propagate(
        zm,
        u_dut,
        z_std["open"],
        u_std["open"],
        z_std["short"],
        u_std["short"],
        z_std["load"],
        u_std["load"],
        None if z_std["load"] is None else at.load_true,
        load_true_u,
    )
    if z_std["open"] is not None and z_std["short"] is not None and z_std["load"] is None:
        cov = cov + _open_short_model(zx, z_std["open"], z_std["short"])
    return CorrectedPoints(frequency=f, z=zx, cov=cov, expanded=expanded(cov))


def _open_short_model(zx, zo, zs) -> np.ndarray:
    """Covariance of the open-short correction's model error (Type B, rectangular).

    For any reciprocal fixture with chain parameters A, B, C, D (AD − BC = 1) the open-short
    correction returns ``Zx/D²`` (algebra: ``Zs = B/D``, ``Zo = A/C``). Open and short fix only
    two of the three parameters; with ``t = Zs/Zo = BC/(AD)`` the relative error ``1/D² − 1`` is
    0 for a fixture whose stray sits after its series part (D = 1), ``−t`` for a symmetric one
    (A = D, a cable) and ``t² − 2t`` for one whose stray sits before its series part (A = 1).
    So the relative error of Zx is taken as within ``|t|·(2 + |t|)`` for R and X each, standard
    uncertainty that bound times ``|Zx|/√3`` (JCGM 100:2008 4.3.7). A load standard removes it.
    """
    with np.errstate(all="ignore"):
        t = np.abs(np.asarray(zs) / np.asarray(zo))
        a = t * (2.0 + t) * np.abs(zx)
    return as_covariance(a / np.sqrt(3.0), np.shape(zx))
