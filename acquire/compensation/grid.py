"""Gaps in a reference grid: points missing from a log- or linear-spaced capture.

A reference set made from a log or linear plan records that spacing (``grid_spacing``); its
steps (in ``log f`` or in ``f``) are then all equal, up to the rounding of the plan, and a step
that is a multiple of the others means points were lost between capture and use. An explicit
list (``"list"``) may be spaced any way and is never judged. When the spacing was not recorded
(``""``: a set from a version 1 file or from a store that does not keep it) a gap is inferred
only from strong evidence: at least :data:`MIN_STEPS` steps, of which all but a few (at least
:data:`REGULAR_SHARE`) are equal within :data:`STEP_TOLERANCE`, in log or in linear frequency.

The thresholds are this tool's own choices (no published source).
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

#: A step longer than this many common steps is a gap (one missing point makes it 2).
GAP_RATIO = 1.5
#: Relative difference within which two steps of an unrecorded grid count as equal.
STEP_TOLERANCE = 1e-6
#: Least number of steps, and share of them equal, for an unrecorded grid to count as regular.
MIN_STEPS, REGULAR_SHARE = 8, 0.8


@dataclass(frozen=True)
class Gap:
    """Points missing between ``grid[index]`` and ``grid[index + 1]``: about ``missing`` of them."""

    index: int
    missing: int
    spacing: str


def find_gaps(grid: np.ndarray, spacing: str) -> list[Gap]:
    """The gaps of a finite, positive, strictly increasing ``grid`` made with ``spacing``."""
    if spacing == "list" or grid.size < 3:
        return []
    if spacing in ("log", "linear"):
        return _gaps(_steps(grid, spacing), spacing)
    for kind in ("log", "linear"):
        steps = _steps(grid, kind)
        common = np.median(steps)
        equal = np.abs(steps - common) <= STEP_TOLERANCE * common
        if steps.size >= MIN_STEPS and np.mean(equal) >= REGULAR_SHARE:
            return _gaps(steps, kind)
    return []


def _steps(grid: np.ndarray, spacing: str) -> np.ndarray:
    return np.diff(np.log(grid)) if spacing == "log" else np.diff(grid)


def _gaps(steps: np.ndarray, spacing: str) -> list[Gap]:
    ratio = steps / np.median(steps)
    return [
        Gap(int(i), max(1, round(float(ratio[i])) - 1), spacing)
        for i in np.flatnonzero(ratio > GAP_RATIO)
    ]
