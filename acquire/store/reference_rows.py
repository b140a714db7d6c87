"""A stored reference set's header and point rows back as a ReferenceSet (no SQLAlchemy here:
the store's usual path, :mod:`acquire.store.references`, and its plain-SQLite sweep path,
:mod:`acquire.store.sqlite_sweeps`, both build it here)."""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import numpy as np

from acquire.errors import StoreError

if TYPE_CHECKING:
    from acquire.compensation import ReferenceSet

#: The standards a reference set may hold, in the order they are reported.
STANDARDS = ("open", "short", "load")
ARRAYS = (*STANDARDS, "load_true")
#: The per-standard uncertainty arrays (optional fields of a reference set).
UNCERTAINTIES = tuple(f"{std}_u" for std in STANDARDS)
#: The columns of a reference point read back, after its ``idx``.
POINT_NAMES = ("frequency", *(f"{std}_{part}" for std in ARRAYS for part in "rx"), *UNCERTAINTIES)
#: The header columns a reference set is built from.
HEAD_NAMES = (
    "points", "standards", "repeats", "grid_spacing", "captured_at", "fixture", "meter",
    "temperature", "notes",
)  # fmt: skip


def check_complete(ref_id: int, points: int, indexes: list[int]) -> None:
    """Raise StoreError if the stored rows of a set are not exactly its points 0..points-1."""
    present = set(indexes)
    missing = points - len(present & set(range(points)))
    extra = len(present) - (points - missing)
    if missing:
        raise StoreError(
            f"reference set {ref_id} is damaged: {missing} of its {points} points are missing; "
            "capture the references again"
        )
    if extra:
        raise StoreError(
            f"reference set {ref_id} is damaged: it holds {extra} points beyond its {points}; "
            "capture the references again"
        )


def reference_set(ref_id: int, head: Mapping[str, Any], rows: Sequence[Any]) -> ReferenceSet:
    """Set ``ref_id`` from its header (``HEAD_NAMES``, times already aware) and its point rows
    (``idx`` then :data:`POINT_NAMES`, in ``idx`` order); StoreError when the rows are not the
    points the header counts."""
    from acquire.compensation import ReferenceSet

    check_complete(ref_id, head["points"], [r[0] for r in rows])
    width = len(POINT_NAMES)
    table = np.array([tuple(r[1:]) for r in rows], dtype=float).reshape(len(rows), width)
    held = set(head["standards"].split(","))
    arrays: dict[str, Any] = {}
    for k, std in enumerate(ARRAYS):
        if std in held:
            z = np.empty(len(rows), dtype=complex)
            z.real, z.imag = table[:, 1 + 2 * k], table[:, 2 + 2 * k]
            arrays[std] = z
        else:
            arrays[std] = None
    first_u = 1 + 2 * len(ARRAYS)
    for k, name in enumerate(UNCERTAINTIES):
        u = table[:, first_u + k]
        arrays[name] = None if np.isnan(u).all() else u.copy()  # NULL reads back as NaN
    return ReferenceSet(
        table[:, 0].copy(),
        **arrays,
        repeats=head["repeats"],
        grid_spacing=head["grid_spacing"],
        captured_at=head["captured_at"],
        fixture=head["fixture"],
        meter=head["meter"],
        temperature=head["temperature"],
        notes=head["notes"],
    )
