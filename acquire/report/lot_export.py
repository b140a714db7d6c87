"""A selection of production units as tables and CSV files.

- :func:`units_long`: a row per measurement, the unit's columns (lot, serial, attempt,
  attempt id, station, operator, plan name and hash, outcome, bin, start and end time in UTC,
  references override, ``temperature [degC]``) then the measurement's (sequence number,
  parameter, ``frequency [Hz]`` (empty for a DC value), ``unit``, value, uncertainty (U, k = 2),
  the applied acceptance limits ``low_limit``/``high_limit``, the plan's ``tolerance_low``/
  ``tolerance_high`` (empty: open side), verdict), in test order. A row's value, uncertainty and
  limits are in the SI unit its ``unit`` column names.
- :func:`units_wide`: a row per unit attempt, the unit's columns then a column per quantity with
  its unit in the header (``Ls@10kHz [H]``, ``Rdc [ohm]``, ``Q@1kHz [1]``) and one for its
  uncertainty (``U(Ls@10kHz) [H]``), quantities in the order the plan measures them.
- :func:`write_csv`: either table as CSV under ``# key: value`` head lines, as
  :mod:`acquire.csvout` writes sweeps (``pandas.read_csv(path, comment="#")`` reads it back:
  a field holding ``#``, a comma, a quote or a line break is quoted, RFC 4180).

Units are written in plain ASCII as in sweep files: ``ohm`` for Ω and ``1`` for a dimensionless
quantity. Numbers have 17 significant digits (a float64 reads back exactly); an empty cell is an
invalid reading (NaN), an open limit or a value not stated; an overrange reading is ``inf``.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Mapping
from datetime import datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

import pandas as pd

from acquire.csvout import comment_lines
from acquire.errors import InputError
from acquire.store.lot_query import MEASUREMENT_COLUMNS, UNIT_COLUMNS, LotFilter
from acquire.units import si_prefix

if TYPE_CHECKING:
    from acquire.store import Store

#: Store units shown otherwise in file headers (ASCII, as acquire.csvout writes them).
_ASCII_UNITS = {"": "1", "Ω": "ohm"}
#: Columns renamed in the files, so that their units are never in doubt.
_RENAMED = {"frequency": "frequency [Hz]", "temperature": "temperature [degC]"}


def unit_label(unit: str) -> str:
    """A stored SI unit as written in files: ``"ohm"`` for Ω, ``"1"`` for dimensionless."""
    return _ASCII_UNITS.get(unit, unit)


def frequency_label(frequency: float) -> str:
    """``10kHz``, ``1.5MHz``, ``100Hz`` (12 significant digits, so no two frequencies meet)."""
    scale, prefix = si_prefix(frequency)
    return f"{frequency / scale:.12g}{prefix}Hz"


def wide_name(parameter: str, frequency: float | None, unit: str) -> str:
    """A quantity's column header: ``Ls@10kHz [H]``; ``Rdc [ohm]`` for a DC value."""
    where = "" if frequency is None or math.isnan(frequency) else f"@{frequency_label(frequency)}"
    return f"{parameter}{where} [{unit_label(unit)}]"


def units_long(store: Store, filter: LotFilter) -> pd.DataFrame:
    """A row per measurement of the units ``filter`` picks (see the module docstring)."""
    frame = store.measurement_rows(filter)
    frame["unit"] = frame["unit"].map(unit_label)
    return frame.rename(columns=_RENAMED)


def units_wide(store: Store, filter: LotFilter) -> pd.DataFrame:
    """A row per unit attempt of the units ``filter`` picks, a value and a U column per
    quantity (see the module docstring); a quantity measured twice in one attempt shows its
    last value."""
    rows = store.measurement_rows(filter)
    heads = list(UNIT_COLUMNS)
    units = rows.drop_duplicates("attempt_id")[heads].set_index("attempt_id", drop=False)
    rows = rows[rows["parameter"].notna()]
    if rows.empty:
        return units.reset_index(drop=True).rename(columns=_RENAMED)
    names = [
        wide_name(p, f, u)
        for p, f, u in zip(rows["parameter"], rows["frequency"], rows["unit"], strict=True)
    ]
    rows = rows.assign(column=names)
    order = list(dict.fromkeys(rows.sort_values("seq", kind="stable")["column"]))
    values = rows.pivot_table(
        index="attempt_id", columns="column", values="value", aggfunc="last", dropna=False
    )
    spread = rows.pivot_table(
        index="attempt_id", columns="column", values="uncertainty", aggfunc="last", dropna=False
    )
    parts = [units]
    for name in order:
        quantity, bracket = name.rsplit(" ", 1)
        parts.append(values.get(name, pd.Series(dtype=float)).rename(name))
        parts.append(spread.get(name, pd.Series(dtype=float)).rename(f"U({quantity}) {bracket}"))
    wide = pd.concat(parts, axis=1).loc[units.index]
    return wide.reset_index(drop=True).rename(columns=_RENAMED)


def _cell(value: Any) -> str:
    if value is None or value is pd.NaT or value is pd.NA:
        return ""
    if isinstance(value, bool):
        return str(value).lower()
    if isinstance(value, float):
        if math.isnan(value):
            return ""
        return format(value, ".17g")
    if isinstance(value, datetime):
        return value.isoformat()
    return str(value)


def write_csv(frame: pd.DataFrame, path: str | Path, heading: Mapping[str, str]) -> Path:
    """Write ``frame`` to ``path`` (replaced if it exists) under ``# key: value`` lines made
    from ``heading``; returns the path."""
    p = Path(path)
    if not p.parent.is_dir():
        raise InputError(f"cannot write {str(p)!r}: folder {str(p.parent)!r} does not exist")
    with p.open("w", encoding="utf-8", newline="") as out:
        out.writelines(comment_lines(heading))
        out.write(_line(str(c) for c in frame.columns))
        for row in frame.itertuples(index=False, name=None):
            out.write(_line(_cell(v) for v in row))
    return p


def _quoted(text: str) -> str:
    """A CSV field (RFC 4180), quoted also when it holds ``#``: a reader told that ``#`` starts
    a comment (pandas' ``comment="#"``) still reads a serial such as ``A#7`` whole."""
    if any(c in text for c in ',"#\r\n') or text != text.strip():
        return '"' + text.replace('"', '""') + '"'
    return text


def _line(cells: Iterable[str]) -> str:
    return ",".join(_quoted(c) for c in cells) + "\n"


__all__ = ["MEASUREMENT_COLUMNS", "units_long", "units_wide", "write_csv"]
