"""Sweeps as CSV files: comment lines about the sweep, a header row naming each column and its
unit, then one row per point.

The file opens with ``# key: value`` lines saying what was measured and how (for example
``# dut: coil 7``, ``# meter: ...``, ``# fixture: ...``, ``# reference set: ...``, ``# time: ...``
in ISO 8601, ``# status: complete``); pandas skips them with ``read_csv(path, comment="#")``.

Columns: ``frequency [Hz]``, the raw reading as ``raw R [ohm]`` and ``raw X [ohm]``, the corrected
one as ``corrected R [ohm]`` and ``corrected X [ohm]`` (when a reference set was used), then the
chosen quantities of the corrected (else raw) impedance, for example ``Ls [H]``, ``Rs [ohm]``,
``Q [1]`` (``[1]`` marks a dimensionless quantity). Numbers are written with 17 significant
digits, so a float64 reads back exactly; an overrange reading is ``inf`` and an invalid one
``nan``, as Python and pandas read them.

When the sweep's uncertainty is known (its covariance of R and X per point), the expanded
uncertainty (k = 2) follows: ``U(R) [ohm]`` and ``U(X) [ohm]`` after the corrected (else raw)
R and X, and ``U(Ls) [H]`` and so on after each quantity (``nan`` where unknown), and a last
column ``flags`` ('' for a measured value, else words such as ``beyond-accuracy``). A quantity
flagged beyond the tool's accuracy is left empty, never written as a number. The raw and the
corrected R and X stay, each beside its expanded uncertainty and the point's flags: they are the
measured impedance itself, which the store keeps too, and a fit of the file needs them (a
self-resonance is found from X even where R is far below its uncertainty).
"""

from __future__ import annotations

import csv
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TextIO

import numpy as np

from acquire.errors import InputError
from acquire.uncertainty import (
    BEYOND_ACCURACY,
    beyond_accuracy,
    expanded,
    quantity_uncertainty,
)

#: Plain-ASCII unit of each quantity, as written in the header.
CSV_UNITS = {
    "Ls": "H", "Lp": "H", "Rs": "ohm", "Rp": "ohm", "Cs": "F", "Cp": "F", "Q": "1", "D": "1",
    "Z": "ohm", "theta": "deg", "X": "ohm", "G": "S", "B": "S",
}  # fmt: skip


def header(corrected: bool, names: Sequence[str], uncertainty: bool = False) -> list[str]:
    """The header row for a sweep with or without corrected values and uncertainty, and the
    given quantities."""
    unknown = [n for n in names if n not in CSV_UNITS]
    if unknown:
        raise InputError(f"unknown quantity {unknown[0]!r}; choose from {', '.join(CSV_UNITS)}")
    cols = ["frequency [Hz]", "raw R [ohm]", "raw X [ohm]"]
    if corrected:
        cols += ["corrected R [ohm]", "corrected X [ohm]"]
    if not uncertainty:
        return cols + [f"{n} [{CSV_UNITS[n]}]" for n in names]
    cols += ["U(R) [ohm]", "U(X) [ohm]"]
    for n in names:
        cols += [f"{n} [{CSV_UNITS[n]}]", f"U({n}) [{CSV_UNITS[n]}]"]
    return cols + ["flags"]


def comment_lines(about: Mapping[str, object]) -> list[str]:
    """``# key: value`` lines, each value on one line (line breaks become spaces)."""
    lines = []
    for key, value in about.items():
        name = " ".join(str(key).replace(":", " ").split())
        text = " ".join(str(value).split())
        lines.append(f"# {name}: {text}\n")
    return lines


def _number(value: float) -> str:
    return "" if value is None else format(float(value), ".17g")


def _blank(values: np.ndarray, hide: np.ndarray) -> list:
    """``values`` as a list with None (an empty cell) where ``hide``."""
    return [None if h else v for v, h in zip(values.tolist(), hide.tolist(), strict=True)]


def write_rows(
    out: TextIO,
    frequency: np.ndarray,
    raw: np.ndarray,
    corrected: np.ndarray | None = None,
    names: Sequence[str] = ("Ls", "Rs", "Q"),
    about: Mapping[str, object] | None = None,
    cov: np.ndarray | None = None,
    flags: Sequence[str] | np.ndarray | None = None,
) -> int:
    """Write ``about`` as comment lines, the header and one row per point to ``out``; returns
    the number of rows. ``cov`` (n, 2, 2) and ``flags`` (n texts) are the sweep's uncertainty
    and flags (:class:`acquire.sweep.SweepOutcome`); without ``cov`` no U columns are written."""
    from acquire.impedance import quantities

    f = np.asarray(frequency, dtype=float)
    zr = np.asarray(raw, dtype=complex)
    zc = None if corrected is None else np.asarray(corrected, dtype=complex)
    if zr.shape != f.shape or (zc is not None and zc.shape != f.shape):
        raise InputError("frequency, raw and corrected arrays must have the same length")
    z = zr if zc is None else zc
    q = quantities(f, z)
    out.writelines(comment_lines(about or {}))
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(header(zc is not None, names, cov is not None))
    columns: list = [f.tolist(), zr.real.tolist(), zr.imag.tolist()]
    if cov is None:
        if zc is not None:
            columns += [zc.real.tolist(), zc.imag.tolist()]
        columns += [q[n].tolist() for n in names]
        rows = zip(*columns, strict=True)
        writer.writerows([_number(v) for v in row] for row in rows)
        return int(f.size)
    cov = np.asarray(cov, dtype=float)
    if cov.shape != f.shape + (2, 2):
        raise InputError(f"cov must have shape {f.shape + (2, 2)}, not {cov.shape}")
    marks = np.array([""] * f.size if flags is None else [str(x) for x in flags], dtype=object)
    if marks.shape != f.shape:
        raise InputError("give one flags text per point")
    hide = _hidden(f, z, cov, marks, names)
    if zc is not None:
        columns += [zc.real.tolist(), zc.imag.tolist()]
    u_rx = expanded(cov)
    columns += [u_rx[:, 0].tolist(), u_rx[:, 1].tolist()]
    u_q = quantity_uncertainty(f, z, cov, names)
    for n in names:
        columns += [_blank(q[n], hide[n]), u_q[n].tolist()]
    for *row, mark in zip(*columns, marks.tolist(), strict=True):
        writer.writerow([_number(v) for v in row] + [mark])
    return int(f.size)


def _hidden(f, z, cov, marks, names) -> dict[str, np.ndarray]:
    """Per quantity of ``names``: True where the point is flagged beyond accuracy and that value
    is past the tool's accuracy (the sweep's own judgement,
    :func:`acquire.uncertainty.beyond_accuracy`, with an unknown covariance taken as 0)."""
    judge = np.where(np.isfinite(cov), cov, 0.0)
    flagged = marks == BEYOND_ACCURACY
    with np.errstate(all="ignore"):
        bad = beyond_accuracy(f, z, judge, tuple(names))
    return {name: b & flagged for name, b in bad.items()}


def write_sweep_csv(
    path: str | Path,
    frequency: np.ndarray,
    raw: np.ndarray,
    corrected: np.ndarray | None = None,
    names: Sequence[str] = ("Ls", "Rs", "Q"),
    about: Mapping[str, object] | None = None,
    cov: np.ndarray | None = None,
    flags: Sequence[str] | np.ndarray | None = None,
) -> Path:
    """Write a sweep to the CSV file at ``path`` (replaced if it exists); returns the path.

    ``about`` holds what the file's comment lines say (see the module docstring); ``cov`` and
    ``flags`` are the sweep's uncertainty and flags (see :func:`write_rows`)."""
    p = Path(path)
    if p.parent and not p.parent.exists():
        raise InputError(f"cannot write {str(p)!r}: folder {str(p.parent)!r} does not exist")
    with p.open("w", encoding="utf-8", newline="") as out:
        write_rows(out, frequency, raw, corrected, names, about, cov, flags)
    return p
