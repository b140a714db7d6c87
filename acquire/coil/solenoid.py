"""Inductance of a single-layer solenoid wound with round wire.

The winding is first replaced by a uniform cylindrical current sheet (diameter ``D`` measured to
the wire centres, length ``l = N · pitch``), whose inductance is exact with Nagaoka's coefficient.
Rosa's two corrections then account for the real conductor (Rosa 1906, as tabulated by Grover,
"Inductance Calculations", 1946):

- ``ks = 5/4 − ln(2p/d)``: a round wire of diameter ``d`` has more self-inductance than the strip
  of width ``p`` (the pitch) it replaces;
- ``km``: the mutual inductance between separate round turns differs from that of adjacent strips
  of the sheet; it depends only on the number of turns (Grover's Table 39).

``L = K µ0 N² π D² / (4 l) − µ0 (D/2) N (ks + km)``. The corrections assume a pitch much smaller
than the diameter and uniform current in the wire (low frequency).
"""

from __future__ import annotations

import math

import numpy as np

from acquire.coil._validate import positive
from acquire.coil.constants import MU0
from acquire.coil.nagaoka import nagaoka
from acquire.errors import ModelError

_EXACT_KM_UP_TO = 100_000
_SERIES_FROM = 8.0


def long_solenoid_inductance(turns: float, diameter: float, length: float) -> float:
    """The long-solenoid formula ``µ0 N² A / l`` (henry), with ``A = π D²/4``: no end correction."""
    positive("turns", turns)
    positive("diameter", diameter)
    positive("length", length)
    return MU0 * turns**2 * math.pi * diameter**2 / 4.0 / length


def current_sheet_inductance(turns: float, diameter: float, length: float) -> float:
    """Inductance (henry) of a uniform current sheet: the long-solenoid value times Nagaoka's K."""
    return long_solenoid_inductance(turns, diameter, length) * float(nagaoka(diameter / length))


def rosa_ks(pitch: float, wire_diameter: float) -> float:
    """Rosa's self-inductance correction ``5/4 − ln(2p/d)`` for pitch ``p`` and wire diameter ``d``.

    Refuses ``d > p`` (the turns would overlap).
    """
    positive("pitch", pitch)
    positive("wire diameter", wire_diameter)
    if wire_diameter > pitch * (1.0 + 1e-9):
        raise ModelError(
            f"the wire ({wire_diameter * 1e3:.4g} mm) is thicker than the pitch "
            f"({pitch * 1e3:.4g} mm): the turns do not fit in that winding length"
        )
    return 1.25 - math.log(2.0 * pitch / wire_diameter)


def _log_separation_over_gmd(s: np.ndarray) -> np.ndarray:
    """``ln(s / g_s)`` for strips of unit width whose centres are ``s`` widths apart.

    ``g_s`` is the geometric mean distance of two collinear strips; the difference between the
    filament and the strip mutual inductance is proportional to this logarithm. Far apart the
    closed form cancels badly, so the series ``Σ c_n / s^(2n-2)`` (exact coefficients) is used.
    """
    out = np.empty_like(s)
    near = s < _SERIES_FROM
    a = s[near]
    below = np.where(a > 1.0, (a - 1.0) ** 2 * np.log(np.maximum(a - 1.0, 1.0)), 0.0)
    log_gmd = ((a + 1.0) ** 2 * np.log(a + 1.0) + below - 2.0 * a**2 * np.log(a)) / 2.0 - 1.5
    out[near] = np.log(a) - log_gmd
    u2 = 1.0 / s[~near] ** 2
    total = np.zeros_like(u2)
    for n in range(2, 14):
        c = 1.0 / (2 * n) - 2.0 / (2 * n - 1) + 1.0 / (2 * n - 2)
        total += c * u2 ** (n - 1)
    out[~near] = total
    return out


def _km_integer(n: int) -> float:
    if n < 2:
        return 0.0
    if n > _EXACT_KM_UP_TO:
        return (
            math.log(2.0 * math.pi)
            - 1.5
            - math.log(n) / (6.0 * n)
            - 0.33084236 / n
            - 1.0 / (120.0 * n**3)
            + 1.0 / (504.0 * n**5)
        )
    s = np.arange(1, n, dtype=float)
    return float(2.0 / n * np.sum((n - s) * _log_separation_over_gmd(s)))


def rosa_km(turns: float) -> float:
    """Rosa's mutual-inductance correction for ``turns`` turns (Grover's Table 39 quantity B).

    Computed exactly as ``(2/N) Σ_{s=1}^{N-1} (N−s) ln(s/g_s)``; above 100 000 turns by its
    asymptotic series ``ln 2π − 3/2 − ln N/(6N) − 0.33084236/N − …``. A fractional number of
    turns is interpolated linearly between its neighbours.
    """
    positive("turns", turns)
    if turns < 1:
        raise ModelError(f"a winding needs at least one turn (got {turns})")
    low = math.floor(turns)
    frac = turns - low
    value = _km_integer(low)
    if frac > 0:
        value += frac * (_km_integer(low + 1) - value)
    return value


def solenoid_inductance(
    turns: float, diameter: float, length: float, wire_diameter: float | None = None
) -> float:
    """Low-frequency inductance (henry) of a single-layer solenoid.

    ``diameter`` is measured to the wire centres and ``length`` is the winding length
    ``N · pitch``. Without ``wire_diameter`` this is the current-sheet value; with it, Rosa's
    round-wire corrections ``ks`` and ``km`` are subtracted.
    """
    sheet = current_sheet_inductance(turns, diameter, length)
    if wire_diameter is None:
        return sheet
    pitch = length / turns
    correction = MU0 * (diameter / 2.0) * turns * (rosa_ks(pitch, wire_diameter) + rosa_km(turns))
    value = sheet - correction
    if value <= 0:
        raise ModelError(
            "Rosa's corrections exceed the current-sheet inductance: the coil has too few turns "
            "or too coarse a pitch for this method"
        )
    return value
