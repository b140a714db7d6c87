"""Propagating uncertainty through the open/short/load correction by its Jacobian.

Every correction of :mod:`acquire.compensation.formulas` is ``Zx = K·(Zm − Zs)/(Zo − Zm)`` (with
an open) or ``Zx = K·(Zm − Zs)`` (without), ``Zs = 0`` without a short, and ``K`` depends on the
method. The map is holomorphic in each complex input ``w`` (``Zm, Zo, Zs, Zl, Zt``), so its
derivative ``g = ∂Zx/∂w`` is one complex number, and the real Jacobian of ``(Re Zx, Im Zx)``
with respect to ``(Re w, Im w)`` is (Cauchy–Riemann)::

    J = [[Re g, −Im g],
         [Im g,  Re g]]

With independent inputs the covariance of the result is ``Σ J·V_w·Jᵀ`` over the inputs, where
``V_w`` is the 2×2 covariance of ``(Re w, Im w)`` (JCGM 100:2008 5.1.2 in matrix form;
JCGM 102:2011 6.2.1.3). Nothing assumes ``V_w`` to be circular: an input with different
uncertainties of its real and imaginary parts, or correlated parts, is carried as it is.

The derivatives, with ``N = Zm − Zs`` and ``D = Zo − Zm`` (``D = 1`` without an open)::

    ∂Zx/∂Zm = K·(Zo − Zs)/D²      (K without an open)
    ∂Zx/∂Zs = −K/D + (Zx/K)·∂K/∂Zs
    ∂Zx/∂Zo = −K·N/D² + (Zx/K)·∂K/∂Zo
    ∂Zx/∂Zl = (N/D)·∂K/∂Zl,   ∂Zx/∂Zt = (N/D)·∂K/∂Zt

and ``∂K`` from the table of ``K`` per method (see :func:`sensitivities`). Like any first-order
propagation this is exact only for a linear model; it is good where the map is nearly linear
over the spread of the inputs, and poor where a reading comes close to the open (``D → 0``),
where a Monte Carlo propagation (JCGM 101:2008) is the reference.
"""

from __future__ import annotations

import numpy as np

from acquire.compensation import formulas
from acquire.errors import InputError

NAMES = ("zm", "zo", "zs", "zl", "zt")

#: The coverage factor of every expanded uncertainty here (about 95 % for a normal distribution).
COVERAGE_FACTOR = 2.0


def as_covariance(u, shape: tuple[int, ...]) -> np.ndarray:
    """The ``shape + (2, 2)`` covariance (ohm²) of the real and imaginary parts from ``u``.

    ``u`` is None (no uncertainty), a standard uncertainty the same for both parts (a number or
    an array of ``shape``), one per part (``shape + (2,)``, [u_R, u_X]) or a covariance already
    (``shape + (2, 2)``).
    """
    out = np.zeros(shape + (2, 2))
    if u is None:
        return out
    u = np.asarray(u, dtype=float)
    if u.shape == shape + (2, 2):
        return np.broadcast_to(u, out.shape).copy()
    if u.shape == shape + (2,):
        out[..., 0, 0] = u[..., 0] ** 2
        out[..., 1, 1] = u[..., 1] ** 2
        return out
    try:
        u = np.broadcast_to(u, shape)
    except ValueError:
        raise InputError(
            f"an uncertainty of shape {u.shape} does not fit {shape} points; give one per point, "
            "one per point and part (n, 2), or a covariance (n, 2, 2)"
        ) from None
    out[..., 0, 0] = out[..., 1, 1] = u**2
    return out


def _k_and_partials(zo, zs, zl, zt, with_zt=True) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    """``K`` of the method the standards given imply, and its derivatives (that by ``zt`` left
    out unless ``with_zt``)."""
    zs0 = 0.0 if zs is None else zs
    if zl is not None:
        span = zl - zs0
        if zo is not None:  # open-short-load (or open-load with zs0 = 0)
            k = zt * (zo - zl) / span
            dk = {
                "zo": zt / span,
                "zl": -zt * (zo - zs0) / span**2,
                "zs": zt * (zo - zl) / span**2,
            }
            if with_zt:
                dk["zt"] = (zo - zl) / span
        else:  # short-load, load
            k = zt / span
            dk = {"zl": -zt / span**2, "zs": zt / span**2}
            if with_zt:
                dk["zt"] = 1.0 / span
    elif zo is not None:  # open-short, open
        one = np.ones_like(zo)
        k = zo - zs0
        dk = {"zo": one, "zs": -one}
    else:  # short
        k = np.ones_like(zs)
        dk = {}
    return k, dk


def sensitivities(zm, zo=None, zs=None, zl=None, zt=None) -> dict[str, np.ndarray]:
    """``∂Zx/∂w`` (complex) for each input ``w`` given: keys ``zm``, ``zo``, ``zs``, ``zl``, ``zt``.

    The method follows from the standards given, as in
    :func:`acquire.compensation.formulas.correction`.
    """
    zm = np.asarray(zm, dtype=complex)
    shape = zm.shape
    std = [None if a is None else _complex_of_shape(a, shape) for a in (zo, zs, zl, zt)]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        _, _, out = derivatives(zm, std[0], std[1], std[2], std[3])
    return {
        name: g if isinstance(g, np.ndarray) and g.shape == shape else np.broadcast_to(g, shape)
        for name, g in out.items()
    }


def _complex_of_shape(a, shape: tuple[int, ...]) -> np.ndarray:
    if isinstance(a, np.ndarray) and a.dtype == complex and a.shape == shape:
        return a
    return np.broadcast_to(np.asarray(a, dtype=complex), shape)


def derivatives(
    zm, zo, zs, zl, zt, with_zt: bool = True
) -> tuple[np.ndarray, np.ndarray, dict[str, np.ndarray]]:
    """``(K, N/D, {input: ∂Zx/∂input})`` for complex arrays of one shape (None where a standard
    was not taken; ``∂Zx/∂Zt`` only ``with_zt``); ``K·(N/D)`` is the corrected impedance, bit
    for bit as :meth:`acquire.compensation.formulas.Correction.apply` gives it. Call inside an
    ``np.errstate`` that ignores division, invalid and overflow (the caller's whole batch)."""
    k, dk = _k_and_partials(zo, zs, zl, zt, with_zt)
    n = zm if zs is None else zm - zs
    d = 1.0 if zo is None else zo - zm
    ratio = n / d  # Zx / K
    out = {"zm": k * (1.0 if zo is None else (zo - (0.0 if zs is None else zs)) / d**2)}
    if zs is not None:
        out["zs"] = -k / d + ratio * dk.get("zs", 0.0)
    if zo is not None:
        out["zo"] = -k * n / d**2 + ratio * dk["zo"]
    if zl is not None:
        out["zl"] = ratio * dk["zl"]
        if with_zt:
            out["zt"] = ratio * dk["zt"]
    return k, ratio, out


def real_jacobian(g: np.ndarray) -> np.ndarray:
    """The ``(..., 2, 2)`` real Jacobian of a holomorphic map with complex derivative ``g``."""
    g = np.asarray(g, dtype=complex)
    j = np.empty(g.shape + (2, 2))
    j[..., 0, 0] = g.real
    j[..., 0, 1] = -g.imag
    j[..., 1, 0] = g.imag
    j[..., 1, 1] = g.real
    return j


def propagate(
    zm, u_m=None, zo=None, u_o=None, zs=None, u_s=None, zl=None, u_l=None, zt=None, u_t=None
) -> tuple[np.ndarray, np.ndarray]:
    """Corrected impedance and the covariance of its real and imaginary parts, per point.

    ``zm`` are readings of the DUT; ``zo``, ``zs``, ``zl`` the open, short and load readings at
    the same frequencies (None where not taken); ``zt`` the load's true value (needed with a
    load). Each ``u_*`` is the uncertainty of that input in any form :func:`as_covariance`
    takes (None for none); the inputs are taken as independent. Returns ``(zx, cov)``: ``zx``
    as :func:`acquire.compensation.formulas.correction` computes it, ``cov`` of shape
    ``zx.shape + (2, 2)`` in ohm². A point with no finite value has a NaN covariance.
    """
    zm = np.asarray(zm, dtype=complex)
    shape = zm.shape
    inputs = {"zo": zo, "zs": zs, "zl": zl, "zt": zt}
    given = {
        k: np.broadcast_to(np.asarray(v, dtype=complex), shape)
        for k, v in inputs.items()
        if v is not None
    }
    if not any(k in given for k in ("zo", "zs", "zl")):
        raise InputError("no standard given: the correction needs an open, a short or a load")
    if "zl" in given and "zt" not in given:
        raise InputError("a load reading needs the load's true impedance (zt)")
    corr = formulas.correction(given.get("zo"), given.get("zs"), given.get("zl"), given.get("zt"))
    zx = corr.apply(zm)
    grads = sensitivities(zm, **given)
    us = {"zm": u_m, "zo": u_o, "zs": u_s, "zl": u_l, "zt": u_t}
    terms = []
    for name, g in grads.items():
        v = as_covariance(us[name], shape)
        if np.any(v):
            terms.append((g, (v[..., 0, 0], v[..., 0, 1], v[..., 1, 0], v[..., 1, 1])))
    return zx, assemble(zx, terms)


def sandwich(g: np.ndarray, v) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """The four components of ``J·V·Jᵀ`` for the real Jacobian ``J`` of complex derivative ``g``.

    ``v`` is the input's covariance as its components ``(V00, V01, V10, V11)``, or one variance
    ``σ²`` per point for an input whose parts are independent with equal variance
    (``V = σ²·I``). With ``g = p + jq`` and ``J = [[p, −q], [q, p]]``, multiplied out::

        C00 = p²·V00 − p·q·(V01 + V10) + q²·V11
        C01 = p·q·(V00 − V11) + p²·V01 − q²·V10
        C10 = p·q·(V00 − V11) + p²·V10 − q²·V01
        C11 = q²·V00 + p·q·(V01 + V10) + p²·V11

    and for ``V = σ²·I``, since ``J·Jᵀ = |g|²·I``: ``C00 = C11 = |g|²·σ²``, ``C01 = C10 = 0``.
    """
    with np.errstate(invalid="ignore", over="ignore"):
        return _sandwich(g, v)


def _sandwich(g: np.ndarray, v) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    p, q = g.real, g.imag
    if not isinstance(v, tuple):
        d = (p * p + q * q) * v
        return d, 0.0, 0.0, d  # type: ignore[return-value]
    a, b, c, e = v
    pp, qq, pq = p * p, q * q, p * q
    cross = pq * (b + c)
    spread = pq * (a - e)
    return (
        pp * a - cross + qq * e,
        spread + pp * b - qq * c,
        spread + pp * c - qq * b,
        (qq * a + cross + pp * e),
    )


def assemble(zx: np.ndarray, terms) -> np.ndarray:
    """``Σ J·V·Jᵀ`` over ``terms`` (pairs of a complex derivative and a covariance as
    :func:`sandwich` takes it) as a ``zx.shape + (2, 2)`` array; NaN where ``zx`` is not finite."""
    with np.errstate(invalid="ignore", over="ignore"):
        return assemble_quiet(zx, terms)


def assemble_quiet(zx: np.ndarray, terms) -> np.ndarray:
    """:func:`assemble` inside the caller's ``np.errstate`` (ignoring invalid and overflow)."""
    out = np.zeros(zx.shape + (2, 2))
    if all(not isinstance(v, tuple) for _, v in terms):
        # each input's parts independent with equal variance: C00 = C11, C01 = C10 = 0; the
        # first term starts the total (0 + x is x: a variance is never -0.0)
        total = None
        for g, v in terms:
            d = _sandwich(g, v)[0]
            if total is None:
                total = (
                    d if isinstance(d, np.ndarray) and d.shape == zx.shape else d + out[..., 0, 0]
                )
            else:
                total += d
        if total is not None:
            out[..., 0, 0] = total
            out[..., 1, 1] = total
    else:
        for g, v in terms:
            c00, c01, c10, c11 = _sandwich(g, v)
            out[..., 0, 0] += c00
            out[..., 1, 1] += c11
            if isinstance(v, tuple):
                out[..., 0, 1] += c01
                out[..., 1, 0] += c10
    finite = np.isfinite(zx)
    if not finite.all():
        out[~finite] = np.nan
    return out


def expanded(cov, k: float = COVERAGE_FACTOR) -> np.ndarray:
    """Expanded uncertainty ``k·√diag`` of R and of X, shape ``(..., 2)``, from covariances."""
    cov = np.asarray(cov, dtype=float)
    with np.errstate(invalid="ignore"):
        return k * np.sqrt(np.diagonal(cov, axis1=-2, axis2=-1))
