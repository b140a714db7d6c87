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
"""

from __future__ import annotations

import csv
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TextIO

import numpy as np

from acquire.errors import InputError

#: Plain-ASCII unit of each quantity, as written in the header.
CSV_UNITS = {
    "Ls": "H", "Lp": "H", "Rs": "ohm", "Rp": "ohm", "Cs": "F", "Cp": "F", "Q": "1", "D": "1",
    "Z": "ohm", "theta": "deg", "X": "ohm", "G": "S", "B": "S",
}  # fmt: skip


def header(corrected: bool, names: Sequence[str]) -> list[str]:
    """The header row for a sweep with or without corrected values and the given quantities."""
    unknown = [n for n in names if n not in CSV_UNITS]
    if unknown:
        raise InputError(f"unknown quantity {unknown[0]!r}; choose from {', '.join(CSV_UNITS)}")
    cols = ["frequency [Hz]", "raw R [ohm]", "raw X [ohm]"]
    if corrected:
        cols += ["corrected R [ohm]", "corrected X [ohm]"]
    return cols + [f"{n} [{CSV_UNITS[n]}]" for n in names]


def comment_lines(about: Mapping[str, object]) -> list[str]:
    """``# key: value`` lines, each value on one line (line breaks become spaces)."""
    lines = []
    for key, value in about.items():
        name = " ".join(str(key).replace(":", " ").split())
        text = " ".join(str(value).split())
        lines.append(f"# {name}: {text}\n")
    return lines


def _number(value: float) -> str:
    return format(float(value), ".17g")


def write_rows(
    out: TextIO,
    frequency: np.ndarray,
    raw: np.ndarray,
    corrected: np.ndarray | None = None,
    names: Sequence[str] = ("Ls", "Rs", "Q"),
    about: Mapping[str, object] | None = None,
) -> int:
    """Write ``about`` as comment lines, the header and one row per point to ``out``; returns
    the number of rows."""
    from acquire.impedance import quantities

    f = np.asarray(frequency, dtype=float)
    zr = np.asarray(raw, dtype=complex)
    zc = None if corrected is None else np.asarray(corrected, dtype=complex)
    if zr.shape != f.shape or (zc is not None and zc.shape != f.shape):
        raise InputError("frequency, raw and corrected arrays must have the same length")
    q = quantities(f, zr if zc is None else zc) if f.size else {}
    out.writelines(comment_lines(about or {}))
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(header(zc is not None, names))
    columns = [f, zr.real, zr.imag]
    if zc is not None:
        columns += [zc.real, zc.imag]
    columns += [q[n] for n in names] if f.size else []
    for row in zip(*columns, strict=True):
        writer.writerow([_number(v) for v in row])
    return int(f.size)


def write_sweep_csv(
    path: str | Path,
    frequency: np.ndarray,
    raw: np.ndarray,
    corrected: np.ndarray | None = None,
    names: Sequence[str] = ("Ls", "Rs", "Q"),
    about: Mapping[str, object] | None = None,
) -> Path:
    """Write a sweep to the CSV file at ``path`` (replaced if it exists); returns the path.

    ``about`` holds what the file's comment lines say (see the module docstring)."""
    p = Path(path)
    if p.parent and not p.parent.exists():
        raise InputError(f"cannot write {str(p)!r}: folder {str(p.parent)!r} does not exist")
    with p.open("w", encoding="utf-8", newline="") as out:
        write_rows(out, frequency, raw, corrected, names, about)
    return p
