"""One-port Touchstone files (.s1p): a sweep's impedance as its reflection coefficient S11.

The layout follows the Touchstone File Format Specification of the IBIS Open Forum (version
1.1, kept by version 2.0 for files without a ``[Version]`` keyword):

- comment lines start with ``!`` and may stand anywhere; ours come first and say what was
  measured (DUT, meter, fixture, reference set, time, status, how the values were corrected);
- one option line, ``# HZ S RI R 50``: frequencies in hertz, scattering parameters, each as its
  real and imaginary part (RI), normalised to a reference resistance of 50 ohm (or the
  ``reference`` given);
- one data line per frequency, in increasing order: ``frequency Re(S11) Im(S11)``.

S11 = (Z - Z0) / (Z + Z0) for a one-port of impedance Z against the real reference Z0. Numbers
are written with 12 significant digits (``%.11e``), so Z read back from the file agrees with Z
written to about 5e-12 of |S11| propagated through Z = Z0 (1 + S11) / (1 - S11). The format is
plain ASCII: a comment's characters outside ASCII are written as Python escapes (``\\u00b5``)
and line breaks inside a comment become spaces.
"""

from __future__ import annotations

from collections.abc import Iterable
from pathlib import Path

import numpy as np

from acquire.errors import InputError

#: Significant digits of every number written.
DIGITS = 12
#: The option line's reference resistance when none is given (ohm).
DEFAULT_REFERENCE = 50.0


def s11_from_z(z: np.ndarray, reference: float = DEFAULT_REFERENCE) -> np.ndarray:
    """The reflection coefficient of impedances ``z`` (ohm) against the real ``reference``."""
    z = np.asarray(z, dtype=complex)
    return (z - reference) / (z + reference)


def option_line(reference: float = DEFAULT_REFERENCE) -> str:
    """The Touchstone option line for hertz, S parameters, real-imaginary pairs."""
    return f"# HZ S RI R {reference:g}"


def comment(text: object) -> str:
    """One ``!`` comment line holding ``text`` (one line, ASCII only)."""
    flat = " ".join(str(text).split())
    return "! " + flat.encode("ascii", "backslashreplace").decode("ascii")


def s1p_text(
    frequency: np.ndarray,
    z: np.ndarray,
    reference: float = DEFAULT_REFERENCE,
    comment_lines: Iterable[object] = (),
) -> str:
    """The text of a one-port Touchstone file for impedances ``z`` (ohm) at ``frequency`` (Hz).

    Refuses no points, mismatched arrays, frequencies that are not finite, positive and strictly
    increasing, values that are not finite (leave invalid or overrange points out, and say so in
    a comment) and a reference resistance that is not finite and positive.
    """
    f = np.asarray(frequency, dtype=float).reshape(-1)
    zz = np.asarray(z, dtype=complex).reshape(-1)
    if f.size == 0:
        raise InputError("a Touchstone file needs at least one point")
    if zz.shape != f.shape:
        raise InputError(f"{f.size} frequencies but {zz.size} impedances")
    if not (np.isfinite(reference) and reference > 0):
        raise InputError(f"the reference resistance must be finite and positive, not {reference}")
    if not np.all(np.isfinite(f)) or f[0] <= 0 or np.any(np.diff(f) <= 0):
        raise InputError("Touchstone frequencies must be finite, positive and increasing")
    if not np.all(np.isfinite(zz)):
        raise InputError("a Touchstone file holds finite values only; leave invalid points out")
    s = s11_from_z(zz, reference)
    width = DIGITS - 1
    lines = [comment(line) for line in comment_lines]
    lines.append(option_line(reference))
    lines += [
        f"{fi:.{width}e} {si.real:.{width}e} {si.imag:.{width}e}"
        for fi, si in zip(f.tolist(), s.tolist(), strict=True)
    ]
    return "\n".join(lines) + "\n"


def write_s1p(
    path: str | Path,
    frequency: np.ndarray,
    z: np.ndarray,
    reference: float = DEFAULT_REFERENCE,
    comment_lines: Iterable[object] = (),
) -> Path:
    """Write :func:`s1p_text` to ``path`` (replaced if it exists); returns the path."""
    text = s1p_text(frequency, z, reference, comment_lines)
    p = Path(path)
    if not p.parent.is_dir():
        raise InputError(f"cannot write {str(p)!r}: folder {str(p.parent)!r} does not exist")
    p.write_text(text, encoding="ascii", newline="\n")
    return p
