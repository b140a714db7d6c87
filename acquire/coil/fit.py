"""Fit the coil's equivalent circuit (see :mod:`acquire.coil.circuit`) to a measured sweep.

:func:`fit_sweep` takes frequencies (hertz), complex impedances (ohm), already corrected for
the fixture, and optionally each point's standard uncertainty of R and X (ohm). It returns a
:class:`CoilFit`: L (at low frequency, including the wire's internal inductance), Rdc, the
resistance law's parameters, Cp, the core's loss tangent when one is needed, the self-resonant
frequency, the maximum Q and where it occurs, each with its standard uncertainty (1σ).

How it fits (:mod:`acquire.coil.fitsolve`): weighted least squares on R and X, each point
weighted by its uncertainty, for every candidate circuit (four resistance laws, with and without
a core loss tangent; without Cp too when the sweep has no resonance). Start values come from the
data (:mod:`acquire.coil.fitstart`).

Where the uncertainties come from:

- **The noise.** Given ``sigma``, the points are weighted by it and the covariance is
  ``(JᵀWJ)⁻¹``. Without it the noise is taken as one fraction of ``|Z|`` at every point (a
  meter's error is mostly proportional to the reading), and that fraction is estimated from the
  scatter about the best candidate, ``s² = χ²/ν``.
- **A model that does not describe the data.** Where ``χ²/ν`` of a candidate exceeds 1 with
  ``sigma`` given, its covariance is multiplied by ``χ²/ν`` (the Birge ratio squared: R. T.
  Birge, Phys. Rev. 40, 207 (1932)) and the result says so.
- **The choice of model.** The candidates are weighted by their Akaike weights
  ``w ∝ exp(−Δ/2)`` of the quasi-likelihood criterion ``QAIC = χ²/ĉ + 2k``, with ``ĉ`` the
  smallest ``χ²/ν`` of the candidates (at least 1 when ``sigma`` is given), and each quantity
  is their weighted mean with the unconditional standard uncertainty
  ``Σ wᵢ·√(σᵢ² + (xᵢ − x̄)²)`` (K. P. Burnham, D. R. Anderson, *Model Selection and Multimodel
  Inference*, 2nd ed., Springer 2002, sections 4.3 and 6.2). Parameters of one law only (the
  corner, exponent, proximity factor, loss tangent) come from the best candidate.
- **The self-resonance** is each candidate's phase zero, its uncertainty propagated from the
  candidate's covariance through the numerical gradient, then averaged like the rest.
- **The references' noise.** The corrected points share the references only at the same
  frequency: each standard is read at every frequency of the sweep, so its noise makes errors
  that are independent from point to point and belong in each point's ``sigma`` (propagated
  through the correction, as the tool's per-point uncertainty does). Where a sweep's grid is
  interpolated between reference points, neighbouring points share a reference reading; that
  correlation is neglected (it is at most that of two neighbours). The load standard's own
  calibration error is common to all points and scales the impedance: it is not in ``sigma``
  and must be added to L, Rdc and Cp as a relative uncertainty by the caller.

What it refuses: Cp and the self-resonance are reported only when the resonance (the phase
crossing zero at the peak of |Z|) lies inside the sweep. Without it a capacitance term still
absorbs the approach to resonance so that L is not biased, but its value is an extrapolation and
is reported as not determined. A parameter whose relative uncertainty is too large is reported as
not determined with the reason.
"""

from __future__ import annotations

import math
from itertools import product

import numpy as np
from numpy.typing import ArrayLike
from scipy.optimize import brentq, minimize_scalar

from acquire.coil.circuit import SKIN_EXPONENT, impedance_from_parameters, low_frequency_inductance
from acquire.coil.fitcov import data_covariance
from acquire.coil.fitresult import CoilFit, FittedValue
from acquire.coil.fitsolve import LAWS, LINEAR, Candidate, Solution, propagate, solve, unpack
from acquire.coil.fitstart import StartValues, clean_sweep, start_values
from acquire.errors import ModelError
from acquire.units import format_si

_LIMITS = {"L": 0.2, "Rdc": 0.25, "Cp": 0.2, "fc": 0.5, "n": 0.5, "fw": 0.5, "kp": 0.5}
_LIMITS["tand"] = 0.5
_GRID = 4000
_MIN_WEIGHT = 1e-4
#: The laws tried when none is named: the round wire (with its internal inductance), and the
#: power law for windings it does not describe (stranded wire, many layers).
AUTO_LAWS = ("constant", "wire")


def _phase_zero(names, theta, f_lo: float, f_hi: float, near: float | None) -> float | None:
    """The lowest phase zero (inductive to capacitive) of a candidate in the sweep's band,
    searched first within a factor 1.5 of ``near`` (the data's own resonance)."""
    p = unpack(names, theta)
    grids = [np.geomspace(f_lo, f_hi, _GRID)]
    if near is not None:
        grids.insert(0, np.geomspace(max(near / 1.5, f_lo), min(near * 1.5, f_hi), 60))
    for grid in grids:
        x = impedance_from_parameters(grid, p).imag
        change = np.flatnonzero((x[:-1] > 0) & (x[1:] <= 0))
        if change.size:
            i = int(change[0])
            return float(
                brentq(
                    lambda v: impedance_from_parameters(np.array([v]), p).imag[0],
                    grid[i],
                    grid[i + 1],
                    xtol=1e-13 * grid[i],
                )
            )
    return None


def _q_peak(names, theta, f_lo: float, f_hi: float) -> tuple[float, float, bool]:
    """The largest Q = X/R of a candidate in the band, its frequency, and whether at an edge."""
    p = unpack(names, theta)

    def q_of(freq):
        z = impedance_from_parameters(np.atleast_1d(freq), p)
        return np.where(z.imag > 0, z.imag / np.maximum(z.real, 1e-300), -np.inf)

    grid = np.geomspace(f_lo, f_hi, 400)
    q = q_of(grid)
    i = int(np.argmax(q))
    if i in (0, grid.size - 1):
        return float(q[i]), float(grid[i]), True
    best = minimize_scalar(
        lambda u: -float(q_of(math.exp(u))[0]),
        bounds=(math.log(grid[i - 1]), math.log(grid[i + 1])),
        method="bounded",
        options={"xatol": 1e-9},
    )
    return float(-best.fun), float(math.exp(best.x)), False


def fit_sweep(
    frequency: ArrayLike,
    impedance: ArrayLike,
    *,
    sigma: ArrayLike | None = None,
    systematic: ArrayLike | None = None,
    core_loss: bool | None = None,
    resistance_law: str | None = None,
) -> CoilFit:
    """Fit the coil model to a sweep (hertz, complex ohm).

    ``sigma``: each point's standard uncertainty (ohm) of R and X, shape ``(n,)`` (the same for
    both) or ``(n, 2)``; None estimates a noise proportional to ``|Z|`` from the data (see the
    module docstring). ``systematic``: the part of each point's uncertainty that comes from the
    meter's stated accuracy (same shapes, correlated between points as
    :mod:`acquire.coil.fitcov` says, or their ``(2n, 2n)`` covariance for ``[R₁…Rₙ, X₁…Xₙ]``);
    ``sigma`` is then the independent part only. Without ``systematic``, ``sigma`` is taken as
    the total of an unknown split, and the fit counts all of it both ways (independent and
    correlated); ``systematic=0`` says the errors are all independent. ``core_loss``: True
    forces the core loss tangent in, False leaves it out,
    None lets the data decide. ``resistance_law``: one of :data:`LAWS` or None (decided by the
    data). Raises :class:`ModelError` when the sweep cannot support a coil model at all.
    """
    if resistance_law is not None and resistance_law not in LAWS:
        raise ModelError(f"resistance law must be one of {', '.join(LAWS)}")
    if systematic is not None and sigma is None:
        raise ModelError("a systematic uncertainty needs the independent one too: give sigma")
    f, z, weights, bias, dropped = clean_sweep(frequency, impedance, sigma, systematic)
    known = weights is not None
    data_cov = None
    split = "estimated"
    if not known:
        weights = np.repeat(np.abs(z)[:, None], 2, axis=1)
    elif bias is None:
        split = "total"
        data_cov = data_covariance(f, z, weights, weights)
    elif np.any(bias > 0):
        split = "split"
        data_cov = data_covariance(f, z, weights, bias)
        weights = np.sqrt(np.diagonal(data_cov).reshape(2, -1).T)
    else:
        split = "independent"
    s = start_values(f, z)
    laws = (resistance_law,) if resistance_law else AUTO_LAWS
    cores = (core_loss,) if core_loss is not None else (False, True)
    caps = (True,) if s.resonance is not None else (True, False)
    solutions = [
        sol
        for law, cap, core in product(laws, caps, cores)
        if (sol := solve(Candidate(law, cap, core), s, f, z, weights, data_cov)) is not None
    ]
    if not solutions:
        raise ModelError("the sweep has too few points for the model: sweep more frequencies")
    return _report(solutions, known, s, f, z, dropped, split)


def _weights(solutions: list[Solution], known: bool) -> tuple[np.ndarray, float]:
    """Akaike weights of the quasi-likelihood criterion, and the overdispersion ĉ used."""
    c_hat = min(sol.reduced_chi2 for sol in solutions)
    if known:
        c_hat = max(c_hat, 1.0)
    score = np.array([sol.chi2 / c_hat + 2 * len(sol.names) for sol in solutions])
    w = np.exp(-(score - score.min()) / 2.0)
    return w / w.sum(), c_hat


def _scaled_cov(sol: Solution, known: bool) -> np.ndarray:
    """The covariance with the Birge ratio (χ²/ν, at least 1 when the noise was given)."""
    factor = max(sol.reduced_chi2, 1.0) if known else sol.reduced_chi2
    return sol.unscaled_cov * factor


class _Averager:
    """Model-averaged quantities over the candidates of non-negligible weight."""

    def __init__(self, solutions, weights, known):
        keep = [i for i, w in enumerate(weights) if w >= _MIN_WEIGHT]
        self.items = [(solutions[i], weights[i], _scaled_cov(solutions[i], known)) for i in keep]

    def __call__(self, func) -> tuple[float, float] | None:
        """Weighted mean and unconditional uncertainty of ``func(solution, theta)``."""
        rows = []
        for sol, w, cov in self.items:
            value = func(sol, sol.theta)
            if value is None:
                continue
            sig = propagate(lambda t, sol=sol: func(sol, t), sol.theta, cov)
            if sig is None:
                continue
            rows.append((w, value, sig))
        if not rows:
            return None
        w = np.array([r[0] for r in rows])
        w = w / w.sum()
        v = np.array([r[1] for r in rows])
        sg = np.array([r[2] for r in rows])
        mean = float(w @ v)
        return mean, float(w @ np.sqrt(sg**2 + (v - mean) ** 2))


def _param(key):
    def func(sol: Solution, theta):
        if key not in sol.names:
            return None
        return unpack(sol.names, theta)[key]

    return func


_SPLIT_NOTES = {
    "total": "the uncertainty given was not split into noise and the meter's systematic error: "
    "all of it is counted as independent noise and again as a systematic error correlated "
    "across the sweep (the safe side)",
    "split": "the meter's systematic error is counted as correlated across the sweep "
    "(correlation falling to 1/e over 0.35 decade of frequency or of |Z|)",
    "independent": "every point's error is taken as independent of the others",
}


def _report(solutions, known, s: StartValues, f, z, dropped: int, split: str) -> CoilFit:
    weights, c_hat = _weights(solutions, known)
    best = solutions[int(np.argmax(weights))]
    names, theta = best.names, best.theta
    cov = _scaled_cov(best, known)
    p = unpack(names, theta)
    sigma_log = np.sqrt(np.clip(np.diag(cov), 0.0, None))
    average = _Averager(solutions, weights, known)
    f_lo, f_hi = float(f[0]), float(f[-1])
    band = f"{format_si(f_lo, 'Hz')} and {format_si(f_hi, 'Hz')}"
    notes: list[str] = []
    if dropped:
        notes.append(f"{dropped} overrange, invalid or flagged point(s) left out of the fit")
    if not known:
        notes.append(
            "no per-point uncertainty given: the noise is taken as a constant fraction of |Z|, "
            f"estimated from the scatter about the fit ({math.sqrt(best.reduced_chi2):.2g} of "
            "|Z|); the meter's calibration error is not included"
        )
    else:
        notes.append(_SPLIT_NOTES[split])
    if known and best.reduced_chi2 > 1.0 + 3.0 * math.sqrt(2.0 / best.dof):
        notes.append(
            f"the circuit does not describe the sweep within its uncertainty (χ²/E[χ²] = "
            f"{best.reduced_chi2:.3g}): uncertainties are scaled by √(χ²/ν) = "
            f"{math.sqrt(best.reduced_chi2):.3g} (Birge ratio)"
        )
    competing = [
        f"{sol.candidate.label} {w:.0%}" for sol, w in zip(solutions, weights, strict=True)
    ]
    competing = [c for c, w in zip(competing, weights, strict=True) if w >= 0.01]
    if len(competing) > 1:
        notes.append("values averaged over the circuits by weight: " + ", ".join(competing))

    def checked(key, label, unit, value, sig, note=""):
        rel = sig / abs(value) if value else math.inf
        if rel > _LIMITS[key]:
            return FittedValue(
                key, label, None, None, unit, f"not determined: ±{rel:.0%} from this sweep"
            )
        return FittedValue(key, label, value, float(sig), unit, note)

    def from_best(key, label, unit, note=""):
        i = names.index(key)
        if best.at_limit[i]:
            return FittedValue(
                key, label, None, None, unit, "not determined: the fit ran to the edge of its range"
            )
        sig = sigma_log[i] if key in LINEAR else p[key] * sigma_log[i]
        return checked(key, label, unit, p[key], sig, note)

    def averaged(key, label, unit, func, note=""):
        result = average(func)
        if result is None:
            return FittedValue(key, label, None, None, unit, "not determined")
        return checked(key, label, unit, result[0], result[1], note)

    values = [
        averaged(
            "L",
            "inductance",
            "H",
            lambda sol, t: low_frequency_inductance(unpack(sol.names, t)),
            "at low frequency",
        )
    ]
    rdc = averaged("Rdc", "DC resistance", "Ω", _param("Rdc"))
    if not rdc.determined:
        rdc = FittedValue(
            "Rdc", "DC resistance", None, None, "Ω",
            rdc.note + "; the reactance swamps it: sweep lower frequencies",
        )  # fmt: skip
    values.append(rdc)
    law = best.candidate.law
    if law == "constant":
        flat = "not determined: the resistance does not rise within the sweep"
        values += [
            FittedValue("fc", "resistance-law corner", None, None, "Hz", flat),
            FittedValue("n", "resistance-law exponent", None, None, "", flat),
        ]
    elif law == "wire":
        values.append(from_best("fw", "skin depth = wire radius at", "Hz"))
        values.append(from_best("kp", "proximity factor", ""))
    else:
        values.append(from_best("fc", "resistance-law corner", "Hz"))
        if law == "power":
            values.append(from_best("n", "resistance-law exponent", ""))
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
        cp = averaged("Cp", "parallel capacitance", "F", _param("Cp"))
    else:
        cp = FittedValue(
            "Cp", "parallel capacitance", None, None, "F",
            f"not determined: no self-resonance between {band}",
        )  # fmt: skip
    values.append(cp)
    if best.candidate.core_loss:
        values.append(from_best("tand", "core loss tangent", ""))
    srf = None
    if cp.determined:
        srf = average(lambda sol, t: _phase_zero(sol.names, t, f_lo, f_hi, s.resonance))
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
                lower_bound=f_hi if s.resonance is None else None,
            )  # fmt: skip
        )
    else:
        values.append(
            FittedValue(
                "SRF", "self-resonant frequency", srf[0], srf[1], "Hz", "phase zero of the fit"
            )
        )
    q, fq, edge = _q_peak(names, theta, f_lo, f_hi)
    q_note = "of the fitted circuit" + (
        "; at the edge of the sweep: the true peak may lie outside it" if edge else ""
    )
    q_avg = average(lambda sol, t: _q_peak(sol.names, t, f_lo, f_hi)[0])
    q_value, q_sig = q_avg if q_avg is not None else (q, None)
    values.append(FittedValue("Qmax", "maximum Q", q_value, q_sig, "", q_note))
    values.append(FittedValue("fQmax", "frequency of maximum Q", fq, None, "Hz", q_note))
    model = impedance_from_parameters(f, p)
    residual = float(np.sqrt(np.mean(np.abs((model - z) / np.abs(z)) ** 2)))
    if s.resonance is None and best.candidate.capacitance:
        notes.append(
            "a capacitance term absorbs the approach to resonance so that L is not biased; "
            "without a resonance in the sweep its value is not reported"
        )
    return CoilFit(
        (f_lo, f_hi),
        int(f.size),
        dropped,
        law,
        best.candidate.core_loss,
        tuple(values),
        residual,
        tuple(p.items()),
        s,
        tuple(notes),
        noise_given=known,
        reduced_chi2=best.reduced_chi2,
        model_weights=tuple(
            (sol.candidate.label, float(w)) for sol, w in zip(solutions, weights, strict=True)
        ),
    )
