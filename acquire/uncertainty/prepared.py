"""A reference set and a meter's stated accuracy made ready for many batches of readings.

:class:`PreparedCorrection` does what :func:`acquire.uncertainty.correct_with_uncertainty`
does for a :class:`acquire.compensation.ReferenceSet`, with everything that depends only on the
frozen set and the meter's settings worked out once: the set's carried forms
(:attr:`~acquire.compensation.ReferenceSet.grid_forms`), its standards' Type A on the grid, the
accuracy's constants (level ratio, speed factor, averaging) checked once. A sweep corrects its
points chunk by chunk as they arrive, so each chunk only places its frequencies, carries the
standards to them and propagates.

Every reading here (the DUT's without repeats and each standard's) has independent real and
imaginary parts of equal variance (one number per point), so each input adds ``|g|²·σ²`` to
both variances of the result (:func:`acquire.uncertainty.propagation.sandwich`); a DUT
uncertainty per part or as a covariance is carried in full.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

from acquire.compensation.interpolation import uncertainty_at
from acquire.errors import InputError
from acquire.uncertainty.accuracy import reading_uncertainty, repeatability
from acquire.uncertainty.propagation import as_covariance, assemble_quiet, derivatives

STANDARD_NAMES = ("open", "short", "load")
_ROOT3 = math.sqrt(3.0)


class ReadingNoise:
    """The stated accuracy of one meter at fixed settings: the variance of a reading's R and X.

    The settings are checked once, at construction, with the messages of
    :mod:`acquire.uncertainty.accuracy`; :meth:`variance` then evaluates its formulas (the same
    operations in the same order) for any frequencies and readings.
    """

    def __init__(self, accuracy: Any, level=None, speed=None, averaging=1) -> None:
        one = np.ones(1)
        reading_uncertainty(one, one, accuracy, level, speed, averaging)
        repeatability(one, one, accuracy, level, speed, averaging)
        n = int(averaging)
        ratio = 1.0 if level is None else accuracy.reference_level / float(level)
        factors = getattr(accuracy, "speed_factors", None) or {}
        factor = factors[speed] if factors and speed is not None else 1.0
        self._accuracy = accuracy
        self._ratio = ratio
        self._root_ratio = math.sqrt(ratio)
        self._scale = factor / math.sqrt(n)

    def k_f(self, f: np.ndarray) -> np.ndarray:
        """The frequency factor ``1 + f/frequency_corner``, shared by all readings at ``f``."""
        return 1.0 + f / self._accuracy.frequency_corner

    def variance(self, k_f, z: np.ndarray, u_a, repeats: int = 1) -> np.ndarray:
        """Per point, the variance (ohm²) of R and of X each: Type A ``u_a`` (one per point) or
        the stated repeatability of the mean of ``repeats`` readings, plus Type B."""
        with np.errstate(invalid="ignore", over="ignore"):
            return self._variance(k_f, z, u_a, repeats)

    def _variance(self, k_f, z: np.ndarray, u_a, repeats: int = 1) -> np.ndarray:
        """:meth:`variance`, inside the caller's ``np.errstate``."""
        acc, r = self._accuracy, self._ratio
        m = np.abs(z)
        floors = acc.low_impedance + m**2 / acc.high_impedance
        # x·1.0 and x/1.0 are x exactly: at the reference level, with one reading and no speed
        # factor those steps are left out
        r_floors = floors if r == 1.0 else r * floors
        b = acc.relative * k_f * (m + r_floors) / _ROOT3
        if u_a is None:
            spread = (m if self._root_ratio == 1.0 else self._root_ratio * m) + r_floors
            a = acc.repeatability * k_f
            if self._scale != 1.0:
                a = a * self._scale
            a = a * spread
            if repeats != 1:
                a = a / math.sqrt(repeats)
        else:
            a = u_a
        out = a**2 + b**2
        finite = np.isfinite(m)
        if not finite.all():
            out[~finite] = np.nan
        return out


class PreparedCorrection:
    """A :class:`~acquire.compensation.ReferenceSet` and stated accuracy ready for many batches.

    ``accuracy`` is None to count only Type A; ``level``, ``speed`` and ``averaging`` are the
    meter's settings; ``load_true_u`` the standard uncertainty of the load's true value.
    :meth:`correct` gives what ``correct_with_uncertainty`` gives for the same inputs.
    """

    def __init__(
        self, refs: Any, accuracy=None, level=None, speed=None, averaging=1, load_true_u=None
    ) -> None:
        forms = refs.grid_forms
        if forms.zo is None and forms.zs is None and forms.zl is None:
            raise InputError("no standard given: the correction needs an open, a short or a load")
        if forms.zl is not None and forms.zt is None:
            raise InputError("a load reading needs the load's true impedance (zt)")
        self.refs = refs
        self._forms = forms
        self._u = {name: getattr(refs, f"{name}_u") for name in STANDARD_NAMES}
        self._repeats = max(1, int(getattr(refs, "repeats", 1) or 1))
        self._noise = None if accuracy is None else ReadingNoise(accuracy, level, speed, averaging)
        self._load_true_u = load_true_u
        self._open_short = forms.zo is not None and forms.zs is not None and forms.zl is None
        held = [
            name
            for name, z in zip(STANDARD_NAMES, (forms.zo, forms.zs, forms.zl), strict=True)
            if z is not None
        ]
        self._held = tuple(held)
        # the held standards' Type A side by side (grid point, standard), carried in one step
        self._u_side: np.ndarray | None = None
        if held and all(self._u[name] is not None for name in held):
            self._u_side = np.stack([np.asarray(self._u[name], dtype=float) for name in held], 1)

    def correct(self, f: np.ndarray, zm: np.ndarray, u_m=None) -> tuple[np.ndarray, np.ndarray]:
        """``(zx, cov)`` for readings ``zm`` at 1-D frequencies ``f`` (float, complex, one shape).

        ``u_m`` is the DUT's Type A in any form :func:`acquire.uncertainty.as_covariance` takes.
        The chunk's work runs inside one ``np.errstate`` (no warning is raised).
        """
        with np.errstate(all="ignore"):
            return self.batch(f, zm, u_m)

    def batch(self, f: np.ndarray, zm: np.ndarray, u_m) -> tuple[np.ndarray, np.ndarray]:
        """:meth:`correct` inside the caller's ``np.errstate``, which ignores every error (a
        sweep's chunk enters one for all its steps)."""
        forms = self._forms
        at = forms.place(f)
        zo, zs, zl, zt = forms.standards(at)
        noise = self._noise
        k_f = None if noise is None else noise.k_f(f)
        v_std: dict[str, Any] = {}
        if self._u_side is not None and noise is not None and k_f is not None:
            # every held standard with its Type A: one variance for all of them side by side
            # (the same operations, point by point, as one standard at a time)
            z_at = {"open": zo, "short": zs, "load": zl}
            side = np.empty((zm.shape[0], len(self._held)), dtype=complex)
            for i, name in enumerate(self._held):
                side[:, i] = z_at[name]
            v = noise._variance(k_f[:, None], side, self._carried_u(at), self._repeats)
            v_std = {name: v[:, i] for i, name in enumerate(self._held)}
        else:
            for name, z in (("open", zo), ("short", zs), ("load", zl)):
                if z is None:
                    continue
                u = uncertainty_at(forms.grid, self._u[name], at)
                if noise is not None:
                    v_std[name] = noise._variance(k_f, z, u, self._repeats)
                elif u is not None:
                    v_std[name] = u**2
        with_zt = self._load_true_u is not None
        k, ratio, grads = derivatives(zm, zo, zs, zl, zt, with_zt)
        zx = k * ratio
        inputs = {"zm": self._dut(k_f, zm, u_m), "zo": v_std.get("open")}
        inputs.update(zs=v_std.get("short"), zl=v_std.get("load"))
        if self._load_true_u is not None:
            inputs["zt"] = _parts(as_covariance(self._load_true_u, zm.shape))
        terms = [(g, inputs[name]) for name, g in grads.items() if _any(inputs.get(name))]
        cov = assemble_quiet(zx, terms)
        if self._open_short:
            t = np.abs(zs / zo)
            model = (t * (2.0 + t) * np.abs(zx) / _ROOT3) ** 2
            cov[..., 0, 0] += model
            cov[..., 1, 1] += model
        return zx, cov

    def _carried_u(self, at) -> np.ndarray:
        """The held standards' Type A at the placed frequencies, (point, standard): what
        :func:`~acquire.compensation.interpolation.uncertainty_at` gives for each."""
        u = self._u_side
        assert u is not None
        a = u[at.index]
        if at.on_grid:
            return a
        upper = at.upper
        if upper is None:
            upper = np.minimum(at.index + 1, u.shape[0] - 1)
        a = a + at.weight[:, None] * (u[upper] - a)
        exact = at.exact_at
        if exact is not None:
            a[exact[0]] = u[exact[1]]
        return a

    def _dut(self, k_f, zm, u_m):
        """The DUT reading's variance (one per point) or covariance components."""
        shape = zm.shape
        if u_m is not None:
            u = np.asarray(u_m, dtype=float)
            if u.shape != shape:
                v = as_covariance(u, shape)
                if self._noise is not None:
                    b = self._noise._variance(k_f, zm, np.zeros(shape))
                    v[..., 0, 0] += b
                    v[..., 1, 1] += b
                return _parts(v)
            u_m = np.broadcast_to(u, shape)
        if self._noise is not None:
            return self._noise._variance(k_f, zm, u_m)
        return None if u_m is None else u_m**2


def _parts(v: np.ndarray) -> tuple[np.ndarray, ...]:
    return v[..., 0, 0], v[..., 0, 1], v[..., 1, 0], v[..., 1, 1]


def _any(v) -> bool:
    if v is None:
        return False
    if isinstance(v, tuple):
        return any(np.asarray(part).any() for part in v)
    return bool(np.asarray(v).any())
