"""Judge a DUT's readings against the reference set it is corrected with.

Rules (all warnings; a DUT is never refused, only described):

- ``|Zdut| < 10*|Zs|``: the DUT is within 10x of the short residual, and
  ``|Zo| < 10*|Zdut|``: the open's impedance is within 10x of the DUT (the usual rule of thumb
  for losing accuracy; common practice, no published source);
- readings that are invalid or overrange.

Both measured and corrected DUT values are fine for the 10x rules. Whether the readings look like
an empty fixture is judged by :mod:`acquire.open_fixture`, with or without a reference set.
"""

from __future__ import annotations

import numpy as np

from acquire.compensation.findings import ACCURACY_RATIO, Finding, where, worst
from acquire.compensation.interpolation import place, standards_at
from acquire.compensation.protocol import References
from acquire.errors import CompensationError


def dut_findings(refs: References, dut, f, grid_ok: bool) -> list[Finding]:
    """Findings on DUT readings ``dut`` (complex ohm) at ``f`` (default: the grid)."""
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
        text, freq = where(invalid, f)
        found.append(Finding("warning", "dut", f"readings are invalid or overrange {text}", freq))
    size = np.abs(dut)
    zo_at, zs_at, _, _ = standards_at(grid, at, refs.open, refs.short, None, None)
    with np.errstate(divide="ignore", invalid="ignore"):
        if zs_at is not None:
            zs = np.abs(zs_at)
            near = size < ACCURACY_RATIO * zs
            if np.any(near):
                text, freq = where(near, f, worst(near, size / zs))
                text = (
                    f"the DUT's |Z| is within {ACCURACY_RATIO:g}x of the short residual {text}: "
                    "accuracy there is limited by the fixture; use shorter leads or a better short"
                )
                found.append(Finding("warning", "short", text, freq))
        if zo_at is not None:
            zo = np.abs(zo_at)
            near = zo < ACCURACY_RATIO * size
            if np.any(near):
                text, freq = where(near, f, worst(near, zo / size))
                text = (
                    f"the open's |Z| is within {ACCURACY_RATIO:g}x of the DUT's {text}: accuracy "
                    "there is limited by the fixture's stray capacitance; shorten or separate "
                    "the leads"
                )
                found.append(Finding("warning", "open", text, freq))
    return found
