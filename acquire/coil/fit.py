"""Fit the coil's equivalent circuit (see :mod:`acquire.coil.circuit`) to a measured sweep.

:func:`fit_sweep` takes frequencies (hertz) and complex impedances (ohm), already corrected for
the fixture, and returns a :class:`CoilFit`: L, Rdc, the resistance law's corner and exponent,
Cp, the core's loss tangent when one is needed, the self-resonant frequency, the maximum Q and
where it occurs, the fit's residual and every parameter's 1σ uncertainty.

How it fits: :func:`scipy.optimize.least_squares` on the real and imaginary parts of the relative
error ``(Z_model − Z)/|Z|`` (a meter's error is a fraction of ``|Z|``), with the positive
parameters as logarithms so that henry, ohm and farad are equally well scaled. Start values come
from the data (:mod:`acquire.coil.fitstart`). Several nested models are fitted (constant
resistance, skin-effect law with ``n = 1/2``, free exponent; with or without a core loss
tangent) and the one with the lowest Bayesian information criterion is kept. Uncertainties come
from the Jacobian at the solution, scaled by the residual: ``cov = (JᵀJ)⁻¹ · SSR/(m − k)``.

What it refuses: Cp and the self-resonance are reported only when the resonance (the phase
crossing zero at the peak of |Z|) lies inside the sweep. Without it a capacitance term still
absorbs the approach to resonance so that L is not biased, but its value is an extrapolation and
is reported as not determined. A parameter whose relative uncertainty is too large is reported as
not determined with the reason.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from itertools import product

import numpy as np
from numpy.typing import ArrayLike
from scipy.optimize import brentq, least_squares

from acquire.coil.circuit import SKIN_EXPONENT, impedance_from_parameters
from acquire.coil.fitresult import CoilFit, FittedValue
from acquire.coil.fitstart import StartValues, clean_sweep, start_values
from acquire.errors import ModelError
from acquire.units import format_si

LAWS = ("constant", "skin", "power")
_LINEAR = {"n"}
_LIMITS = {"L": 0.2, "Rdc": 0.25, "Cp": 0.2, "fc": 0.5, "n": 0.5, "tand": 0.5}
_GRID = 4000


@dataclass(frozen=True)
class _Candidate:
    law: str
    capacitance: bool
    core_loss: bool

    @property
    def names(self) -> tuple[str, ...]:
        names = ["L", "Rdc"]
        if self.capacitance:
            names.append("Cp")
        if self.law != "constant":
            names.append("fc")
        if self.law == "power":
            names.append("n")
        if self.core_loss:
            names.append("tand")
        return tuple(names)


@dataclass(frozen=True)
class _Solution:
    candidate: _Candidate
    theta: np.ndarray
    jacobian: np.ndarray
    ssr: float
    bic: float
    at_limit: np.ndarray


def _unpack(names: tuple[str, ...], theta: np.ndarray) -> dict[str, float]:
    return {n: float(t if n in _LINEAR else math.exp(t)) for n, t in zip(names, theta, strict=True)}


def _residuals(theta, names, f, z, scale) -> np.ndarray:
    err = (impedance_from_parameters(f, _unpack(names, theta)) - z) / scale
    return np.concatenate([err.real, err.imag])


def _initial(names: tuple[str, ...], s: StartValues, f: np.ndarray, z: np.ndarray):
    cp = s.capacitance or 1.0 / ((2.0 * math.pi * 3.0 * f[-1]) ** 2 * s.inductance)
    guess = {
        "L": (s.inductance, s.inductance / 100, s.inductance * 100),
        "Rdc": (s.rdc, s.rdc / 1e3, s.rdc * 1e3),
        "Cp": (cp, 1e-18, 1e-3),
        "fc": (s.corner, f[0] / 100, f[-1] * 100),
        "n": (SKIN_EXPONENT, 0.05, 3.0),
        "tand": (1e-3, 1e-7, 1.0),
    }
    x0, lo, hi = [], [], []
    for n in names:
        start, low, high = guess[n]
        start = min(max(start, low * 1.001), high / 1.001)
        if n in _LINEAR:
            x0.append(start), lo.append(low), hi.append(high)
        else:
            x0.append(math.log(start)), lo.append(math.log(low)), hi.append(math.log(high))
    return np.array(x0), (np.array(lo), np.array(hi))


def _solve(candidate: _Candidate, s: StartValues, f, z) -> _Solution | None:
    names = candidate.names
    m = 2 * f.size
    if m <= len(names) + 1:
        return None
    x0, bounds = _initial(names, s, f, z)
    scale = np.abs(z)
    result = least_squares(
        _residuals, x0, bounds=bounds, args=(names, f, z, scale), x_scale="jac", method="trf"
    )
    ssr = float(np.sum(result.fun**2))
    bic = m * math.log(max(ssr, 1e-300) / m) + len(names) * math.log(m)
    return _Solution(candidate, result.x, result.jac, ssr, bic, result.active_mask != 0)


def _covariance(sol: _Solution, m: int) -> np.ndarray:
    """Covariance of the parameters; one held at a limit counts as fixed (zero variance)."""
    free = ~sol.at_limit
    dof = max(m - int(np.count_nonzero(free)), 1)
    cov = np.zeros((sol.theta.size, sol.theta.size))
    jac = sol.jacobian[:, free]
    cov[np.ix_(free, free)] = np.linalg.pinv(jac.T @ jac) * (sol.ssr / dof)
    return cov


def _propagate(func, theta: np.ndarray, cov: np.ndarray) -> float | None:
    base = func(theta)
    if base is None:
        return None
    grad = np.zeros_like(theta)
    for i in range(theta.size):
        step = np.zeros_like(theta)
        step[i] = 1e-6
        up, down = func(theta + step), func(theta - step)
        if up is None or down is None:
            return None
        grad[i] = (up - down) / 2e-6
    return float(math.sqrt(max(grad @ cov @ grad, 0.0)))


def _phase_zero(names, theta, f_lo: float, f_hi: float) -> float | None:
    p = _unpack(names, theta)
    grid = np.geomspace(f_lo, f_hi, _GRID)
    x = impedance_from_parameters(grid, p).imag
    change = np.flatnonzero((x[:-1] > 0) & (x[1:] <= 0))
    if change.size == 0:
        return None
    i = int(change[0])
    return float(
        brentq(lambda v: impedance_from_parameters(np.array([v]), p).imag[0], grid[i], grid[i + 1])
    )


def _q_peak(names, theta, f_lo: float, f_hi: float) -> tuple[float, float, bool]:
    grid = np.geomspace(f_lo, f_hi, _GRID)
    z = impedance_from_parameters(grid, _unpack(names, theta))
    q = np.where(z.imag > 0, z.imag / np.maximum(z.real, 1e-300), -np.inf)
    i = int(np.argmax(q))
    return float(q[i]), float(grid[i]), i in (0, grid.size - 1)


def fit_sweep(
    frequency: ArrayLike,
    impedance: ArrayLike,
    *,
    core_loss: bool | None = None,
    resistance_law: str | None = None,
) -> CoilFit:
    """Fit the coil model to a sweep (hertz, complex ohm).

    ``core_loss``: True forces the core loss tangent in, False leaves it out, None
    lets the information criterion decide. ``resistance_law``: ``"constant"``, ``"skin"``,
    ``"power"`` or None (decided by the data). Raises :class:`ModelError` when the sweep cannot
    support a coil model at all.
    """
    if resistance_law is not None and resistance_law not in LAWS:
        raise ModelError(f"resistance law must be one of {', '.join(LAWS)}")
    f, z, dropped = clean_sweep(frequency, impedance)
    s = start_values(f, z)
    laws = (resistance_law,) if resistance_law else LAWS
    cores = (core_loss,) if core_loss is not None else (False, True)
    caps = (True,) if s.resonance is not None else (True, False)
    solutions = [
        sol
        for law, cap, core in product(laws, caps, cores)
        if (sol := _solve(_Candidate(law, cap, core), s, f, z)) is not None
    ]
    if not solutions:
        raise ModelError("the sweep has too few points for the model: sweep more frequencies")
    best = min(solutions, key=lambda sol: sol.bic)
    return _report(best, s, f, z, dropped)


def _report(sol: _Solution, s: StartValues, f, z, dropped: int) -> CoilFit:
    names, theta = sol.candidate.names, sol.theta
    cov = _covariance(sol, 2 * f.size)
    p = _unpack(names, theta)
    sigma_log = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    f_lo, f_hi = float(f[0]), float(f[-1])
    band = f"{format_si(f_lo, 'Hz')} and {format_si(f_hi, 'Hz')}"
    notes: list[str] = []
    if dropped:
        notes.append(f"{dropped} overrange or invalid point(s) left out of the fit")

    def value(key, label, unit, note=""):
        i = names.index(key)
        if sol.at_limit[i]:
            return FittedValue(
                key, label, None, None, unit, "not determined: the fit ran to the edge of its range"
            )
        sig = sigma_log[i] if key in _LINEAR else p[key] * sigma_log[i]
        rel = sig / abs(p[key]) if p[key] else math.inf
        if rel > _LIMITS[key]:
            return FittedValue(
                key, label, None, None, unit, f"not determined: ±{rel:.0%} from this sweep"
            )
        return FittedValue(key, label, p[key], float(sig), unit, note)

    values = [value("L", "inductance", "H")]
    rdc = value("Rdc", "DC resistance", "Ω")
    if not rdc.determined:
        rdc = FittedValue(
            "Rdc", "DC resistance", None, None, "Ω",
            rdc.note + "; the reactance swamps it: sweep lower frequencies",
        )  # fmt: skip
    values.append(rdc)
    law = sol.candidate.law
    if law == "constant":
        flat = "not determined: the resistance does not rise within the sweep"
        values += [
            FittedValue("fc", "resistance-law corner", None, None, "Hz", flat),
            FittedValue("n", "resistance-law exponent", None, None, "", flat),
        ]
    else:
        values.append(value("fc", "resistance-law corner", "Hz"))
        if law == "power":
            values.append(value("n", "resistance-law exponent", ""))
        else:
            values.append(
                FittedValue(
                    "n",
                    "resistance-law exponent",
                    SKIN_EXPONENT,
                    None,
                    "",
                    "held at 1/2 (skin effect): a free exponent did not improve the fit",
                )  # fmt: skip
            )
    if s.resonance is not None:
        cp = value("Cp", "parallel capacitance", "F")
    else:
        cp = FittedValue(
            "Cp", "parallel capacitance", None, None, "F",
            f"not determined: no self-resonance between {band}",
        )  # fmt: skip
    values.append(cp)
    if sol.candidate.core_loss:
        values.append(value("tand", "core loss tangent", ""))
    srf = _phase_zero(names, theta, f_lo, f_hi) if cp.determined else None
    if srf is None:
        values.append(
            FittedValue(
                "SRF",
                "self-resonant frequency",
                None,
                None,
                "Hz",
                f"not in the sweep: above {format_si(f_hi, 'Hz')}"
                if s.resonance is None
                else "not determined",
            )  # fmt: skip
        )
    else:
        sig = _propagate(lambda t: _phase_zero(names, t, f_lo, f_hi), theta, cov)
        values.append(
            FittedValue("SRF", "self-resonant frequency", srf, sig, "Hz", "phase zero of the fit")
        )
    q, fq, edge = _q_peak(names, theta, f_lo, f_hi)
    q_note = "of the fitted circuit" + (
        "; at the edge of the sweep: the true peak may lie outside it" if edge else ""
    )
    q_sig = _propagate(lambda t: _q_peak(names, t, f_lo, f_hi)[0], theta, cov)
    values.append(FittedValue("Qmax", "maximum Q", q, q_sig, "", q_note))
    values.append(FittedValue("fQmax", "frequency of maximum Q", fq, None, "Hz", q_note))
    model = impedance_from_parameters(f, p)
    residual = float(np.sqrt(np.mean(np.abs((model - z) / np.abs(z)) ** 2)))
    if s.resonance is None and sol.candidate.capacitance:
        notes.append(
            "a capacitance term absorbs the approach to resonance so that L is not biased; "
            "without a resonance in the sweep its value is not reported"
        )
    return CoilFit(
        (f_lo, f_hi),
        int(f.size),
        dropped,
        law,
        sol.candidate.core_loss,
        tuple(values),
        residual,
        tuple(p.items()),
        s,
        tuple(notes),
    )
