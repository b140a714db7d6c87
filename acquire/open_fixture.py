"""Does a sweep look like an empty fixture? Judged from the readings themselves.

A sweep of a fixture with nothing in it still ends "complete", and every corrected value is
meaningless. :func:`open_fixture` says so when most of the raw readings look like nothing is
connected:

- with a reference set that holds an open reading, a raw reading looks open when it lies within
  the open reading's own scatter of that open reading (interpolated to the point);
- without one, a reading looks open when it is capacitive with an admittance no larger than a few
  picofarads' (:data:`STRAY_CAPACITANCE`), i.e. the stray capacitance of leads and clips.

Overrange and invalid readings (inf, NaN) count as open in both cases: an empty fixture is the
usual reason a meter cannot read. Pure functions of numpy arrays in SI units.
"""

from __future__ import annotations

import math
from typing import Any

import numpy as np

#: Share of the points that must look open for the sweep to be called open (common practice,
#: no published source: "most of the sweep", so a few good points do not hide an empty fixture).
MOST = 0.8
#: The largest capacitance an empty fixture's leads and clips show, F (common practice, no
#: published source: short bench leads and clips are some pF, a test fixture's terminals less).
STRAY_CAPACITANCE = 20e-12
#: A raw reading within this many standard deviations of the open reading matches it (computed:
#: the difference of two readings with relative scatter s has scatter s * sqrt(2); 4 such
#: deviations cover all but about 3e-4 of Gaussian noise on each of R and X).
DEVIATIONS = 4.0
#: Smallest relative tolerance against the open reading, for drift between capture and sweep
#: (common practice, no published source).
DRIFT = 0.02
#: Median of a Rayleigh distribution over its scale parameter, sqrt(2 ln 2) (the distribution of
#: the magnitude of a complex Gaussian with equal, independent components).
RAYLEIGH_MEDIAN = math.sqrt(2 * math.log(2))


def open_fixture(f: np.ndarray, raw: np.ndarray, references: Any = None) -> str:
    """A one-line reason when the raw readings ``raw`` at ``f`` look like an empty fixture, else ''.

    ``references`` is the :class:`acquire.compensation.ReferenceSet` in use, or None. Its open
    reading is used when it has one and covers ``f``; otherwise the readings are judged alone.
    """
    f = np.asarray(f, dtype=float).reshape(-1)
    z = np.asarray(raw, dtype=complex).reshape(-1)
    if f.size == 0:
        return ""
    z_open = _open_at(references, f)
    if z_open is not None:
        share = float(np.mean(matches_open(z, z_open, relative_scatter(references))))
        how = "match the open reference within its scatter"
    else:
        share = float(np.mean(looks_capacitive_open(f, z)))
        how = f"read as {STRAY_CAPACITANCE * 1e12:.0f} pF or less (or overrange, or no reading)"
    if share < MOST:
        return ""
    return (
        f"the readings look like an open fixture (nothing connected): {share:.0%} of the points "
        f"{how}; check the part is in the fixture and the clips make contact"
    )


def matches_open(z: np.ndarray, z_open: np.ndarray, scatter: float) -> np.ndarray:
    """Per point: True where ``z`` is within the open reading's scatter of ``z_open``, or unread."""
    tolerance = max(DEVIATIONS * math.sqrt(2) * scatter, DRIFT)
    with np.errstate(all="ignore"):
        near = np.abs(z - z_open) <= tolerance * np.abs(z_open)
    return near | ~np.isfinite(z)


def looks_capacitive_open(f: np.ndarray, z: np.ndarray) -> np.ndarray:
    """Per point: True where ``z`` is capacitive with |Y| <= 2 pi f C_stray, or unread."""
    with np.errstate(all="ignore"):
        small = (z.imag < 0) & (1 / np.abs(z) <= 2 * np.pi * f * STRAY_CAPACITANCE)
    return small | ~np.isfinite(z)


def relative_scatter(references: Any) -> float:
    """The relative standard deviation (per component) of one reading of the open standard.

    From the set's own Type A uncertainty when it has one (``open_u``, of the mean of
    ``repeats`` readings, so one reading scatters ``sqrt(repeats)`` times more); otherwise
    estimated from the open reading itself: each point against the geometric mean of its two
    neighbours, which an open's 1/f impedance follows exactly on a log grid, so what is left is
    noise of relative variance 1.5 s^2 (computed: 1 + 1/4 + 1/4), whose magnitude has median
    ``RAYLEIGH_MEDIAN * sqrt(1.5) * s``.
    """
    z = np.asarray(references.open, dtype=complex)
    u = getattr(references, "open_u", None)
    if u is not None:
        repeats = max(int(getattr(references, "repeats", 1) or 1), 1)
        with np.errstate(all="ignore"):
            rel = np.asarray(u, dtype=float) * math.sqrt(repeats) / np.abs(z)
        rel = rel[np.isfinite(rel)]
        if rel.size:
            return float(np.median(rel))
    ok = np.isfinite(z)
    z = z[ok]
    if z.size < 3:
        return 0.0
    size, phase = np.abs(z), np.unwrap(np.angle(z))
    with np.errstate(all="ignore"):
        middle = np.sqrt(size[:-2] * size[2:]) * np.exp(0.5j * (phase[:-2] + phase[2:]))
        e = z[1:-1] / middle - 1
    e = np.abs(e[np.isfinite(e)])
    if e.size == 0:
        return 0.0
    return float(np.median(e) / (RAYLEIGH_MEDIAN * math.sqrt(1.5)))


def _open_at(references: Any, f: np.ndarray) -> np.ndarray | None:
    """The open reading interpolated at ``f``, or None without one (or outside its grid)."""
    if references is None or getattr(references, "open", None) is None:
        return None
    from acquire.errors import CompensationError

    try:
        return np.asarray(references.at(f).open, dtype=complex)
    except CompensationError:
        return None
