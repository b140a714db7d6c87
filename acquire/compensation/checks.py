"""Judge a reference set, and a DUT measured with it, before trusting the correction.

Each rule gives at most one :class:`Finding` per standard, naming how many grid points it hit,
where, the worst one and what the readings looked like. ``severity`` is ``"error"`` when the
readings cannot come from the standards named on a passive fixture (a correction with them
would be wrong), ``"warning"`` when accuracy suffers or a rule cannot judge. Rules on a DUT are
in :mod:`.dut_checks`.

What the rules rest on
----------------------
The fixture is any linear, passive, reciprocal two-port between the meter and the DUT, with
chain (ABCD) parameters ``A, B, C, D`` and ``AD - BC = 1`` (reciprocity); the meter reads
``Zm = (A*Zx + B)/(C*Zx + D)`` (two-port network theory, e.g. D. M. Pozar, *Microwave
Engineering*, the chapter on network analysis; from memory). From that alone:

1. *Passivity*: a passive network ending in a passive standard has an input impedance with
   ``Re(Z) >= 0``. Every standard reading must have ``R >= -(sin(1°)*|Z| + 5*u)`` (``u`` its Type
   A uncertainty; the 1° allows for the meter's phase error; this tool's choice). Below that at
   most of the grid the readings are not of a passive fixture (a reading convention or a meter
   fault: error); at fewer points the meter's phase is off there (warning).
2. *Distinct standards*: ``Zo - Zs = 1/(C*D)`` and the map is one to one, so open, short and load
   readings of a working fixture differ. Two standards that read the same (within
   :data:`~.findings.ALIKE_RELATIVE` and their scatter) at most of the grid were not both in
   the fixture as named (error); at fewer points the fixture no longer separates them there,
   far above its own resonance (warning: corrected readings there are meaningless). This
   replaces any judgement of a reading by its phase: above the leads' resonance an open may
   read inductive and a short capacitive.
3. *Open against short*: ``|Zo| >= 10*|Zs|`` (common practice, no published source) is an
   accuracy rule only (warning): a fixture above its own resonance, or an impedance-inverting
   one, breaks it without any mistake.
4. *The load's value*: three distinct readings always fix the bilinear map (the load maps to
   its true value by construction), so they cannot by themselves say the load had the value
   given: a fixture with gain would explain any value. What can be judged: corrected with open
   and short only, any reciprocal fixture gives ``Zx/D**2`` (substitute ``Zm`` in the
   open-short formula); for a fixture of series conductors and shunt strays ``|D - 1|`` is of
   the order of ``|Zs/Zo|`` (pi network: ``D = 1 + Y1*Z``), and a fixture joined to the DUT by
   conductors has ``D -> 1`` as ``f -> 0``. So where ``|Zo| >= 100*|Zs|`` (this tool's
   choice: model error near ``2|Zs/Zo|`` = 2 %) the open-short corrected load must be within
   10 % of its true value (warning beyond, error beyond 50 %: another part or none was in the
   fixture). Where the fixture is larger than that the rule cannot judge: a difference above
   10 % there is a warning and the load is kept. Without both open and short the load is
   judged at every frequency with what was taken.

Bookkeeping rules: the grid finite, above 0 Hz and strictly increasing, with no gaps in a log
or linear grid (:mod:`.grid`) (error); every reading finite: NaN is an invalid reading,
infinity an overrange (error; such points are left out of every other rule); a load needs its
true value, finite and non-zero (error); a true value without a load reading is unused
(warning).

The 1°, 5 %, 100x, 10 % and 50 % limits are this tool's own choices (no published source).
"""

from __future__ import annotations

import numpy as np

from acquire.compensation import dut_checks, formulas
from acquire.compensation import grid as grids
from acquire.compensation.findings import (
    ACCURACY_RATIO,
    Finding,
    Severity,
    alike,
    hz,
    most,
    ohm,
    where,
    worst,
)
from acquire.compensation.protocol import References

__all__ = ["Finding", "check"]

#: Phase error (degrees) a reading may have before its negative R counts as not passive.
PHASE_MARGIN = 1.0
#: Coverage factor on the Type A uncertainty in the passivity rule.
PASSIVITY_COVERAGE = 5.0
#: |Zo|/|Zs| from which the open-short model is close enough to judge the load's value.
JUDGE_RATIO = 100.0
#: Relative distance of the corrected load from its true value: warning above, error above.
LOAD_WARNING, LOAD_ERROR = 0.10, 0.50


def check(refs: References, dut=None, f=None) -> list[Finding]:
    """All findings on ``refs`` and, when ``dut`` (complex ohm) is given, on that DUT.

    ``f`` are the DUT's frequencies (default: the reference grid); see :mod:`.dut_checks`.
    """
    grid = refs.frequency
    found = _grid_findings(grid)
    grid_ok = not found
    if grid_ok:
        found += _gap_findings(grid, refs.grid_spacing)
    given = {name: getattr(refs, name) for name in ("open", "short", "load", "load_true")}
    given = {name: z for name, z in given.items() if z is not None}
    if not any(name in given for name in ("open", "short", "load")):
        found.append(Finding("error", "set", "holds no open, short or load reading; capture one"))
    for name, z in given.items():
        found += _finite_findings(name, z, grid)
    for name in ("open", "short", "load"):
        if name in given:
            found += _passivity_findings(name, given[name], getattr(refs, f"{name}_u"), grid)
    found += _load_presence(refs)
    found += _distinct_findings(refs, grid)
    found += _open_short_findings(refs, grid)
    found += _load_findings(refs, grid)
    if dut is not None:
        found += dut_checks.dut_findings(refs, dut, f, grid_ok)
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
            f"the grid is not strictly increasing: point {i} ({hz(grid[i])}) does not lie above "
            f"the one before ({hz(grid[i - 1])}); capture the references on a sorted grid "
            "without repeats"
        )
        return [Finding("error", "frequency", text, float(grid[i]))]
    return []


def _gap_findings(grid: np.ndarray, spacing: str) -> list[Finding]:
    gaps = grids.find_gaps(grid, spacing)
    if not gaps:
        return []
    first = gaps[0]
    missing = sum(g.missing for g in gaps)
    lo, hi = grid[first.index], grid[first.index + 1]
    text = (
        f"the {first.spacing}-spaced grid has {len(gaps)} gap(s), about {missing} point(s) "
        f"missing, the first between {hz(lo)} and {hz(hi)}; the set was damaged after capture: "
        "restore a copy or capture the references again"
    )
    return [Finding("error", "frequency", text, float(lo))]


def _finite_findings(name: str, z: np.ndarray, grid: np.ndarray) -> list[Finding]:
    found = []
    nan = np.isnan(z)
    over = ~np.isfinite(z) & ~nan
    for mask, what in ((nan, "invalid (NaN)"), (over, "overrange")):
        if np.any(mask):
            at, freq = where(mask, grid)
            text = (
                f"readings are {what} {at}; the correction is undefined there: capture this "
                "standard again, or sweep only where the meter can read it"
            )
            found.append(Finding("error", name, text, freq))
    return found


def _passivity_findings(name: str, z: np.ndarray, u, grid: np.ndarray) -> list[Finding]:
    u = 0.0 if u is None else np.nan_to_num(u)
    with np.errstate(invalid="ignore"):
        limit = -(np.sin(np.radians(PHASE_MARGIN)) * np.abs(z) + PASSIVITY_COVERAGE * u)
        bad = np.isfinite(z) & (z.real < limit)
    if not np.any(bad):
        return []
    with np.errstate(divide="ignore", invalid="ignore"):
        score = z.real / np.abs(z)
    i = worst(bad, score)
    at, freq = where(bad, grid, i)
    text = (
        f"reads a negative resistance {at}, worst {ohm(z[i])} at {hz(freq)}; no passive fixture "
        "reads R < 0"
    )
    if most(bad):
        text += ": check the meter's reading format and sign, then capture again"
        return [Finding("error", name, text, freq)]
    text += f": the meter's phase is off by more than {PHASE_MARGIN:g}° there"
    return [Finding("warning", name, text, freq)]


def _load_presence(refs: References) -> list[Finding]:
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
        at, freq = where(zero, refs.frequency)
        text = f"is zero {at}; a load standard must be a finite, non-zero impedance"
        found.append(Finding("error", "load_true", text, freq))
    return found


def _distinct_findings(refs: References, grid: np.ndarray) -> list[Finding]:
    found: list[Finding] = []
    for later, earlier in (("short", "open"), ("load", "open"), ("load", "short")):
        a, b = getattr(refs, later), getattr(refs, earlier)
        if a is None or b is None or any(x.standard == later for x in found):
            continue
        same = alike(a, b, getattr(refs, f"{later}_u"), getattr(refs, f"{earlier}_u"))
        if not np.any(same):
            continue
        first = int(np.flatnonzero(same)[0])
        at, freq = where(same, grid)
        text = (
            f"reads the same as the {earlier} {at}; at {hz(freq)} the {later} reads "
            f"{ohm(a[first])} and the {earlier} {ohm(b[first])}: "
        )
        if most(same):
            text += (
                f"the fixture did not hold the {later} and then the {earlier} as named; capture "
                f"the {later} again with its standard in place (or the {earlier}, if that was "
                "the one taken wrongly)"
            )
            found.append(Finding("error", later, text, freq))
        else:
            text += (
                f"the fixture no longer tells {later} from {earlier} there (far above its own "
                "resonance); corrected readings there are meaningless: keep the sweep below "
                f"{hz(grid[same].min())} or shorten the leads"
            )
            found.append(Finding("warning", later, text, freq))
    return found


def _open_short_findings(refs: References, grid: np.ndarray) -> list[Finding]:
    zo, zs = refs.open, refs.short
    if zo is None or zs is None:
        return []
    with np.errstate(divide="ignore", invalid="ignore"):
        ratio = np.abs(zo) / np.abs(zs)
    low = (ratio < ACCURACY_RATIO) & ~alike(zo, zs, refs.open_u, refs.short_u)
    low &= np.isfinite(zo) & np.isfinite(zs)
    if not np.any(low):
        return []
    i = worst(low, ratio)
    at, freq = where(low, grid, i)
    text = (
        f"|Z| of the open is less than {ACCURACY_RATIO:g}x that of the short {at}; worst "
        f"{ratio[i]:.3g}x at {hz(freq)} (open {ohm(zo[i])}, short {ohm(zs[i])}): the fixture "
        "itself limits accuracy there (a fixture does this near and above the resonance of its "
        "leads and stray capacitance); corrected readings there are less accurate: shorten the "
        "leads or keep the sweep clear of that range"
    )
    return [Finding("warning", "open", text, freq)]


def _load_findings(refs: References, grid: np.ndarray) -> list[Finding]:
    if refs.load is None or refs.load_true is None:
        return []
    zo, zs, load, truth = refs.open, refs.short, refs.load, refs.load_true
    if zo is not None or zs is not None:
        load = formulas.correction(zo, zs, None, None).apply(load)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        off = np.abs(load - truth) / np.abs(truth)
        if zo is not None and zs is not None:
            judged = np.abs(zo) >= JUDGE_RATIO * np.abs(zs)
        else:
            judged = np.ones(grid.shape, bool)
    usable = np.isfinite(off)
    for name in ("open", "short"):
        other = getattr(refs, name)
        if other is not None:
            usable &= ~alike(refs.load, other, refs.load_u, getattr(refs, f"{name}_u"))
    judged &= usable
    limits: tuple[tuple[Severity, float], ...] = (("error", LOAD_ERROR), ("warning", LOAD_WARNING))
    for severity, limit in limits:
        far = judged & (off > limit)
        if np.any(far):
            i = worst(far, off, largest=True)
            at, freq = where(far, grid, i)
            seen = "corrected with open and short" if zo is not None or zs is not None else "read"
            text = (
                f"the load, {seen}, is more than {limit:.0%} from its true value {at}; worst "
                f"{off[i]:.1%} at {hz(freq)}, where it reads {ohm(load[i])} against "
                f"{ohm(truth[i])}: "
            )
            text += (
                "the part in the fixture is not a load of the value given; put in the load "
                "standard, or give its true value"
                if severity == "error"
                else "check the standard's value and its connection"
            )
            return [Finding(severity, "load", text, freq)]
    unjudged = usable & ~judged & (off > LOAD_WARNING)
    if np.any(unjudged):
        i = worst(unjudged, off, largest=True)
        at, freq = where(unjudged, grid, i)
        text = (
            f"cannot be judged {at}: the open is within {JUDGE_RATIO:g}x of the short there, "
            f"where the fixture alone can move the open-short corrected load (worst {off[i]:.1%} "
            f"from its true value at {hz(freq)}); the load is kept and the correction uses it as "
            "read"
        )
        return [Finding("warning", "load", text, freq)]
    if not np.any(judged) and np.any(usable):
        text = (
            f"its value cannot be judged at any frequency of the grid: the open is within "
            f"{JUDGE_RATIO:g}x of the short everywhere; the load is kept as read"
        )
        return [Finding("warning", "load", text)]
    return []
