"""Reference sets in the store: one header row plus one row per frequency.

Each row holds the open, short and load readings and the load standard's true impedance at one
frequency, as real and imaginary parts in ohm (NULL where a standard was not captured or a
reading was invalid), and the standard uncertainty of each standard's mean reading (``open_u``,
``short_u``, ``load_u``, ohm per component; NULL when the standard was read once). The header
keeps the metadata of the set (fixture, meter, capture time, temperature, notes, how many
readings were averaged) and the names of the arrays it holds, and its number of points: a set
whose stored rows do not match it is reported as damaged rather than used.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
from sqlalchemy import Connection, select

from acquire.errors import StoreError
from acquire.store.engine import Database, float_column
from acquire.store.records import ReferenceSetInfo
from acquire.store.reference_rows import ARRAYS as _ARRAYS
from acquire.store.reference_rows import POINT_NAMES, reference_set
from acquire.store.reference_rows import STANDARDS as STANDARDS
from acquire.store.reference_rows import UNCERTAINTIES as _UNCERTAINTIES
from acquire.store.schema import TABLES, utc_now

if TYPE_CHECKING:
    from acquire.compensation import ReferenceSet


def _arrays(refs: Any) -> tuple[np.ndarray, dict[str, np.ndarray]]:
    f = np.asarray(refs.frequency, dtype=float)
    if f.ndim != 1 or f.size == 0:
        raise StoreError("a reference set needs a non-empty 1-D frequency grid to be stored")
    found = {}
    for name in _ARRAYS:
        z = getattr(refs, name, None)
        if z is None:
            continue
        z = np.broadcast_to(np.asarray(z, dtype=complex), f.shape) if np.ndim(z) == 0 else z
        z = np.asarray(z, dtype=complex)
        if z.shape != f.shape:
            raise StoreError(
                f"the {name} array of the reference set has shape {z.shape}, "
                f"not that of its {f.size}-point frequency grid"
            )
        found[name] = z
    return f, found


def _uncertainties(refs: Any, f: np.ndarray) -> dict[str, list[float | None]]:
    """The set's per-standard uncertainty columns (its constructor checked their shapes)."""
    columns: dict[str, list[float | None]] = {}
    for name in _UNCERTAINTIES:
        u = getattr(refs, name)
        columns[name] = [None] * f.size if u is None else float_column(u)
    return columns


def save_reference_set(
    db: Database,
    refs: ReferenceSet,
    name: str | None = None,
    meter_id: int | None = None,
    fixture_id: int | None = None,
) -> int:
    """Store ``refs`` (header and every point in one transaction); return its id."""
    f, found = _arrays(refs)
    captured_at = getattr(refs, "captured_at", None)
    if captured_at is not None and captured_at.tzinfo is None:
        raise StoreError("the reference set's captured_at must be timezone-aware (UTC)")
    temperature = getattr(refs, "temperature", None)
    header = {
        "name": name if name is not None else (captured_at.isoformat() if captured_at else ""),
        "fixture_id": fixture_id,
        "meter_id": meter_id,
        "fixture": str(getattr(refs, "fixture", "") or ""),
        "meter": str(getattr(refs, "meter", "") or ""),
        "captured_at": captured_at,
        "temperature": None if temperature is None else float(temperature),
        "notes": str(getattr(refs, "notes", "") or ""),
        "method": str(getattr(refs, "method", "") or ""),
        "standards": ",".join(found),
        "points": int(f.size),
        "saved_at": utc_now(),
        "repeats": refs.repeats,
        "grid_spacing": refs.grid_spacing,
    }
    columns: dict[str, list] = {"frequency": f.tolist()}
    for std in _ARRAYS:
        z = found.get(std)
        columns[f"{std}_r"] = [None] * f.size if z is None else float_column(z.real)
        columns[f"{std}_x"] = [None] * f.size if z is None else float_column(z.imag)
    columns.update(_uncertainties(refs, f))
    sets, points = TABLES["reference_sets"], TABLES["reference_points"]

    def work(conn: Connection) -> int:
        ref_id = conn.execute(sets.insert().returning(sets.c.id), header).scalar_one()
        names = list(columns)
        rows = [
            {"reference_set_id": ref_id, "idx": i, **dict(zip(names, values, strict=True))}
            for i, values in enumerate(zip(*columns.values(), strict=True))
        ]
        conn.execute(points.insert(), rows)
        return ref_id

    return db.write("saving a reference set", work)


def _info(row: Any) -> ReferenceSetInfo:
    held = tuple(s for s in row.standards.split(",") if s)
    return ReferenceSetInfo(
        id=row.id,
        name=row.name,
        fixture=row.fixture,
        meter=row.meter,
        captured_at=row.captured_at,
        standards=tuple(s for s in STANDARDS if s in held),
        points=row.points,
        fixture_id=row.fixture_id,
        meter_id=row.meter_id,
        method=row.method,
        saved_at=row.saved_at,
    )


def list_reference_sets(db: Database) -> list[ReferenceSetInfo]:
    """Every stored reference set, oldest first."""
    sets = TABLES["reference_sets"]
    rows = db.read(
        "listing reference sets", lambda c: c.execute(select(sets).order_by(sets.c.id)).all()
    )
    return [_info(r) for r in rows]


def reference_set_info(db: Database, ref_id: int) -> ReferenceSetInfo:
    """The header of reference set ``ref_id``."""
    sets = TABLES["reference_sets"]
    row = db.read(
        "reading a reference set",
        lambda c: c.execute(select(sets).where(sets.c.id == ref_id)).first(),
    )
    if row is None:
        raise StoreError(f"there is no reference set {ref_id} in the store")
    return _info(row)


def load_reference_set(db: Database, ref_id: int) -> ReferenceSet:
    """Reference set ``ref_id`` as a :class:`acquire.compensation.ReferenceSet`.

    Raises StoreError when the set is not in the store, or when its stored points are not the
    ones its header counts (rows deleted or added by hand).
    """
    sets, points = TABLES["reference_sets"], TABLES["reference_points"]
    names = list(POINT_NAMES)

    def work(conn: Connection) -> tuple[Any, list]:
        head = conn.execute(select(sets).where(sets.c.id == ref_id)).first()
        query = select(points.c.idx, *(points.c[n] for n in names))
        rows = conn.execute(
            query.where(points.c.reference_set_id == ref_id).order_by(points.c.idx)
        ).all()
        return head, list(rows)

    head, rows = db.read("loading a reference set", work)
    if head is None:
        raise StoreError(f"there is no reference set {ref_id} in the store")
    return reference_set(ref_id, head._asdict(), rows)
