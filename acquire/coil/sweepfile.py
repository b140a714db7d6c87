"""Where the fit's sweep comes from: a sweep in the results store, or a CSV file.

A CSV file needs a frequency column and a resistance and reactance pair. Headers are matched
without case, spacing or a bracketed unit: ``frequency [Hz]`` (or ``frequency``, ``freq``,
``f``), then ``corrected R``/``corrected X`` (as `acquire sweep` writes them), ``raw R``/``raw X``
(with ``raw=True``), or a plain ``R``/``X`` (also ``Rs``/``Xs``). The corrected pair is used
when present; fitting raw readings is always an explicit choice.
"""

from __future__ import annotations

import csv
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from acquire.errors import InputError

_FREQUENCY = ("frequency", "freq", "f", "frequency_hz")
_PLAIN_R = ("r", "rs", "resistance")
_PLAIN_X = ("x", "xs", "reactance")


@dataclass(frozen=True)
class SweepSource:
    """A sweep ready to fit: frequencies (hertz), complex impedances (ohm), and where from."""

    frequency: np.ndarray
    impedance: np.ndarray
    description: str


def _key(header: str) -> str:
    text = re.sub(r"\[.*?\]|\(.*?\)", "", header).strip().lower()
    return re.sub(r"[\s_-]+", "_", text)


def _pick(columns: dict[str, int], raw: bool) -> tuple[int, int, int, str]:
    f_col = next((columns[k] for k in _FREQUENCY if k in columns), None)
    if f_col is None:
        raise InputError("the CSV file has no frequency column (expected a header 'frequency')")
    pairs = [("raw_r", "raw_x", "raw readings")] if raw else [
        ("corrected_r", "corrected_x", "corrected readings"),
    ]  # fmt: skip
    pairs += [(r, x, "readings") for r in _PLAIN_R for x in _PLAIN_X]
    for r_key, x_key, what in pairs:
        if r_key in columns and x_key in columns:
            return f_col, columns[r_key], columns[x_key], what
    if not raw and "raw_r" in columns:
        raise InputError(
            "the CSV file has only raw readings (no corrected R and X): pass --raw to fit them "
            "with the fixture included, or sweep with a reference set"
        )
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
    columns = {_key(h): i for i, h in enumerate(rows[0])}
    f_col, r_col, x_col, what = _pick(columns, raw)
    f, z = [], []
    for line, row in enumerate(rows[1:], start=2):
        if len(row) <= max(f_col, r_col, x_col):
            raise InputError(f"line {line} of {path} has too few columns")
        f.append(_number(row[f_col], line))
        z.append(complex(_number(row[r_col], line), _number(row[x_col], line)))
    return SweepSource(np.array(f), np.array(z), f"{path}: {len(f)} points, {what}")


def read_store_sweep(store_url: str, sweep_id: int, raw: bool = False) -> SweepSource:
    """Read sweep ``sweep_id`` from the results store at ``store_url``."""
    from acquire.store import open_store

    with open_store(store_url) as store:
        info = store.sweep_info(sweep_id)
        points = store.sweep_points(sweep_id)
    prefix = "raw" if raw else "corrected"
    r = points[f"{prefix}_r"].to_numpy(dtype=float)
    x = points[f"{prefix}_x"].to_numpy(dtype=float)
    if not raw and points.shape[0] and np.all(np.isnan(r)):
        raise InputError(
            f"sweep {sweep_id} was stored without a reference set, so it has no corrected "
            "readings: pass --raw to fit the raw ones (fixture included)"
        )
    dut = f" of {info.dut}" if info.dut else ""
    status = "" if info.status == "complete" else f" ({info.status})"
    description = (
        f"sweep {sweep_id}{dut} in {store_url}{status}: {len(r)} points, {prefix} readings"
    )
    return SweepSource(points["frequency"].to_numpy(dtype=float), r + 1j * x, description)


def read_sweep(source: str, store_url: str, raw: bool = False) -> SweepSource:
    """A sweep id (digits) from the store, else a CSV file path."""
    text = source.strip()
    if text.isdigit():
        return read_store_sweep(store_url, int(text), raw)
    return read_csv_sweep(text, raw)


__all__ = ["SweepSource", "read_csv_sweep", "read_store_sweep", "read_sweep"]
