"""Bias sweeps and temperature-rise runs as CSV files, laid out like a sweep's
(:mod:`acquire.csvout`): ``# key: value`` lines, a header row with each column's unit in
brackets, one row per bias step or reading.

A bias sweep's head names the DUT, meter, fixture, frequency, bias supply, reference set,
status, the drop currents (``10 %: 2.31 A; 30 %: above 6 A``) and how going ahead was confirmed;
its columns are ``setpoint [A]``, ``applied [A]``, ``Ls [H]``, ``Rs [ohm]``, ``Q [1]``,
``raw R [ohm]``, ``raw X [ohm]`` and, when a reference set corrected the readings (captured
at zero bias), ``corrected R [ohm]`` and ``corrected X [ohm]``. A temperature-rise run's head
names the DUT, meter, supply, current, ambient, cold resistance and the result; its columns are
``time [s]``, ``resistance [ohm]`` and ``rise [K]``.

Numbers have 17 significant digits, so a float64 reads back exactly (``nan`` and ``inf`` as
Python and pandas read them). Every value of the head is put on one line (line breaks become
spaces), so no name can start a row of its own; pandas skips the head with
``read_csv(path, comment="#")``.
"""

from __future__ import annotations

import csv
from collections.abc import Mapping, Sequence
from pathlib import Path
from typing import TextIO

import numpy as np

from acquire.bias.records import BiasSweepResult, RiseResult
from acquire.csvout import comment_lines
from acquire.errors import InputError

#: The columns of a bias sweep's file (corrected R and X only when the sweep has them).
BIAS_COLUMNS = (
    *("setpoint [A]", "applied [A]", "Ls [H]", "Rs [ohm]", "Q [1]", "raw R [ohm]"),
    *("raw X [ohm]", "corrected R [ohm]", "corrected X [ohm]"),
)
#: The columns of a temperature-rise run's file.
RISE_COLUMNS = ("time [s]", "resistance [ohm]", "rise [K]")


def percent(fraction: float) -> str:
    """``10 %`` for 0.1 (a drop asked as a fraction)."""
    return f"{fraction * 100:.6g} %"


def drops_text(result: BiasSweepResult) -> str:
    """``10 %: 2.31 A; 30 %: above 6 A``, or ``none`` when no drop current was found."""
    parts = [f"{percent(d.drop)}: {d.text(4)}" for d in result.drops]
    return "; ".join(parts) if parts else "none"


def bias_about(result: BiasSweepResult) -> dict[str, object]:
    """What the head of a bias sweep's file says."""
    s = result.settings
    reference = "none (raw readings)" if s.reference_set_id is None else s.reference_set_id
    return {
        "dut": s.dut,
        "meter": s.meter,
        "fixture": s.fixture,
        "frequency": f"{_number(s.frequency)} Hz",
        "supply": s.supply,
        "reference set": reference,
        "status": result.status,
        "drops asked": ", ".join(percent(d) for d in s.drops),
        "drop currents": drops_text(result),
        "maximum bias": f"{_number(s.maximum)} A",
        "stored energy at the largest bias": f"{_number(s.energy)} J",
        "confirmed": s.confirmed,
        "started": result.started,
        "ended": result.ended,
        "note": result.note,
    }


def rise_about(result: RiseResult) -> dict[str, object]:
    """What the head of a temperature-rise run's file says."""
    s = result.settings
    final = result.final_rise
    steps = "; ".join(f"{_number(c)} A: {_number(r)} K" for c, r in result.steps)
    return {
        "dut": s.dut,
        "meter": s.meter,
        "supply": s.supply,
        "current": f"{_number(result.current)} A",
        "ambient": f"{_number(s.ambient)} degC",
        "cold resistance": f"{_number(result.r_cold)} ohm at {_number(result.t_cold)} degC",
        "target rise": "none" if s.target_rise is None else f"{_number(s.target_rise)} K",
        "final rise": "none" if final is None else f"{_number(final)} K",
        "settled": "yes" if result.settled else "no",
        "currents tried": steps or "none",
        "status": result.status,
        "note": result.note,
    }


def _number(value: float | None) -> str:
    return "" if value is None else format(float(value), ".17g")


def _write_table(
    out: TextIO, about: Mapping[str, object], header: Sequence[str], columns: list[np.ndarray]
) -> int:
    out.writelines(comment_lines(about))
    writer = csv.writer(out, lineterminator="\n")
    writer.writerow(header)
    rows = zip(*(np.asarray(c, dtype=float).tolist() for c in columns), strict=True)
    writer.writerows([_number(v) for v in row] for row in rows)
    return int(columns[0].size) if columns else 0


def write_bias_rows(out: TextIO, result: BiasSweepResult) -> int:
    """Write a bias sweep (head, header, one row per step) to ``out``; returns the rows."""
    c = result.curve
    raw = np.asarray(c.raw, dtype=complex)
    columns = [c.setpoint, c.applied, c.ls, c.rs, c.q, raw.real, raw.imag]
    if c.corrected is not None:
        corrected = np.asarray(c.corrected, dtype=complex)
        columns += [corrected.real, corrected.imag]
    header = BIAS_COLUMNS[: len(columns)]
    return _write_table(out, bias_about(result), header, [np.asarray(x) for x in columns])


def write_rise_rows(out: TextIO, result: RiseResult) -> int:
    """Write a temperature-rise run (head, header, one row per reading) to ``out``."""
    columns = [np.asarray(x) for x in (result.times, result.resistance, result.rise)]
    return _write_table(out, rise_about(result), RISE_COLUMNS, columns)


def _open(path: str | Path) -> Path:
    p = Path(path)
    if not p.parent.is_dir():
        raise InputError(f"cannot write {str(p)!r}: folder {str(p.parent)!r} does not exist")
    return p


def write_bias_csv(result: BiasSweepResult, path: str | Path) -> Path:
    """Write a bias sweep to the CSV file at ``path`` (replaced if it exists); returns it."""
    p = _open(path)
    with p.open("w", encoding="utf-8", newline="") as out:
        write_bias_rows(out, result)
    return p


def write_rise_csv(result: RiseResult, path: str | Path) -> Path:
    """Write a temperature-rise run to the CSV file at ``path``; returns it."""
    p = _open(path)
    with p.open("w", encoding="utf-8", newline="") as out:
        write_rise_rows(out, result)
    return p
