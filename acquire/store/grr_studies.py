"""Gauge R&R studies in the store: the study, then one row per measurement as it is taken.

``Store.begin_grr_study(...)`` records a running study and returns a :class:`GrrStudyWriter`;
each ``add`` stores one measurement in one transaction, so an interrupted study keeps every
measurement completed before the stop. ``finish(status)`` ends it (``complete``,
``interrupted`` or ``failed``); a writer left by an exception marks the study ``interrupted``.
A study whose writer died is reported interrupted, as bias sweeps are
(:mod:`acquire.store.run_rows`).

``load_grr_study(id)`` gives the study's :class:`GrrStudyInfo` and its measurements as
:class:`acquire.msa.records.GrrData`, in the order they were taken.
"""

from __future__ import annotations

import json
from collections.abc import Sequence
from dataclasses import dataclass
from datetime import datetime

import numpy as np
from sqlalchemy import Connection, select, update

from acquire.errors import StoreError
from acquire.msa.records import GrrData
from acquire.store.engine import Database
from acquire.store.run_rows import (
    RunWriter,
    check_end,
    finish_run,
    holding,
    number,
    read_float,
    reported,
    writer_row,
)
from acquire.store.schema import TABLES, utc_now

WHAT = "gauge R&R study"


@dataclass(frozen=True)
class GrrStudySettings:
    """What a study is asked to do, as ``begin_grr_study`` records it."""

    name: str
    quantity: str
    unit: str
    parts: int
    operator_names: tuple[str, ...]
    trials: int
    seed: int
    tolerance: float | None = None
    plan_id: int | None = None
    plan_hash: str = ""
    station: str = ""
    meter: str = ""
    reference_set_id: int | None = None


@dataclass(frozen=True)
class GrrStudyInfo:
    """A stored study without its measurements.

    ``operators`` is how many operators take part, ``operator_names`` who, in the order given;
    ``tolerance`` is in the quantity's SI unit (None when none was given); ``measurements`` how
    many are stored; ``status`` as reported (a study whose writer died is ``interrupted``).
    """

    id: int
    name: str
    plan_hash: str
    quantity: str
    unit: str
    parts: int
    operators: int
    trials: int
    tolerance: float | None
    started: datetime
    ended: datetime | None
    status: str
    operator_names: tuple[str, ...] = ()
    seed: int = 0
    plan_id: int | None = None
    station: str = ""
    meter: str = ""
    reference_set_id: int | None = None
    measurements: int = 0
    note: str = ""


@dataclass(frozen=True)
class GrrMeasurement:
    """One stored measurement with its expanded uncertainty (k = 2) and time."""

    part: int
    operator: str
    trial: int
    order_index: int
    value: float
    uncertainty: float
    measured_at: datetime


def begin_grr_study(db: Database, settings: GrrStudySettings) -> GrrStudyWriter:
    """Record a new running study; return the writer for its measurements."""
    s = settings
    if s.parts < 1 or s.trials < 1 or not s.operator_names:
        raise StoreError("a gauge R&R study needs at least one part, operator and trial")
    table = TABLES["grr_studies"]
    row = {
        "name": s.name,
        "plan_id": s.plan_id,
        "plan_hash": s.plan_hash,
        "quantity": s.quantity,
        "unit": s.unit,
        "parts": int(s.parts),
        "operators": len(s.operator_names),
        "trials": int(s.trials),
        "operator_names": json.dumps(list(s.operator_names), ensure_ascii=False),
        "tolerance": number(s.tolerance),
        "seed": str(int(s.seed)),
        "station": s.station,
        "meter": s.meter,
        "reference_set_id": s.reference_set_id,
        "measurements": 0,
        **writer_row(),
    }
    study_id = db.write(
        f"starting a {WHAT}",
        lambda c: c.execute(table.insert().returning(table.c.id), row).scalar_one(),
    )
    return GrrStudyWriter(db, study_id)


class GrrStudyWriter(RunWriter):
    """Stores a study's measurements as they are taken; see the module docstring."""

    @property
    def count(self) -> int:
        """How many measurements are stored."""
        return self._count

    def add(
        self,
        part: int,
        operator: str,
        trial: int,
        value: float,
        u: float,
        order_index: int | None = None,
        at: datetime | None = None,
    ) -> None:
        """Store one measurement in one transaction (``order_index`` defaults to how many are
        stored already; ``at`` to now)."""
        if self._finished is not None:
            raise StoreError(f"{WHAT} {self._id} is already {self._finished}")
        studies, table = TABLES["grr_studies"], TABLES["grr_measurements"]
        start = self._count
        row = {
            "grr_study_id": self._id,
            "idx": start,
            "part": int(part),
            "operator": str(operator),
            "trial": int(trial),
            "order_index": start if order_index is None else int(order_index),
            "value": number(value),
            "uncertainty": number(u),
            "measured_at": at or utc_now(),
        }

        def work(conn: Connection) -> int:
            have = holding(conn, studies, self._id, "measurements", WHAT)
            if have not in (start, start + 1):
                raise StoreError(
                    f"{WHAT} {self._id} holds {have} measurements but this writer counts "
                    f"{start}: another program writes to it; begin a new study"
                )
            if have == start:  # not yet stored (else: sent again after a lost answer)
                conn.execute(table.insert(), [row])
            bump = update(studies).where(studies.c.id == self._id)
            conn.execute(bump.values(measurements=start + 1, last_write_at=utc_now()))
            return start + 1

        self._count = self._db.write(f"storing a {WHAT} measurement", work, idempotent=True)

    def finish(self, status: str = "complete", note: str = "") -> None:
        """End the study with ``status`` and ``note``."""
        check_end(status, WHAT, self._finished)
        studies, table = TABLES["grr_studies"], TABLES["grr_measurements"]
        finish_run(self._db, studies, self._id, {"status": status, "note": note}, table, [], WHAT)
        self._finished = status

    def _end(self, status: str, note: str) -> None:
        self.finish(status, note=note)


def _info(row, now: datetime, stale_after: float) -> GrrStudyInfo:
    status, note = reported(row, now, stale_after)
    return GrrStudyInfo(
        id=int(row.id),
        name=row.name,
        plan_hash=row.plan_hash,
        quantity=row.quantity,
        unit=row.unit,
        parts=int(row.parts),
        operators=int(row.operators),
        trials=int(row.trials),
        tolerance=None if row.tolerance is None else float(row.tolerance),
        started=row.started_at,
        ended=row.finished_at,
        status=status,
        operator_names=tuple(json.loads(row.operator_names)),
        seed=int(row.seed),
        plan_id=row.plan_id,
        station=row.station,
        meter=row.meter,
        reference_set_id=row.reference_set_id,
        measurements=int(row.measurements),
        note=note,
    )


def grr_study_info(db: Database, study_id: int, stale_after: float) -> GrrStudyInfo:
    """The study ``study_id``; StoreError naming what to do when there is none."""
    table = TABLES["grr_studies"]
    row = db.read(
        f"reading {WHAT} {study_id}",
        lambda c: c.execute(select(table).where(table.c.id == int(study_id))).one_or_none(),
    )
    if row is None:
        raise StoreError(
            f"there is no {WHAT} {study_id} in the store: `acquire grr list` shows the studies"
        )
    return _info(row, utc_now(), stale_after)


def list_grr_studies(db: Database, stale_after: float) -> list[GrrStudyInfo]:
    """Every study, oldest first."""
    table = TABLES["grr_studies"]
    rows = db.read(
        f"listing {WHAT}s", lambda c: c.execute(select(table).order_by(table.c.id)).all()
    )
    now = utc_now()
    return [_info(row, now, stale_after) for row in rows]


def grr_measurements(db: Database, study_id: int) -> list[GrrMeasurement]:
    """The study's measurements in the order they were taken."""
    table = TABLES["grr_measurements"]
    query = select(table).where(table.c.grr_study_id == int(study_id)).order_by(table.c.idx)
    rows = db.read(f"reading {WHAT} {study_id}", lambda c: c.execute(query).all())
    return [
        GrrMeasurement(
            int(r.part),
            r.operator,
            int(r.trial),
            int(r.order_index),
            read_float(r.value),
            read_float(r.uncertainty),
            r.measured_at,
        )  # fmt: skip
        for r in rows
    ]


def grr_data(info: GrrStudyInfo, rows: Sequence[GrrMeasurement]) -> GrrData:
    """The measurements as the analysis takes them."""
    return GrrData(
        part=np.array([r.part for r in rows], dtype=np.int64),
        operator=np.array([r.operator for r in rows], dtype=str),
        trial=np.array([r.trial for r in rows], dtype=np.int64),
        value=np.array([r.value for r in rows], dtype=float),
        quantity=info.quantity,
        unit=info.unit,
    )


def load_grr_study(db: Database, study_id: int, stale_after: float) -> tuple[GrrStudyInfo, GrrData]:
    """The study and its measurements (:class:`GrrData`, in the order they were taken)."""
    info = grr_study_info(db, study_id, stale_after)
    return info, grr_data(info, grr_measurements(db, study_id))
