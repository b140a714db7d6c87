"""What a meter's reading means: a pair of quantities turned into complex impedance.

An impedance meter reports each point as two numbers whose meaning depends on the display mode
the dialect selects: R and X, |Z| and phase, G and B, or one of the trade's series/parallel
equivalent circuits (Ls-Rs, Lp-Rp, Cs-Rs, Cp-D, Ls-Q, ...). :func:`to_impedance` turns any of
them, in either order, into complex Z in ohm at the measured frequencies. Everything here is a
pure function of numpy arrays in SI units.

Conventions (series quantities carry an ``s``, parallel ones a ``p``; omega = 2 pi f):

- R, X: Z = R + jX.  Z, theta_deg / theta_rad: Z = |Z| exp(j theta).  G, B: Y = G + jB = 1/Z.
- Ls: X = omega Ls.  Cs: X = -1/(omega Cs).  Rs: the series resistance R.
- Lp: B = -1/(omega Lp).  Cp: B = omega Cp.  Rp: G = 1/Rp.
- Q and D = 1/Q, with the sign convention the dialect names (``qd_sign``):

  ``"signed"``: Q = X/R and D = R/X for every pair (negative for a capacitive reading); for the
  parallel pairs this is the same number as -B/G (the ratio |X|/R equals |B|/G).
  ``"by_mode"``: Q and D are positive for a lossy part of the kind the pair names, so with Cs
  or Cp they are the negatives of the signed values (D = omega Cs Rs, D = G/(omega Cp)); with
  Ls or Lp the two conventions agree (Q = omega Ls/Rs = Rp/(omega Lp)).

SCPI-99 reports an overrange value as 9.9E37 and an invalid one as 9.91E37; a point where
either number of its pair is overrange becomes ``complex(inf, inf)``, and one where either is
invalid becomes ``complex(nan, nan)`` (invalid wins).
"""

from __future__ import annotations

from collections.abc import Callable

import numpy as np

from drivers.scpi import markers

#: Names a dialect may use for the two numbers of a reading.
QUANTITIES: dict[str, str] = {
    "R": "resistance, ohm",
    "X": "reactance, ohm",
    "Z": "magnitude of impedance, ohm",
    "theta_deg": "phase of impedance, degree",
    "theta_rad": "phase of impedance, radian",
    "G": "conductance, siemens",
    "B": "susceptance, siemens",
    "Ls": "series inductance, henry",
    "Lp": "parallel inductance, henry",
    "Cs": "series capacitance, farad",
    "Cp": "parallel capacitance, farad",
    "Rs": "series resistance, ohm",
    "Rp": "parallel resistance, ohm",
    "Q": "quality factor of the named equivalent, 1",
    "D": "dissipation factor of the named equivalent (1/Q), 1",
}

_Converter = Callable[[np.ndarray, np.ndarray, np.ndarray], np.ndarray]


def _omega(f: np.ndarray) -> np.ndarray:
    return 2.0 * np.pi * f


def _from_rx(r: np.ndarray, x: np.ndarray) -> np.ndarray:
    return r + 1j * x


def _from_gb(g: np.ndarray, b: np.ndarray) -> np.ndarray:
    return 1.0 / (g + 1j * b)


def _series_l(ls: np.ndarray, w: np.ndarray) -> np.ndarray:
    return w * ls


def _series_c(cs: np.ndarray, w: np.ndarray) -> np.ndarray:
    return -1.0 / (w * cs)


def _parallel_l(lp: np.ndarray, w: np.ndarray) -> np.ndarray:
    return -1.0 / (w * lp)


def _parallel_c(cp: np.ndarray, w: np.ndarray) -> np.ndarray:
    return w * cp


def _z_deg(z, t, f):
    return z * np.exp(1j * np.deg2rad(t))


def _z_rad(z, t, f):
    return z * np.exp(1j * t)


def _ls_rs(ls, rs, f):
    return _from_rx(rs, _series_l(ls, _omega(f)))


def _ls_q(ls, q, f):
    x = _series_l(ls, _omega(f))
    return _from_rx(x / q, x)


def _ls_d(ls, d, f):
    x = _series_l(ls, _omega(f))
    return _from_rx(d * x, x)


def _cs_rs(cs, rs, f):
    return _from_rx(rs, _series_c(cs, _omega(f)))


def _cs_d(cs, d, f):
    x = _series_c(cs, _omega(f))
    return _from_rx(d * x, x)


def _cs_q(cs, q, f):
    x = _series_c(cs, _omega(f))
    return _from_rx(x / q, x)


def _lp_rp(lp, rp, f):
    return _from_gb(1.0 / rp, _parallel_l(lp, _omega(f)))


def _lp_q(lp, q, f):
    b = _parallel_l(lp, _omega(f))
    return _from_gb(-b / q, b)


def _lp_d(lp, d, f):
    b = _parallel_l(lp, _omega(f))
    return _from_gb(-b * d, b)


def _cp_rp(cp, rp, f):
    return _from_gb(1.0 / rp, _parallel_c(cp, _omega(f)))


def _cp_d(cp, d, f):
    b = _parallel_c(cp, _omega(f))
    return _from_gb(-d * b, b)


def _cp_q(cp, q, f):
    b = _parallel_c(cp, _omega(f))
    return _from_gb(-b / q, b)


#: Sign conventions for Q and D (see the module docstring).
QD_SIGNS = ("signed", "by_mode")

#: Every supported pair, in its canonical order, and how it becomes Z(first, second, f),
#: with Q and D signed (Q = X/R, D = R/X).
CONVERTERS: dict[tuple[str, str], _Converter] = {
    ("R", "X"): lambda r, x, f: _from_rx(r, x),
    ("Z", "theta_deg"): _z_deg,
    ("Z", "theta_rad"): _z_rad,
    ("G", "B"): lambda g, b, f: _from_gb(g, b),
    ("Ls", "Rs"): _ls_rs,
    ("Ls", "Q"): _ls_q,
    ("Ls", "D"): _ls_d,
    ("Lp", "Rp"): _lp_rp,
    ("Lp", "Q"): _lp_q,
    ("Lp", "D"): _lp_d,
    ("Cs", "Rs"): _cs_rs,
    ("Cs", "D"): _cs_d,
    ("Cs", "Q"): _cs_q,
    ("Cp", "Rp"): _cp_rp,
    ("Cp", "D"): _cp_d,
    ("Cp", "Q"): _cp_q,
}


def supported_pairs() -> list[tuple[str, str]]:
    """Every pair a dialect may name (either order is accepted too)."""
    return list(CONVERTERS)


def is_supported(pair: tuple[str, str]) -> bool:
    """True if ``pair`` (in either order) can be turned into impedance."""
    a, b = pair
    return (a, b) in CONVERTERS or (b, a) in CONVERTERS


def _plain(values: np.ndarray) -> bool:
    """True if no value can be a marker (the common case, checked cheaply)."""
    return bool(np.all(np.abs(values) < 1e37))


def to_impedance(
    pair: tuple[str, str], frequency, first, second, qd_sign: str = "signed"
) -> np.ndarray:
    """Complex impedance (ohm) from a reading pair at ``frequency`` (Hz).

    ``pair`` names the quantities in the order the meter sends them, e.g. ``("Cp", "D")``;
    ``first`` and ``second`` are arrays of the two numbers (broadcast with ``frequency``);
    ``qd_sign`` is ``"signed"`` or ``"by_mode"`` (how the meter signs Q and D).
    Markers for overrange/invalid become ``inf+infj`` / ``nan+nanj`` (see the module docstring).
    """
    f = np.asarray(frequency, dtype=float)
    a = np.asarray(first, dtype=float)
    b = np.asarray(second, dtype=float)
    key = (pair[0], pair[1])
    if key in CONVERTERS:
        u, v = a, b
    elif key[::-1] in CONVERTERS:
        key, u, v = key[::-1], b, a
    else:
        raise ValueError(f"unsupported reading pair {pair!r}; supported: {supported_pairs()}")
    if qd_sign not in QD_SIGNS:
        raise ValueError(f"qd_sign must be one of {QD_SIGNS}, not {qd_sign!r}")
    if qd_sign == "by_mode" and key[0] in ("Cs", "Cp") and key[1] in ("Q", "D"):
        v = -v
    convert = CONVERTERS[key]
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        z = np.asarray(convert(u, v, f), dtype=complex)
    if _plain(a) and _plain(b):
        return z
    shape = np.broadcast_shapes(z.shape, a.shape, b.shape)
    z = np.array(np.broadcast_to(z, shape))
    over_a, bad_a = markers(a)
    over_b, bad_b = markers(b)
    z[np.broadcast_to(over_a | over_b, shape)] = complex(np.inf, np.inf)
    z[np.broadcast_to(bad_a | bad_b, shape)] = complex(np.nan, np.nan)
    return z


def from_flat(pair: tuple[str, str], frequency, values, qd_sign: str = "signed") -> np.ndarray:
    """Complex impedance from a flat reply ``a1, b1, a2, b2, ...`` (one pair per frequency)."""
    v = np.asarray(values, dtype=float)
    f = np.atleast_1d(np.asarray(frequency, dtype=float))
    if v.shape != (2 * f.size,):
        raise ValueError(f"expected {2 * f.size} numbers for {f.size} points, got {v.size}")
    return to_impedance(pair, f, v[0::2], v[1::2], qd_sign)
