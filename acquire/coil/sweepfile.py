"""Reading a sweep to fit from a CSV file (the store's sweeps are read by `acquire fit`).

A CSV file needs a frequency column and a resistance and reactance pair. Headers are matched
without case or spacing: ``frequency [Hz]`` (or ``frequency``, ``freq``, ``f``), then
``corrected R``/``corrected X`` (as `acquire sweep` writes them), ``raw R``/``raw X`` (with
``raw=True``), a plain ``R``/``X`` (also ``Rs``/``Xs``), or ``Rs`` with ``Ls`` (X = 2πf·Ls),
or ``Z`` with ``theta`` (R = |Z| cos θ, X = |Z| sin θ). The corrected pair is used when present;
fitting raw readings is always an explicit choice.

A unit in square brackets after a header is honoured, with an SI prefix (``[kHz]``,
``[mohm]``, ``[kΩ]``, ``[uH]``/``[µH]``, ``[deg]``/``[rad]``); a header without one is taken in
SI units (hertz, ohm, henry, degrees for an angle). A unit that does not fit the column
refuses the file, naming the column. An empty R or X cell (how `acquire sweep` writes a value
flagged beyond the tool's accuracy) makes that point unknown: the fit leaves it out and says so.

Columns ``U(R) [ohm]`` and ``U(X) [ohm]`` (the expanded uncertainty, k = 2, of the corrected R
and X, as `acquire sweep` writes them) are read too; their halves are handed to the fit as each
point's standard uncertainty when every point has one.
"""

from __future__ import annotations

import csv
import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from acquire.errors import InputError
from acquire.units import PREFIXES, parse_quantity

_FREQUENCY = ("frequency", "freq", "f", "frequency_hz")


def unit_scale(header: str, base: str) -> float:
    """The factor to SI of the bracketed unit in ``header`` (1 without one); ``base`` is
    ``Hz``, ``ohm``, ``H`` or ``angle`` (degrees to radians)."""
    found = re.search(r"\[(.*?)\]", header)
    unit = found.group(1).strip() if found else ""
    if base == "angle":
        table = {"": math.pi / 180, "deg": math.pi / 180, "°": math.pi / 180, "rad": 1.0}
        if unit in table:
            return table[unit]
    elif not unit:
        return 1.0
    want = {"Hz": "Hz, kHz, MHz", "ohm": "ohm, mohm, kohm, Ω", "H": "H, mH, uH, nH"}
    use = want.get(base, "deg or rad")
    if base != "angle" and unit not in PREFIXES:  # a prefix alone names no unit
        try:
            return parse_quantity("1" + unit, base)
        except InputError as exc:
            raise InputError(f"column {header!r}: {exc} (use {use})") from None
    raise InputError(f"column {header!r}: unit {unit!r} is not understood (use {use})")


_PLAIN_R = ("r", "rs", "resistance")
_PLAIN_X = ("x", "xs", "reactance")


@dataclass(frozen=True)
class SweepSource:
    """A sweep ready to fit: frequencies (hertz), complex impedances (ohm), and where from."""

    frequency: np.ndarray
    impedance: np.ndarray
    description: str
    #: Standard uncertainty (ohm, ``(n, 2)``: R and X) of each point, or None when not known.
    sigma: np.ndarray | None = None


def half_expanded(u_r, u_x, z: np.ndarray) -> np.ndarray | None:
    """``[U_R, U_X] / 2`` as an ``(n, 2)`` array when every finite point has a positive finite
    U of both parts, else None (the fit then estimates its noise)."""
    u = np.column_stack([np.asarray(u_r, dtype=float), np.asarray(u_x, dtype=float)])
    usable = np.isfinite(z)
    if u.shape[0] == 0 or not np.all(np.isfinite(u[usable]) & (u[usable] > 0)):
        return None
    return u / 2.0


def _key(header: str) -> str:
    text = re.sub(r"\[.*?\]|\(.*?\)", "", header).strip().lower()
    return re.sub(r"[\s_-]+", "_", text)


def _pick(columns: dict[str, int], raw: bool) -> tuple[int, str, int, int, str]:
    """Frequency column, the pair's kind (``RX``, ``RL``, ``Ztheta``), its two columns, and what."""
    f_col = next((columns[k] for k in _FREQUENCY if k in columns), None)
    if f_col is None:
        raise InputError("the CSV file has no frequency column (expected a header 'frequency')")
    pairs = [("raw_r", "raw_x", "RX", "raw readings")] if raw else [
        ("corrected_r", "corrected_x", "RX", "corrected readings"),
    ]  # fmt: skip
    pairs += [(r, x, "RX", "readings") for r in _PLAIN_R for x in _PLAIN_X]
    pairs += [(r, "ls", "RL", "readings") for r in ("rs", "r")]
    pairs += [(z, t, "Ztheta", "readings") for z in ("z", "abs_z") for t in ("theta", "phase")]
    if not raw and "raw_r" in columns and "corrected_r" not in columns:
        raise InputError(
            "the CSV file has only raw readings (no corrected R and X): pass --raw to fit them "
            "with the fixture included, or sweep with a reference set"
        )
    for a_key, b_key, kind, what in pairs:
        if a_key in columns and b_key in columns:
            return f_col, kind, columns[a_key], columns[b_key], what
    raise InputError("the CSV file needs R and X columns (e.g. 'corrected R [ohm]', 'R', 'X')")


def _number(text: str, line: int) -> float:
    try:
        return float(text)
    except ValueError:
        raise InputError(f"line {line} of the CSV file: {text!r} is not a number") from None


def read_csv_sweep(path: str | Path, raw: bool = False) -> SweepSource:
    """Read a sweep from a CSV file (see the module docstring for the headers accepted)."""
    path = Path(path)
    if not path.is_file():
        raise InputError(f"{path} is not a file (give a sweep id from the store or a CSV path)")
    with path.open(newline="", encoding="utf-8-sig") as handle:
        rows = [row for row in csv.reader(handle) if row and not row[0].startswith("#")]
    if len(rows) < 2:
        raise InputError(f"{path} has no data rows under its header")
    header = rows[0]
    columns = {_key(h): i for i, h in enumerate(header)}
    f_col, kind, a_col, b_col, what = _pick(columns, raw)
    units = {"RX": ("ohm", "ohm"), "RL": ("ohm", "H"), "Ztheta": ("ohm", "angle")}[kind]
    f_scale = unit_scale(header[f_col], "Hz")
    a_scale = unit_scale(header[a_col], units[0])
    b_scale = unit_scale(header[b_col], units[1])
    plain = [re.sub(r"\[.*?\]", "", h).strip().lower().replace(" ", "") for h in header]
    u_cols = [plain.index(k) if k in plain else None for k in ("u(r)", "u(x)")]
    u_scale = [1.0 if c is None else unit_scale(header[c], "ohm") for c in u_cols]
    f, z, u = [], [], []
    empty = 0
    for line, row in enumerate(rows[1:], start=2):
        if len(row) <= max(f_col, a_col, b_col):
            raise InputError(f"line {line} of {path} has too few columns")
        freq = _number(row[f_col], line) * f_scale
        a = _optional(row, a_col, line) * a_scale
        b = _optional(row, b_col, line) * b_scale
        empty += not (row[a_col].strip() and row[b_col].strip())
        if kind == "RL":
            b = 2.0 * math.pi * freq * b
        elif kind == "Ztheta":
            a, b = a * math.cos(b), a * math.sin(b)
        f.append(freq)
        z.append(complex(a, b))
        u.append([_optional(row, c, line) * k for c, k in zip(u_cols, u_scale, strict=True)])
    zs = np.array(z)
    sigma = None
    if not raw and None not in u_cols and what == "corrected readings":
        values = np.array(u, dtype=float).reshape(-1, 2)
        sigma = half_expanded(values[:, 0], values[:, 1], zs)
    blank = (
        f"; {empty} with an empty cell (a value flagged beyond accuracy) left out" if empty else ""
    )
    return SweepSource(np.array(f), zs, f"{path}: {len(f)} points, {what}{blank}", sigma)


def _optional(row: list[str], col: int | None, line: int) -> float:
    """A number from an optional column; NaN when the column or the cell is missing or empty."""
    if col is None or col >= len(row) or not row[col].strip():
        return math.nan
    return _number(row[col], line)


__all__ = ["SweepSource", "read_csv_sweep", "unit_scale"]
