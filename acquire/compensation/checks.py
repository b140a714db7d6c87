"""Judge a reference set, and a DUT measured with it, before trusting the correction.

Each rule gives at most one :class:`Finding` per standard, naming how many grid points it hit,
where, and the worst one, with what to do about it. ``severity`` is ``"error"`` when the
references cannot be right (a correction with them would be wrong, not merely less accurate) and
``"warning"`` when accuracy suffers.

Rules on the references
-----------------------
- grid: frequencies finite, above 0 Hz and strictly increasing (error);
- every reading finite: NaN is an invalid reading, infinity an overrange (error);
- a load needs its true value, which must be finite and non-zero (error); a true value without
  a load reading is unused (warning);
- ``|Zo| >= 10*|Zs|``: where the open is not clearly above the short at most of the grid (more
  than half of its points), the two were swapped, or the fixture was shorted for the open or left
  open for the short (error); where it fails at fewer points, the fixture itself limits accuracy
  there, typically near the resonance of its own leads and stray capacitance (warning);
- a short that is capacitive (theta < -45 degrees) and above 10 ohm looks like an open fixture;
  an open that is not capacitive (theta > -45 degrees) and below 10 ohm looks like a short
  (error): an empty fixture is a small capacitance, a shorted one a small resistance and
  inductance;
- the load, corrected with the open and short present, within 10 % of its true value (warning
  beyond, error beyond 50 %: the wrong standard or none was in the fixture).

Rules on a DUT (the usual rule of thumb for losing accuracy; common practice, no published source)
---------------------------------------------------------------------------------------------------
- warning where ``|Zdut| < 10*|Zs|``: the DUT is within 10x of the short residual;
- warning where ``|Zo| < 10*|Zdut|``: the open's impedance is within 10x of the DUT.

The 10 ohm, 45 degree, 10 % and 50 % limits are this tool's own choices (no published source);
they separate a forgotten shorting bar or a wrong standard from an ordinary fixture.
"""

from __future__ import annotations

from dataclasses import dataclass
from typing import TYPE_CHECKING, Literal

import numpy as np

from acquire.compensation import formulas
from acquire.compensation.interpolation import place, standards_at
from acquire.errors import CompensationError
from acquire.units import format_si

if TYPE_CHECKING:
    from acquire.compensation.reference_set import ReferenceSet

#: The 10x rule of thumb for DUTs and for open against short (common practice, no published source).
ACCURACY_RATIO = 10.0
#: |Z| (ohm) separating a short from an open fixture, with :data:`PHASE_LIMIT` (this tool's choice).
SHORT_OPEN_BOUNDARY = 10.0
#: Phase (degrees) below which a reading is capacitive like an empty fixture (this tool's choice).
PHASE_LIMIT = -45.0
#: Relative distance of the corrected load from its true value: warning above, error above.
LOAD_WARNING, LOAD_ERROR = 0.10, 0.50


@dataclass(frozen=True)
class Finding:
    """One thing wrong with a reference set or with a DUT measured through it.

    ``severity`` is ``"error"`` or ``"warning"``; ``standard`` names what it concerns
    (``"open"``, ``"short"``, ``"load"``, ``"load_true"``, ``"frequency"`` for the grid,
    ``"dut"``, or ``"set"``); ``frequency`` is the worst (or first) frequency concerned in Hz,
    or None when the finding is not about one frequency.
    """

    severity: Literal["error", "warning"]
    standard: str
    message: str
    frequency: float | None = None

    def __str__(self) -> str:
        return f"{self.severity}: {self.standard}: {self.message}"


def check(refs: ReferenceSet, dut=None, f=None) -> list[Finding]:
    """All findings on ``refs`` and, when ``dut`` (complex ohm) is given, on that DUT.

    ``f`` are the DUT's frequencies (default: the reference grid); the references are carried
    there as :meth:`ReferenceSet.correct` would. Both measured and corrected DUT values are fine
    for the 10x rules.
    """
    grid = refs.frequency
    found = _grid_findings(grid)
    grid_ok = not found
    given = {name: getattr(refs, name) for name in ("open", "short", "load", "load_true")}
    given = {name: z for name, z in given.items() if z is not None}
    if not any(name in given for name in ("open", "short", "load")):
        found.append(Finding("error", "set", "holds no open, short or load reading; capture one"))
    for name, z in given.items():
        found += _finite_findings(name, z, grid)
    found += _load_presence(refs)
    found += _open_short_findings(refs.open, refs.short, grid)
    found += _load_findings(refs, grid)
    if dut is not None:
        found += _dut_findings(refs, dut, f, grid_ok)
    return found


def _grid_findings(grid: np.ndarray) -> list[Finding]:
    bad = ~np.isfinite(grid) | (grid <= 0)
    if np.any(bad):
        text = (
            f"{int(bad.sum())} grid frequencies are not finite and above 0 Hz; "
            "the grid is unusable, capture the references again"
        )
        return [Finding("error", "frequency", text)]
    steps = np.diff(grid) <= 0
    if np.any(steps):
        i = int(np.argmax(steps)) + 1
        text = (
            f"the grid is not strictly increasing: point {i} ({_hz(grid[i])}) does not lie above "
            f"the one before ({_hz(grid[i - 1])}); capture the references on a sorted grid "
            "without repeats"
        )
        return [Finding("error", "frequency", text, float(grid[i]))]
    return []


def _where(mask: np.ndarray, f: np.ndarray, worst: int | None = None) -> tuple[str, float]:
    n = int(mask.sum())
    hit = f[mask]
    span = _hz(hit[0]) if n == 1 else f"{_hz(hit.min())} to {_hz(hit.max())}"
    at = int(np.flatnonzero(mask)[0]) if worst is None else worst
    return f"at {n} of {mask.size} frequencies ({span})", float(f[at])


def _worst(mask: np.ndarray, score: np.ndarray, largest: bool = False) -> int:
    masked = np.where(mask, score, np.nan)
    return int(np.nanargmax(masked) if largest else np.nanargmin(masked))


def _finite_findings(name: str, z: np.ndarray, grid: np.ndarray) -> list[Finding]:
    found = []
    nan = np.isnan(z)
    over = ~np.isfinite(z) & ~nan
    for mask, what in ((nan, "invalid (NaN)"), (over, "overrange")):
        if np.any(mask):
            where, freq = _where(mask, grid)
            text = (
                f"readings are {what} {where}; the correction is undefined there: capture this "
                "standard again, or sweep only where the meter can read it"
            )
            found.append(Finding("error", name, text, freq))
    return found


def _load_presence(refs: ReferenceSet) -> list[Finding]:
    if refs.load is not None and refs.load_true is None:
        text = "a load was measured but its true impedance is not given; set load_true"
        return [Finding("error", "load", text)]
    if refs.load_true is None:
        return []
    found = []
    if refs.load is None:
        text = "the load's true impedance is given but no load was measured, so it is not used"
        found.append(Finding("warning", "load_true", text))
    zero = refs.load_true == 0
    if np.any(zero):
        where, freq = _where(zero, refs.frequency)
        text = f"is zero {where}; a load standard must be a finite, non-zero impedance"
        found.append(Finding("error", "load_true", text, freq))
    return found


def _open_short_findings(zo, zs, grid) -> list[Finding]:
    found = []
    with np.errstate(divide="ignore", invalid="ignore"):
        if zo is not None and zs is not None:
            ratio = np.abs(zo) / np.abs(zs)
            low = (ratio < ACCURACY_RATIO) & np.isfinite(zo) & np.isfinite(zs)
            if np.any(low):
                worst = _worst(low, ratio)
                where, freq = _where(low, grid, worst)
                text = (
                    f"|Z| of the open is less than {ACCURACY_RATIO:g}x that of the short {where}; "
                    f"worst {ratio[worst]:.3g}x at {_hz(freq)}: "
                )
                if 2 * np.count_nonzero(low) > low.size:
                    text += (
                        "the two were swapped, or the fixture was shorted for the open or left "
                        "open for the short; capture both again"
                    )
                    found.append(Finding("error", "open", text, freq))
                else:
                    text += (
                        "the fixture itself limits accuracy there (its leads and stray "
                        "capacitance near their own resonance); corrected readings there are "
                        "less accurate: shorten the leads or keep the sweep clear of that range"
                    )
                    found.append(Finding("warning", "open", text, freq))
        if zs is not None:
            like_open = (_phase(zs) < PHASE_LIMIT) & (np.abs(zs) > SHORT_OPEN_BOUNDARY)
            if np.any(like_open):
                where, freq = _where(like_open, grid)
                text = (
                    f"looks like an open fixture (capacitive, above {SHORT_OPEN_BOUNDARY:g} ohm) "
                    f"{where}: close the fixture with its shorting bar and capture the short again"
                )
                found.append(Finding("error", "short", text, freq))
        if zo is not None:
            like_short = (_phase(zo) > PHASE_LIMIT) & (np.abs(zo) < SHORT_OPEN_BOUNDARY)
            if np.any(like_short):
                where, freq = _where(like_short, grid)
                text = (
                    f"looks like a shorted fixture (not capacitive, below "
                    f"{SHORT_OPEN_BOUNDARY:g} ohm) {where}: empty the fixture and capture the open "
                    "again"
                )
                found.append(Finding("error", "open", text, freq))
    return found


def _load_findings(refs: ReferenceSet, grid) -> list[Finding]:
    if refs.load is None or refs.load_true is None:
        return []
    load = refs.load
    if refs.open is not None or refs.short is not None:
        load = formulas.correction(refs.open, refs.short, None, None).apply(load)
    with np.errstate(divide="ignore", invalid="ignore"):
        off = np.abs(load - refs.load_true) / np.abs(refs.load_true)
    for severity, limit in (("error", LOAD_ERROR), ("warning", LOAD_WARNING)):
        far = (off > limit) & np.isfinite(off)
        if np.any(far):
            worst = _worst(far, off, largest=True)
            where, freq = _where(far, grid, worst)
            advice = (
                "the wrong standard (or none) was in the fixture"
                if severity == "error"
                else "check the standard's value and its connection"
            )
            text = (
                f"the corrected load is more than {limit:.0%} from its true value {where}; "
                f"worst {off[worst]:.1%} at {_hz(freq)}: {advice}"
            )
            return [Finding(severity, "load", text, freq)]
    return []


def _dut_findings(refs: ReferenceSet, dut, f, grid_ok: bool) -> list[Finding]:
    grid = refs.frequency
    dut = np.atleast_1d(np.asarray(dut, dtype=complex))
    f = grid if f is None else np.atleast_1d(np.asarray(f, dtype=float))
    if f.shape != dut.shape:
        raise CompensationError(
            f"the DUT has {dut.size} readings but {f.size} frequencies; give one reading per "
            "frequency"
        )
    if not grid_ok:
        return []
    try:
        at = place(grid, f)
    except CompensationError as exc:
        return [Finding("error", "dut", str(exc))]
    found = []
    invalid = ~np.isfinite(dut)
    if np.any(invalid):
        where, freq = _where(invalid, f)
        found.append(Finding("warning", "dut", f"readings are invalid or overrange {where}", freq))
    size = np.abs(dut)
    zo_at, zs_at, _, _ = standards_at(grid, at, refs.open, refs.short, None, None)
    with np.errstate(divide="ignore", invalid="ignore"):
        if zs_at is not None:
            zs = np.abs(zs_at)
            near = size < ACCURACY_RATIO * zs
            if np.any(near):
                where, freq = _where(near, f, _worst(near, size / zs))
                text = (
                    f"the DUT's |Z| is within {ACCURACY_RATIO:g}x of the short residual {where}: "
                    "accuracy there is limited by the fixture; use shorter leads or a better short"
                )
                found.append(Finding("warning", "short", text, freq))
        if zo_at is not None:
            zo = np.abs(zo_at)
            near = zo < ACCURACY_RATIO * size
            if np.any(near):
                where, freq = _where(near, f, _worst(near, zo / size))
                text = (
                    f"the open's |Z| is within {ACCURACY_RATIO:g}x of the DUT's {where}: accuracy "
                    "there is limited by the fixture's stray capacitance; shorten or separate "
                    "the leads"
                )
                found.append(Finding("warning", "open", text, freq))
    return found


def _phase(z: np.ndarray) -> np.ndarray:
    return np.degrees(np.angle(z))


def _hz(value: float) -> str:
    return format_si(float(value), "Hz")
