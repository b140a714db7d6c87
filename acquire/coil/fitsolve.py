"""One candidate circuit fitted to a sweep by weighted least squares, with its covariance.

Each candidate is a choice of resistance law (constant, ``skin`` with ``n = 1/2``, ``power``
with a free exponent, or the exact round ``wire`` with a proximity factor), with or without the
parallel capacitance and a core loss tangent (:mod:`acquire.coil.circuit`).

The residuals are the real and imaginary parts of ``Z_model − Z`` divided by each point's
standard uncertainty (of R and of X), so that ``χ² = Σ residual²`` follows a χ² distribution
with ``ν = 2n − k`` degrees of freedom when the model is right and the uncertainties are
(W. H. Press et al., *Numerical Recipes*, 3rd ed., 2007, section 15.1). Positive parameters are
fitted as logarithms so henry, ohm and farad are equally well scaled. The covariance of the
parameters is ``(JᵀWJ)⁻¹`` from the Jacobian of the weighted residuals at the solution
(Numerical Recipes, section 15.4); a parameter held at a bound counts as fixed.

Where the points' errors are correlated (the meter's systematic error, :mod:`acquire.coil.fitcov`)
the estimate is still the weighted least-squares one, a function of the data whose sensitivity
to them is ``G = (JᵀWJ)⁻¹JᵀW``; its covariance is then ``G·V·Gᵀ`` with ``V`` the data's full
covariance (the law of propagation of uncertainty for correlated inputs, JCGM 100:2008 5.2.2, in
matrix form, JCGM 102:2011 6.2.1.3). With ``V = W⁻¹`` this is ``(JᵀWJ)⁻¹`` again. The χ²
expected when the model is right is then ``tr((I − H)·W^½VW^½)`` with ``H`` the hat matrix
``J·G`` (``2n − k`` for ``V = W⁻¹``), and ``χ²`` over it is the Birge ratio squared.
"""

from __future__ import annotations

import math
from dataclasses import dataclass

import numpy as np
from scipy.optimize import least_squares

from acquire.coil.circuit import SKIN_EXPONENT, impedance_from_parameters
from acquire.coil.fitstart import StartValues

LAWS = ("constant", "skin", "power", "wire")
LINEAR = {"n"}


@dataclass(frozen=True)
class Candidate:
    """One circuit the fit tries."""

    law: str
    capacitance: bool
    core_loss: bool

    @property
    def names(self) -> tuple[str, ...]:
        """Its parameters, in the fit's order."""
        names = ["L", "Rdc"]
        if self.capacitance:
            names.append("Cp")
        names += {"constant": [], "skin": ["fc"], "power": ["fc", "n"], "wire": ["fw", "kp"]}[
            self.law
        ]
        if self.core_loss:
            names.append("tand")
        return tuple(names)

    @property
    def label(self) -> str:
        """A short description, e.g. ``wire law + Cp + core loss``."""
        parts = [f"{self.law} law"]
        if self.capacitance:
            parts.append("Cp")
        if self.core_loss:
            parts.append("core loss")
        return " + ".join(parts)


@dataclass(frozen=True)
class Solution:
    """A fitted candidate: its parameters (log scale except ``n``), the unscaled covariance
    (the data's covariance carried through the fit, ``G·V·Gᵀ``) of those, χ², the degrees of
    freedom and the χ² expected when the model and the covariance are right."""

    candidate: Candidate
    theta: np.ndarray
    unscaled_cov: np.ndarray
    chi2: float
    dof: int
    at_limit: np.ndarray
    expected_chi2: float = math.nan

    @property
    def names(self) -> tuple[str, ...]:
        return self.candidate.names

    @property
    def reduced_chi2(self) -> float:
        """χ² over its expected value (χ²/ν for independent errors)."""
        expected = self.expected_chi2 if self.expected_chi2 > 0 else self.dof
        return self.chi2 / expected


def unpack(names: tuple[str, ...], theta: np.ndarray) -> dict[str, float]:
    """Parameters in SI units from the fit's vector (logarithms except ``n``)."""
    return {n: float(t if n in LINEAR else math.exp(t)) for n, t in zip(names, theta, strict=True)}


def _residuals(theta, names, f, z, sigma) -> np.ndarray:
    err = impedance_from_parameters(f, unpack(names, theta)) - z
    return np.concatenate([err.real / sigma[:, 0], err.imag / sigma[:, 1]])


def _initial(names: tuple[str, ...], s: StartValues, f: np.ndarray):
    cp = s.capacitance or 1.0 / ((2.0 * math.pi * 3.0 * f[-1]) ** 2 * s.inductance)
    guess = {
        "L": (s.inductance, s.inductance / 100, s.inductance * 100),
        "Rdc": (s.rdc, s.rdc / 1e3, s.rdc * 1e3),
        "Cp": (cp, 1e-18, 1e-3),
        "fc": (s.corner, f[0] / 100, f[-1] * 100),
        "n": (SKIN_EXPONENT, 0.05, 3.0),
        "fw": (s.corner / 10, f[0] / 1e4, f[-1] * 100),
        "kp": (1.0, 1e-2, 1e2),
        "tand": (1e-3, 1e-7, 1.0),
    }
    x0, lo, hi = [], [], []
    for n in names:
        start, low, high = guess[n]
        start = min(max(start, low * 1.001), high / 1.001)
        if n not in LINEAR:
            start, low, high = math.log(start), math.log(low), math.log(high)
        x0.append(start)
        lo.append(low)
        hi.append(high)
    return np.array(x0), (np.array(lo), np.array(hi))


def solve(
    candidate: Candidate,
    s: StartValues,
    f: np.ndarray,
    z: np.ndarray,
    sigma: np.ndarray,
    data_cov: np.ndarray | None = None,
) -> Solution | None:
    """Fit ``candidate`` to the points weighted by ``sigma`` ((n, 2), ohm); None when the sweep
    has too few points for it. ``data_cov`` is the covariance (ohm²) of the residuals
    ``[R₁…Rₙ, X₁…Xₙ]`` when it is not ``diag(sigma²)`` (correlated errors)."""
    names = candidate.names
    m = 2 * f.size
    if m <= len(names) + 1:
        return None
    x0, bounds = _initial(names, s, f)
    result = least_squares(
        _residuals, x0, bounds=bounds, args=(names, f, z, sigma), x_scale="jac", method="trf"
    )
    at_limit = result.active_mask != 0
    free = ~at_limit
    cov = np.zeros((x0.size, x0.size))
    jac = result.jac[:, free]
    inverse = np.linalg.pinv(jac.T @ jac)
    dof = max(m - int(np.count_nonzero(free)), 1)
    expected = float(dof)
    if data_cov is None:
        cov[np.ix_(free, free)] = inverse
    else:
        w = np.concatenate([sigma[:, 0], sigma[:, 1]])
        scaled = data_cov / np.outer(w, w)
        gain = inverse @ jac.T
        cov[np.ix_(free, free)] = gain @ scaled @ gain.T
        residual_maker = np.eye(m) - jac @ gain
        expected = max(float(np.trace(residual_maker @ scaled)), 1e-12)
    chi2 = float(np.sum(result.fun**2))
    return Solution(candidate, result.x, cov, chi2, dof, at_limit, expected)


def propagate(func, theta: np.ndarray, cov: np.ndarray) -> float | None:
    """Standard uncertainty of ``func(theta)`` by its numerical gradient: ``√(gᵀ·cov·g)``."""
    base = func(theta)
    if base is None:
        return None
    grad = np.zeros_like(theta)
    for i in range(theta.size):
        if cov[i, i] == 0.0:
            continue
        step = np.zeros_like(theta)
        step[i] = 1e-6
        up, down = func(theta + step), func(theta - step)
        if up is None or down is None:
            return None
        grad[i] = (up - down) / 2e-6
    return float(math.sqrt(max(grad @ cov @ grad, 0.0)))
