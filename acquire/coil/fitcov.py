"""The covariance of a sweep's errors, as the equivalent-circuit fit counts it.

A corrected point's uncertainty has two parts that behave differently across a sweep:

- the **independent** part (Type A): the noise of the DUT's reading and of each standard's
  reading at that frequency. Each reading is its own draw, so these errors are independent
  from point to point and average down over many points;
- the **systematic** part (Type B, from the meter's stated accuracy): the meter's calibration
  error. It does not change from one reading to the next, only with the frequency band and the
  measuring range the meter uses. Points near each other share most of it, so it does not
  average down, and a fit that counts it as independent claims too much.

The meter's systematic error is modelled as a random field over frequency and impedance
magnitude: each of R and X of a reading at ``(f, |Z|)`` is off by ``u·e`` with ``u`` the stated
accuracy's standard uncertainty there and ``e`` a standard random variable whose correlation
between two readings is

    ρ = exp(−|log10 f₁ − log10 f₂| / ℓ_f − |log10 |Z₁| − log10 |Z₂|| / ℓ_Z)

(an exponential correlation function, the covariance of a first-order Gauss–Markov process,
here in two variables; C. E. Rasmussen, C. K. I. Williams, *Gaussian Processes for Machine
Learning*, MIT Press 2006, section 4.2), ``ℓ_f`` = :data:`BAND_LENGTH` and ``ℓ_Z`` =
:data:`RANGE_LENGTH` decades. The errors of R and of X are independent of each other. So
readings at nearby frequencies and of similar size share the error (a DUT and an open of
similar ``|Z|`` at one frequency too, and the correction then cancels part of it), and
readings far apart in either are nearly independent. No meter states how its error is
correlated; the lengths are our choice (0.35 decade: correlation 1/e at a factor 2.2, 0.24
at a factor 10). Through the simulated meter (whose error is fixed per half decade of frequency
and decade of |Z|) lengths from 0.25 to 0.5 decade give the fit's ±1σ coverages of L, Rdc, Cp
and the self-resonance between 55 % and 85 % over 100 sessions, 0.35 between 60 % and 81 %
(tests/test_fit_coverage.py).

The corrected value's systematic covariance follows from the readings' (the DUT's and the
standards') by the law of propagation for correlated inputs (JCGM 100:2008 5.2.2), with the
correction's complex derivatives (:func:`acquire.uncertainty.sensitivities`): for points ``i``,
``j`` the complex covariance ``c_ij = Σ_a Σ_b ρ_ai,bj · u_ai·g_ai · conj(u_bj·g_bj)`` over the
readings ``a``, ``b``, and the real covariance of ``(R_i, X_i)`` with ``(R_j, X_j)`` is
``[[Re c, −Im c], [Im c, Re c]]`` (a circular error through a holomorphic map stays circular).
"""

from __future__ import annotations

import numpy as np

#: Decades of frequency over which the meter's error correlation falls to 1/e.
BAND_LENGTH = 0.35
#: Decades of impedance magnitude over which it falls to 1/e.
RANGE_LENGTH = 0.35


def correlation(f1, z1, f2, z2) -> np.ndarray:
    """Correlation of the meter's error between readings ``z1`` at ``f1`` and ``z2`` at ``f2``
    (1-D arrays; the result is ``(len(f1), len(f2))``)."""
    lf1, lf2 = np.log10(np.asarray(f1, dtype=float)), np.log10(np.asarray(f2, dtype=float))
    lz1 = np.log10(np.maximum(np.abs(np.asarray(z1, dtype=complex)), 1e-300))
    lz2 = np.log10(np.maximum(np.abs(np.asarray(z2, dtype=complex)), 1e-300))
    distance = np.abs(lf1[:, None] - lf2[None, :]) / BAND_LENGTH
    distance = distance + np.abs(lz1[:, None] - lz2[None, :]) / RANGE_LENGTH
    return np.exp(-distance)


def propagated_covariance(f, readings) -> np.ndarray:
    """The ``(2n, 2n)`` systematic covariance (ohm²) of corrected points ``[R₁…Rₙ, X₁…Xₙ]``.

    ``readings`` is a list of ``(z, u, g)`` per reading that enters the correction (the DUT's,
    each standard's): its complex readings, the standard uncertainty of each of its R and X
    from the stated accuracy, and the correction's complex derivative with respect to it, all
    of shape ``(n,)`` at the sweep's frequencies ``f``.
    """
    f = np.asarray(f, dtype=float)
    c = np.zeros((f.size, f.size), dtype=complex)
    for za, ua, ga in readings:
        va = np.asarray(ua, dtype=float) * np.asarray(ga, dtype=complex)
        for zb, ub, gb in readings:
            vb = np.asarray(ub, dtype=float) * np.asarray(gb, dtype=complex)
            c += correlation(f, za, f, zb) * np.outer(va, np.conj(vb))
    return np.block([[c.real, -c.imag], [c.imag, c.real]])


def data_covariance(f, z, independent: np.ndarray, systematic: np.ndarray | None) -> np.ndarray:
    """Covariance (ohm²) of the residuals ``[R₁…Rₙ, X₁…Xₙ]`` of points ``z`` at ``f``: the
    independent part ``(n, 2)`` on the diagonal plus the systematic part, either a ``(2n, 2n)``
    covariance already or an ``(n, 2)`` standard uncertainty of each point's R and X, correlated
    by :func:`correlation` of the points themselves."""
    n = f.size
    cov = np.diag(np.concatenate([independent[:, 0], independent[:, 1]]) ** 2)
    if systematic is None:
        return cov
    if systematic.shape == (2 * n, 2 * n):
        return cov + systematic
    rho = correlation(f, z, f, z)
    for part in (0, 1):
        s = systematic[:, part]
        block = slice(part * n, (part + 1) * n)
        cov[block, block] += rho * np.outer(s, s)
    return cov


def split_uncertainty(f, zm, refs, accuracy, **settings) -> tuple[np.ndarray, np.ndarray]:
    """The independent standard uncertainty ``(n, 2)`` (ohm, of R and X) of readings ``zm`` at
    ``f`` corrected with ``refs``, and their systematic covariance ``(2n, 2n)`` (ohm²), from the
    meter's ``accuracy`` (a dialect's ``[accuracy]``).

    The independent part is what :func:`acquire.uncertainty.correct_with_uncertainty` gives with
    the accuracy's bound set to zero (the readings' and the standards' repeatability, carried
    through the correction); the systematic part is :func:`propagated_covariance` of the bound's
    standard uncertainty (:func:`acquire.uncertainty.reading_uncertainty`) of the DUT's and each
    standard's reading. ``refs`` None means readings taken without a fixture. ``settings`` are the
    meter's ``level``, ``speed`` and ``averaging``.
    """
    import dataclasses

    from acquire.uncertainty import (
        correct_with_uncertainty,
        reading_uncertainty,
        repeatability,
        sensitivities,
    )

    f = np.asarray(f, dtype=float)
    zm = np.asarray(zm, dtype=complex)
    level = settings.get("level")
    if refs is None:
        a = repeatability(f, zm, accuracy, **settings)
        readings = [(zm, reading_uncertainty(f, zm, accuracy, level), np.ones(f.size))]
        return np.stack([a, a], axis=-1), propagated_covariance(f, readings)
    quiet = dataclasses.replace(accuracy, relative=0.0)
    part_a = correct_with_uncertainty(f, zm, None, refs, quiet, **settings).cov
    independent = np.sqrt(np.clip(np.diagonal(part_a, axis1=1, axis2=2), 0.0, None))
    at = refs.at(f)
    inputs = {"zm": zm, "zo": at.open, "zs": at.short, "zl": at.load}
    zt = None if at.load is None else at.load_true
    g = sensitivities(zm, inputs["zo"], inputs["zs"], inputs["zl"], zt)
    readings = [
        (z, reading_uncertainty(f, z, accuracy, level), g[name])
        for name, z in inputs.items()
        if z is not None
    ]
    return independent, propagated_covariance(f, readings)
