"""A gauge R&R study's measurements from a CSV file, checked into a balanced crossed design.

The file has a header row naming the columns ``part``, ``operator``, ``trial`` and ``value``
(in any order, without case or surrounding spaces), then one row per measurement. Lines that
start with ``#`` are comments (as `acquire sweep` writes them); ``# quantity: Ls@100000`` names
what was measured. The value column may carry its unit in square brackets, with an SI prefix
(``value [H]``, ``value [uH]``, ``value [ohm]``, ``value [pF]``, ``value [1]`` for a number
without unit); values are kept in the SI unit (henry for ``[uH]``). Without brackets the values
are taken as they are, without a unit. Any other column is refused, naming it, so that a
misspelt column never goes unnoticed.

``part`` and ``trial`` are whole numbers (1, 2, ...), ``operator`` any non-empty text (kept as
written, never interpreted), ``value`` a finite number. :func:`study_cube` checks the design:
at least 2 parts, 2 operators and 2 trials, every operator measured every part, each the same
trials once.
"""

from __future__ import annotations

import csv
import math
import re
from dataclasses import dataclass
from pathlib import Path

import numpy as np

from acquire.errors import InputError
from acquire.msa.records import GrrData
from acquire.units import PREFIXES, parse_quantity

COLUMNS = ("part", "operator", "trial", "value")
#: Units a value column may carry (after an optional SI prefix), as kept in GrrData.unit.
VALUE_UNITS = {"H": "H", "ohm": "ohm", "Ω": "ohm", "F": "F", "Hz": "Hz", "1": ""}


def value_unit(header: str) -> tuple[float, str]:
    """The scale to SI and the SI unit of a ``value [unit]`` header (``(1.0, "")`` without)."""
    found = re.fullmatch(r"\s*value\s*(?:\[(.*)\])?\s*", header, re.IGNORECASE)
    text = (found.group(1) or "").strip() if found else ""
    if text in ("", "1"):
        return 1.0, ""
    for written, unit in VALUE_UNITS.items():
        prefix = text[: -len(written)] if text.endswith(written) else None
        if prefix is not None and prefix in PREFIXES and unit:
            return parse_quantity("1" + text, written), unit
    raise InputError(
        f"column {header!r}: unit {text!r} is not understood (use H, ohm, F or Hz, with an SI "
        "prefix such as uH, or [1] for a number without unit)"
    )


def _header_key(name: str) -> str:
    return re.sub(r"\s*\[.*\]\s*$", "", name.strip()).lower()


def read_grr_csv(path: str | Path) -> GrrData:
    """The study in the CSV file at ``path`` (see the module's description), checked."""
    p = Path(path)
    try:
        text = p.read_text(encoding="utf-8-sig")
    except UnicodeDecodeError:
        raise InputError(f"{path}: not a UTF-8 text file") from None
    except FileNotFoundError:
        raise InputError(
            f"{path}: no such file; give a CSV with the columns part,operator,trial,value, or "
            "a stored study's number (`acquire grr analyse 3`)"
        ) from None
    except OSError as exc:
        raise InputError(f"{path}: cannot be read ({exc.strerror}); check the path") from None
    quantity = ""
    lines = []
    for line in text.splitlines():
        if line.lstrip().startswith("#"):
            key, _, rest = line.lstrip("# \t").partition(":")
            if key.strip().lower() == "quantity":
                quantity = rest.strip()
            continue
        if line.strip():
            lines.append(line)
    rows = list(csv.reader(lines))
    if not rows:
        raise InputError(f"{path}: no header row; the first line names part,operator,trial,value")
    header = [h.strip() for h in rows[0]]
    keys = [_header_key(h) for h in header]
    extra = [h for h, k in zip(header, keys, strict=True) if k not in COLUMNS]
    if extra:
        raise InputError(
            f"{path}: column {extra[0]!r} is not one of part, operator, trial, value; remove it"
        )
    missing = [c for c in COLUMNS if c not in keys]
    if missing:
        raise InputError(f"{path}: no column {', '.join(missing)} (the header must name "
                         "part,operator,trial,value)")  # fmt: skip
    twice = [k for k in COLUMNS if keys.count(k) > 1]
    if twice:
        raise InputError(f"{path}: column {twice[0]!r} is named twice")
    at = {k: keys.index(k) for k in COLUMNS}
    scale, unit = value_unit(header[at["value"]])
    parts, operators, trials, values = [], [], [], []
    for number, row in enumerate(rows[1:], start=2):
        if len(row) != len(header):
            raise InputError(f"{path}: row {number} has {len(row)} cells, the header {len(header)}")
        parts.append(_whole(row[at["part"]], "part", path, number))
        name = row[at["operator"]].strip()
        if not name:
            raise InputError(f"{path}: row {number} has no operator")
        operators.append(name)
        trials.append(_whole(row[at["trial"]], "trial", path, number))
        values.append(_number(row[at["value"]], path, number) * scale)
    if not values:
        raise InputError(f"{path}: no measurements under the header")
    data = GrrData(
        part=np.array(parts, dtype=int),
        operator=np.array(operators, dtype=object),
        trial=np.array(trials, dtype=int),
        value=np.array(values, dtype=float),
        quantity=quantity,
        unit=unit,
    )
    study_cube(data)
    return data


def _whole(text: str, what: str, path: str | Path, row: int) -> int:
    try:
        value = int(text.strip())
    except ValueError:
        raise InputError(f"{path}: row {row}: {what} {text!r} is not a whole number") from None
    if value < 1:
        raise InputError(f"{path}: row {row}: {what} {value} must be 1 or more")
    return value


def _number(text: str, path: str | Path, row: int) -> float:
    try:
        value = float(text.strip())
    except ValueError:
        raise InputError(f"{path}: row {row}: value {text!r} is not a number") from None
    if not math.isfinite(value):
        raise InputError(f"{path}: row {row}: value {text!r} is not a finite number")
    return value


@dataclass(frozen=True)
class StudyCube:
    """A checked study as ``values[part, operator, trial]``, with the part numbers, operator
    names (in the order first met) and trial numbers along each axis."""

    parts: tuple[int, ...]
    operators: tuple[str, ...]
    trials: tuple[int, ...]
    values: np.ndarray


def study_cube(data: GrrData) -> StudyCube:
    """Check ``data`` is a balanced crossed design and arrange it by part, operator and trial;
    an :class:`InputError` names what is missing or repeated."""
    part = np.asarray(data.part)
    operator = np.asarray([str(o) for o in data.operator], dtype=object)
    trial = np.asarray(data.trial)
    value = np.asarray(data.value, dtype=float)
    if not (part.size == operator.size == trial.size == value.size):
        raise InputError("a study's part, operator, trial and value lists differ in length")
    bad = np.flatnonzero(~np.isfinite(value))
    if bad.size:
        i = int(bad[0])
        raise InputError(f"part {part[i]}, operator {operator[i]!r}, trial {trial[i]}: the value "
                         "is not a finite number; measure it again or remove the part")  # fmt: skip
    parts = tuple(sorted({int(x) for x in part}))
    operators = tuple(dict.fromkeys(operator.tolist()))
    trials = tuple(sorted({int(x) for x in trial}))
    for count, what in ((len(parts), "parts"), (len(operators), "operators")):
        if count < 2:
            raise InputError(f"a gauge R&R study needs at least 2 {what} (it has {count})")
    if len(trials) < 2:
        raise InputError(f"a gauge R&R study needs at least 2 trials (it has {len(trials)})")
    cube = np.full((len(parts), len(operators), len(trials)), np.nan)
    pi = {x: i for i, x in enumerate(parts)}
    oi = {x: i for i, x in enumerate(operators)}
    ti = {x: i for i, x in enumerate(trials)}
    for p, o, t, v in zip(part.tolist(), operator.tolist(), trial.tolist(), value, strict=True):
        at = (pi[int(p)], oi[o], ti[int(t)])
        if not np.isnan(cube[at]):
            raise InputError(f"part {p}, operator {o!r}, trial {t} is measured twice; keep one")
        cube[at] = v
    gaps = np.argwhere(np.isnan(cube))
    if gaps.size:
        p, o, t = gaps[0]
        raise InputError(
            f"unbalanced study: part {parts[p]}, operator {operators[o]!r} has no trial "
            f"{trials[t]} ({gaps.shape[0]} measurement{'s' if gaps.shape[0] > 1 else ''} "
            f"missing); every operator must measure every part in trials {trials[0]} to "
            f"{trials[-1]}"
        )
    return StudyCube(parts, operators, trials, cube)
