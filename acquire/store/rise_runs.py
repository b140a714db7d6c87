"""Temperature-rise runs in the store: the settings, one row per resistance reading, the result.

``Store.begin_rise_run(settings)`` records a running run and returns a :class:`RiseWriter`;
each ``add_reading`` is one transaction. ``finish(result)`` stores the cold resistance, the
current held, whether the rise settled, the currents tried and the end status in one
transaction (with any of the result's readings the writer had not stored yet). A writer left by
an exception marks the run ``interrupted``; a run whose writer died is reported interrupted,
as bias sweeps are (:mod:`acquire.store.run_rows`).

An unfinished run loads with NaN cold resistance and temperature, ``settled`` False, and the
current asked as the current held.
"""

from __future__ import annotations

import json
from dataclasses import dataclass
from datetime import datetime
from typing import Any

import numpy as np
from sqlalchemy import Connection, select, update

from acquire.bias.records import RiseResult, RiseSettings
from acquire.errors import StoreError
from acquire.store.engine import Database
from acquire.store.records import ReportedRun
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

#: The columns of a reading, in order: seconds since the current started, ohm, kelvin.
READING_COLUMNS = ("elapsed", "resistance", "rise")


@dataclass(frozen=True)
class RiseRunInfo(ReportedRun):
    """A stored temperature-rise run without its readings (``Store.load_rise_run`` gives them).

    ``current`` is the current held (the one asked for while the run has not finished),
    ``final_rise`` the settled rise (K) when the run settled, else the last reading's (None
    without readings). ``status`` is as
    reported: a run whose writer died is ``interrupted`` here and ``abandoned`` is True.
    """

    id: int
    dut: str
    meter: str
    supply: str
    current: float
    ambient: float
    target_rise: float | None
    settled: bool | None
    final_rise: float | None
    readings: int
    status: str
    note: str
    started_at: datetime
    finished_at: datetime | None
    recorded_status: str


def begin_rise_run(db: Database, settings: RiseSettings) -> RiseWriter:
    """Record a new running temperature-rise run; return the writer for its readings."""
    table = TABLES["rise_runs"]
    row = {
        "dut": settings.dut,
        "meter": settings.meter,
        "supply": settings.supply,
        "current_asked": number(settings.current),
        "ambient": number(settings.ambient),
        "time_limit": number(settings.time_limit),
        "settle_window": number(settings.settle_window),
        "settle_tolerance": number(settings.settle_tolerance),
        "target_rise": number(settings.target_rise),
        "steps": "[]",
        "readings": 0,
        **writer_row(),
    }
    run_id = db.write(
        "starting a temperature-rise run",
        lambda c: c.execute(table.insert().returning(table.c.id), row).scalar_one(),
    )
    return RiseWriter(db, run_id)


class RiseWriter(RunWriter):
    """Stores the readings of one temperature-rise run as they come; finish it with the result,
    or use it as a context manager (an exception marks the run ``interrupted``; a normal exit
    without ``finish`` marks it ``complete`` with what it holds)."""

    @property
    def readings(self) -> int:
        """How many readings are stored."""
        return self._count

    def add_reading(self, t: float, r: float, rise: float) -> None:
        """Store one reading in one transaction: ``t`` seconds after the current started, the
        winding's DC resistance ``r`` (ohm) and its rise (K)."""
        if self._finished is not None:
            raise StoreError(f"temperature-rise run {self._id} is already {self._finished}")
        self._count = self._store([(t, r, rise)], self._count)

    def _store(self, readings: list[tuple[float, float, float]], start: int) -> int:
        runs, table = TABLES["rise_runs"], TABLES["rise_readings"]
        rows = [
            {"rise_run_id": self._id, "idx": start + k}
            | dict(zip(READING_COLUMNS, map(number, values), strict=True))
            for k, values in enumerate(readings)
        ]

        def work(conn: Connection) -> int:
            have = holding(conn, runs, self._id, "readings", "temperature-rise run")
            if not start <= have <= start + len(rows):
                raise StoreError(
                    f"temperature-rise run {self._id} holds {have} readings but this writer "
                    f"counts {start}: another program writes to it; begin a new run"
                )
            new = rows[have - start :]
            if new:
                conn.execute(table.insert(), new)
            bump = update(runs).where(runs.c.id == self._id)
            conn.execute(bump.values(readings=have + len(new), last_write_at=utc_now()))
            return have + len(new)

        return self._db.write("storing a temperature-rise reading", work, idempotent=True)

    def finish(
        self, result: RiseResult, status: str | None = None, note: str | None = None
    ) -> None:
        """Store the run's result and end it with ``result.status`` (or ``status``) and
        ``result.note`` (or ``note``). Readings of ``result`` beyond those already stored are
        stored first."""
        status = result.status if status is None else status
        note = result.note if note is None else note
        check_end(status, "temperature-rise run", self._finished)
        times = np.asarray(result.times, dtype=float)
        if self._count < times.size:
            tail = zip(
                times[self._count :].tolist(),
                np.asarray(result.resistance, dtype=float)[self._count :].tolist(),
                np.asarray(result.rise, dtype=float)[self._count :].tolist(),
                strict=True,
            )
            self._count = self._store(list(tail), self._count)
        steps = [[float(c), float(r)] for c, r in result.steps]
        values = {
            "status": status,
            "note": note,
            "r_cold": number(result.r_cold),
            "t_cold": number(result.t_cold),
            "held_current": number(result.current),
            "settled": bool(result.settled),
            "steps": json.dumps(steps),
        }
        runs, table = TABLES["rise_runs"], TABLES["rise_readings"]
        finish_run(self._db, runs, self._id, values, table, [], "temperature-rise run")
        self._finished = status

    def _end(self, status: str, note: str) -> None:
        runs, table = TABLES["rise_runs"], TABLES["rise_readings"]
        what = "temperature-rise run"
        check_end(status, what, self._finished)
        finish_run(self._db, runs, self._id, {"status": status, "note": note}, table, [], what)
        self._finished = status


def _info(row: Any, last_rise: float | None, now: datetime, stale_after: float) -> RiseRunInfo:
    status, note = reported(row, now, stale_after)
    held = row.held_current if row.held_current is not None else row.current_asked
    steps = json.loads(row.steps or "[]")
    if row.settled and steps:
        last_rise = float(steps[-1][1])
    return RiseRunInfo(
        id=row.id,
        dut=row.dut,
        meter=row.meter,
        supply=row.supply,
        current=read_float(held),
        ambient=read_float(row.ambient),
        target_rise=row.target_rise,
        settled=row.settled,
        final_rise=last_rise,
        readings=row.readings,
        status=status,
        note=note,
        started_at=row.started_at,
        finished_at=row.finished_at,
        recorded_status=row.status,
    )


def list_rise_runs(
    db: Database, stale_after: float, run_id: int | None = None
) -> list[RiseRunInfo]:
    """Every stored temperature-rise run (or only ``run_id``), oldest first."""
    runs, table = TABLES["rise_runs"], TABLES["rise_readings"]
    query = select(runs).order_by(runs.c.id)
    last = select(table.c.rise_run_id, table.c.rise).join(
        runs,
        (runs.c.id == table.c.rise_run_id) & (table.c.idx == runs.c.readings - 1),
    )
    if run_id is not None:
        query = query.where(runs.c.id == run_id)
        last = last.where(runs.c.id == run_id)

    def work(conn: Connection) -> tuple[list, dict[int, float | None]]:
        rises = {r.rise_run_id: r.rise for r in conn.execute(last)}
        return list(conn.execute(query)), rises

    rows, rises = db.read("listing temperature-rise runs", work)
    now = utc_now()
    return [
        _info(r, None if r.readings == 0 else read_float(rises.get(r.id)), now, stale_after)
        for r in rows
    ]


def load_rise_run(db: Database, run_id: int, stale_after: float) -> RiseResult:
    """Temperature-rise run ``run_id`` as stored (NULL values read back as NaN)."""
    runs, table = TABLES["rise_runs"], TABLES["rise_readings"]
    head = select(runs).where(runs.c.id == run_id)
    query = select(*(table.c[n] for n in READING_COLUMNS)).where(table.c.rise_run_id == run_id)

    def work(conn: Connection) -> tuple[Any, list]:
        return conn.execute(head).one_or_none(), list(conn.execute(query.order_by(table.c.idx)))

    row, readings = db.read("reading a temperature-rise run", work)
    if row is None:
        raise StoreError(f"there is no temperature-rise run {run_id} in the store")
    status, note = reported(row, utc_now(), stale_after)
    values = np.array([[read_float(v) for v in r] for r in readings], dtype=float)
    values = values.reshape(len(readings), len(READING_COLUMNS))
    settings = RiseSettings(
        current=read_float(row.current_asked),
        ambient=read_float(row.ambient),
        time_limit=read_float(row.time_limit),
        settle_window=read_float(row.settle_window),
        settle_tolerance=read_float(row.settle_tolerance),
        target_rise=row.target_rise,
        dut=row.dut,
        meter=row.meter,
        supply=row.supply,
    )
    held = row.held_current if row.held_current is not None else row.current_asked
    return RiseResult(
        settings=settings,
        r_cold=read_float(row.r_cold),
        t_cold=read_float(row.t_cold),
        current=read_float(held),
        times=values[:, 0],
        resistance=values[:, 1],
        rise=values[:, 2],
        settled=bool(row.settled),
        status=status,
        steps=tuple((float(c), float(r)) for c, r in json.loads(row.steps)),
        note=note,
    )
