"""Bias sweeps in the store: what was asked, one row per bias step, and the drop currents.

``Store.begin_bias_sweep(settings)`` records a running sweep and returns a
:class:`BiasSweepWriter`; each ``add_point`` is one transaction, so a crash loses at most the
point being written. ``finish`` stores the drop currents and the end status (``complete``,
``interrupted`` or ``failed``) in one transaction. Used as a context manager, a writer left by
an exception marks the sweep ``interrupted``, as a frequency sweep's writer does.

Like a frequency sweep, a bias sweep records its writer's host and process id: a ``running``
sweep whose writer is gone (:func:`acquire.store.abandoned.writer_gone`) is *reported* as
interrupted (``BiasSweepInfo.abandoned``), its completed points kept.

:mod:`acquire.store.rise_runs` does the same for temperature-rise runs.
"""

from __future__ import annotations

import json
import math
from dataclasses import dataclass
from datetime import datetime
from typing import Any

import numpy as np
from sqlalchemy import Connection, select, update

from acquire.bias.records import BiasCurve, BiasSettings, BiasSweepResult
from acquire.bias.saturation import DropCurrent
from acquire.errors import StoreError
from acquire.store.engine import Database
from acquire.store.records import ReportedRun
from acquire.store.run_rows import (
    RunWriter,
    check_end,
    finish_run,
    holding,
    iso,
    number,
    read_float,
    reported,
    writer_row,
)
from acquire.store.schema import TABLES, utc_now

#: The numeric columns of a bias point, in order.
POINT_COLUMNS = (
    *("setpoint", "applied", "raw_r", "raw_x", "corrected_r", "corrected_x"),
    *("ls", "rs", "q"),
)


@dataclass(frozen=True)
class BiasSweepInfo(ReportedRun):
    """A stored bias sweep without its points (``Store.load_bias_sweep`` gives them).

    ``status`` is as reported: a sweep whose writer died says ``running`` in the database
    (``recorded_status``) but ``interrupted`` here, and ``abandoned`` is True.
    """

    id: int
    dut: str
    fixture: str
    meter: str
    supply: str
    frequency: float
    maximum: float | None
    reference_set_id: int | None
    status: str
    points: int
    drops: tuple[DropCurrent, ...]
    note: str
    started_at: datetime
    finished_at: datetime | None
    recorded_status: str


def begin_bias_sweep(db: Database, settings: BiasSettings) -> BiasSweepWriter:
    """Record a new running bias sweep with its settings; return the writer for its points."""
    currents = [float(c) for c in np.asarray(settings.currents, dtype=float).ravel()]
    if not all(math.isfinite(c) for c in currents + [float(d) for d in settings.drops]):
        raise StoreError("a bias sweep's currents and drops must be finite numbers")
    table = TABLES["bias_sweeps"]
    row = {
        "dut": settings.dut,
        "fixture": settings.fixture,
        "meter": settings.meter,
        "supply": settings.supply,
        "reference_set_id": settings.reference_set_id,
        "frequency": float(settings.frequency),
        "currents": json.dumps(currents),
        "drops": json.dumps([float(d) for d in settings.drops]),
        "maximum": number(settings.maximum),
        "step": number(settings.step),
        "dwell": number(settings.dwell),
        "energy": number(settings.energy),
        "confirmed": settings.confirmed,
        "points": 0,
        **writer_row(),
    }
    sweep_id = db.write(
        "starting a bias sweep",
        lambda c: c.execute(table.insert().returning(table.c.id), row).scalar_one(),
    )
    return BiasSweepWriter(db, sweep_id)


class BiasSweepWriter(RunWriter):
    """Stores the points of one bias sweep as they complete; finish it, or use it as a context
    manager (a normal exit finishes it ``complete``, an exception ``interrupted``)."""

    @property
    def points(self) -> int:
        """How many points are stored."""
        return self._count

    def add_point(
        self,
        i: int,
        setpoint: float,
        applied: float,
        raw: complex,
        corrected: complex | None,
        ls: float,
        rs: float,
        q: float,
    ) -> None:
        """Store bias step ``i`` (0, 1, 2, ... in order) in one transaction: the current asked
        and read back (A), the raw and corrected impedance (ohm; corrected None without a
        reference set) and Ls (H), Rs (ohm), Q. Sending step ``i`` again after a lost answer
        stores it once."""
        if self._finished is not None:
            raise StoreError(f"bias sweep {self._id} is already {self._finished}: begin a new one")
        cor = complex(math.nan, math.nan) if corrected is None else complex(corrected)
        z = complex(raw)
        values = (setpoint, applied, z.real, z.imag, cor.real, cor.imag, ls, rs, q)
        index = int(i)
        row: dict[str, Any] = {"bias_sweep_id": self._id, "idx": index}
        row.update(zip(POINT_COLUMNS, (number(v) for v in values), strict=True))
        sweeps, points = TABLES["bias_sweeps"], TABLES["bias_points"]

        def work(conn: Connection) -> int:
            have = holding(conn, sweeps, self._id, "points", "bias sweep")
            if index < have:
                return have
            if index != have:
                raise StoreError(
                    f"bias sweep {self._id} holds {have} points, so the next is point {have}, "
                    f"not {index}: add the points in order"
                )
            conn.execute(points.insert(), row)
            bump = update(sweeps).where(sweeps.c.id == self._id)
            conn.execute(bump.values(points=have + 1, last_write_at=utc_now()))
            return have + 1

        self._count = self._db.write("storing a bias point", work, idempotent=True)

    def finish(
        self, status: str = "complete", drops: tuple[DropCurrent, ...] = (), note: str = ""
    ) -> None:
        """Store the drop currents and mark the sweep ``complete``, ``interrupted`` or
        ``failed`` (with an optional note), in one transaction."""
        check_end(status, "bias sweep", self._finished)
        sweeps, table = TABLES["bias_sweeps"], TABLES["bias_drops"]
        rows = [
            {
                "bias_sweep_id": self._id,
                "idx": k,
                "drop_fraction": float(d.drop),
                "drop_current": number(d.current),
                "highest_current": number(d.highest),
            }
            for k, d in enumerate(drops)
        ]
        values = {"status": status, "note": note}
        finish_run(self._db, sweeps, self._id, values, table, rows, "bias sweep")
        self._finished = status

    def _end(self, status: str, note: str) -> None:
        self.finish(status, note=note)


def list_bias_sweeps(
    db: Database, stale_after: float, sweep_id: int | None = None
) -> list[BiasSweepInfo]:
    """Every stored bias sweep (or only ``sweep_id``), oldest first."""
    sweeps, drops = TABLES["bias_sweeps"], TABLES["bias_drops"]
    query = select(sweeps).order_by(sweeps.c.id)
    found = select(drops).order_by(drops.c.bias_sweep_id, drops.c.idx)
    if sweep_id is not None:
        query = query.where(sweeps.c.id == sweep_id)
        found = found.where(drops.c.bias_sweep_id == sweep_id)

    def work(conn: Connection) -> tuple[list, list]:
        return list(conn.execute(query).all()), list(conn.execute(found).all())

    rows, drop_rows = db.read("listing bias sweeps", work)
    by_sweep: dict[int, list[DropCurrent]] = {}
    for d in drop_rows:
        current = None if d.drop_current is None else float(d.drop_current)
        found_drop = DropCurrent(d.drop_fraction, current, read_float(d.highest_current))
        by_sweep.setdefault(d.bias_sweep_id, []).append(found_drop)
    now = utc_now()
    out = []
    for r in rows:
        status, note = reported(r, now, stale_after)
        out.append(
            BiasSweepInfo(
                id=r.id,
                dut=r.dut,
                fixture=r.fixture,
                meter=r.meter,
                supply=r.supply,
                frequency=r.frequency,
                maximum=r.maximum,
                reference_set_id=r.reference_set_id,
                status=status,
                points=r.points,
                drops=tuple(by_sweep.get(r.id, ())),
                note=note,
                started_at=r.started_at,
                finished_at=r.finished_at,
                recorded_status=r.status,
            )
        )
    return out


def load_bias_sweep(db: Database, sweep_id: int, stale_after: float) -> BiasSweepResult:
    """Bias sweep ``sweep_id`` as it was stored: settings, curve (maybe partial), drops.

    ``curve.corrected`` is None when no point holds a corrected value and the sweep names no
    reference set; NULL values read back as NaN.
    """
    sweeps, points = TABLES["bias_sweeps"], TABLES["bias_points"]
    head = select(sweeps).where(sweeps.c.id == sweep_id)
    query = select(*(points.c[n] for n in POINT_COLUMNS)).where(points.c.bias_sweep_id == sweep_id)

    def work(conn: Connection) -> tuple[Any, list]:
        return conn.execute(head).one_or_none(), list(conn.execute(query.order_by(points.c.idx)))

    row, point_rows = db.read("reading a bias sweep", work)
    if row is None:
        raise StoreError(f"there is no bias sweep {sweep_id} in the store")
    info = list_bias_sweeps(db, stale_after, sweep_id)[0]
    table = np.array([[read_float(v) for v in p] for p in point_rows], dtype=float).reshape(
        len(point_rows), len(POINT_COLUMNS)
    )
    column = dict(zip(POINT_COLUMNS, table.T, strict=True))
    corrected = as_complex(column["corrected_r"], column["corrected_x"])
    no_correction = row.reference_set_id is None and bool(np.isnan(corrected).all())
    curve = BiasCurve(
        setpoint=column["setpoint"],
        applied=column["applied"],
        raw=as_complex(column["raw_r"], column["raw_x"]),
        corrected=None if no_correction else corrected,
        ls=column["ls"],
        rs=column["rs"],
        q=column["q"],
    )
    settings = BiasSettings(
        currents=np.array(json.loads(row.currents), dtype=float),
        frequency=float(row.frequency),
        drops=tuple(float(d) for d in json.loads(row.drops)),
        maximum=read_float(row.maximum),
        step=read_float(row.step),
        dwell=read_float(row.dwell),
        energy=read_float(row.energy),
        confirmed=row.confirmed,
        supply=row.supply,
        dut=row.dut,
        fixture=row.fixture,
        meter=row.meter,
        reference_set_id=row.reference_set_id,
    )
    return BiasSweepResult(
        settings=settings,
        curve=curve,
        drops=info.drops,
        status=info.status,
        note=info.note,
        started=iso(info.started_at),
        ended=iso(info.finished_at),
    )


def as_complex(real: np.ndarray, imag: np.ndarray) -> np.ndarray:
    """R and X as complex values, each part kept as it is (``r + 1j * x`` would turn an
    infinite X into a NaN R)."""
    z = np.empty(real.shape, dtype=complex)
    z.real, z.imag = real, imag
    return z
