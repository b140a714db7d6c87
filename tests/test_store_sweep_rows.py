"""The sweep writer's rows, built with numpy and sent to the driver as they are, store exactly
what SQLAlchemy Core's own INSERT of the same points stores (the reference: a Core ``insert()``
of plain Python rows, NaN written as None by hand), on SQLite and on PostgreSQL.

A batch holds every awkward case: NaN readings (NULL), overrange readings (+inf and -inf kept),
flags, no correction (NULL corrected columns), and uncertainty missing for the whole batch or
for single points. The sweep's row is updated with its point count and a heartbeat time in the
same format SQLAlchemy Core writes (text with microseconds on SQLite, ``timestamptz`` on
PostgreSQL), so the store reads it back like the time Core wrote when the sweep began.
"""

from __future__ import annotations

import math
import re
from datetime import UTC, datetime

import numpy as np
import pytest
from sqlalchemy import text
from store_support import store_location

from acquire.store import open_store
from acquire.store.schema import TABLES
from acquire.store.sweeps import POINT_COLUMNS

NAN, INF = math.nan, math.inf


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request, tmp_path):
    with (
        store_location(request.param, tmp_path) as (url, schema),
        open_store(url, schema=schema) as opened,
    ):
        yield opened


def _batch() -> dict:
    """Six points with NaN, +-inf, flags, and an uncertainty missing at single points."""
    f = np.array([100.0, 215.5, 1e3, 4.6e4, 1e6, 1e7])
    raw = np.array(
        [4.8 + 0.2j, complex(NAN, NAN), complex(INF, 0.0), complex(-INF, INF), 0.0 - 0.0j, 1e-9j]
    )
    cor = np.array(
        [4.79 + 0.19j, complex(NAN, 1.0), complex(INF, -INF), complex(2.0, NAN), -0.0j, 3e-10j]
    )
    u = np.array([[0.01, 0.02], [NAN, NAN], [INF, 0.5], [0.1, NAN], [0.0, 0.0], [1e-12, 2e-12]])
    flags = ["", "invalid", "overrange", "overrange,beyond-accuracy", "", "beyond-accuracy"]
    return {"f": f, "raw": raw, "cor": cor, "u": u, "flags": flags}


def _core_rows(sweep_id: int, start: int, batch: dict, corrected: bool, known: bool) -> list:
    """The rows as plain Python, written one by one without numpy (the reference)."""

    def cell(v: float) -> float | None:
        return None if math.isnan(v) else float(v)

    rows = []
    for i in range(len(batch["f"])):
        z = complex(batch["raw"][i])
        c = complex(batch["cor"][i]) if corrected else complex(NAN, NAN)
        u = [float(x) for x in batch["u"][i]] if known else [NAN, NAN]
        values = [z.real, z.imag, c.real, c.imag, *u]
        row = {"sweep_id": sweep_id, "idx": start + i, "frequency": float(batch["f"][i])}
        row.update(zip(POINT_COLUMNS[1:], map(cell, values), strict=True))
        row["flags"] = batch["flags"][i] if known else ""
        rows.append(row)
    return rows


def _stored(store, sweep_id: int) -> list[tuple]:
    names = ", ".join(("idx", *POINT_COLUMNS, "flags"))
    query = text(f"SELECT {names} FROM sweep_points WHERE sweep_id = :s ORDER BY idx")
    with store.engine.connect() as conn:
        return [tuple(r) for r in conn.execute(query, {"s": sweep_id})]


def _same(a: list[tuple], b: list[tuple]) -> bool:
    """Equal row by row; a stored NaN (never wanted: NULL is) equals nothing."""
    if len(a) != len(b):
        return False
    for x, y in zip(a, b, strict=True):
        for p, q in zip(x, y, strict=True):
            if isinstance(p, float) and isinstance(q, float):
                if not (p == q and math.copysign(1, p) == math.copysign(1, q)):
                    return False
            elif p != q or type(p) is not type(q):
                return False
    return True


@pytest.mark.parametrize(("corrected", "known"), [(True, True), (False, False), (True, False)])
def test_sweep_rows_store_what_a_core_insert_stores(store, corrected, known):
    batch = _batch()
    writer = store.begin_sweep(dut="rows")
    # Two batches, so the second one's indexes start after the first.
    for _ in range(2):
        writer.add_points(
            batch["f"],
            batch["raw"],
            batch["cor"] if corrected else None,
            uncertainty=batch["u"] if known else None,
            flags=batch["flags"] if known else None,
        )
    writer.finish("complete")
    reference = store.begin_sweep(dut="rows, Core")
    rows = [_core_rows(reference.id, k * 6, batch, corrected, known) for k in range(2)]
    with store.engine.begin() as conn:
        conn.execute(TABLES["sweep_points"].insert(), rows[0] + rows[1])
    mine, theirs = _stored(store, writer.id), _stored(store, reference.id)
    assert len(mine) == 12
    assert _same(mine, theirs), (mine, theirs)
    # Spelled out for one point: NaN is NULL, infinities are kept.
    assert mine[1][1:5] == (215.5, None, None, None)
    assert mine[2][2] == INF and mine[3][2] == -INF and mine[3][3] == INF


def test_sweep_heartbeat_is_stored_as_core_stores_times(store):
    writer = store.begin_sweep(dut="heartbeat")
    began = datetime.now(UTC)
    writer.add_points(np.array([1e3, 2e3]), np.array([1 + 1j, 2 + 2j]))
    info = store.sweep_info(writer.id)
    assert info.points == 2
    assert info.last_write_at is not None and info.last_write_at.tzinfo is not None
    assert info.last_write_at >= info.started_at
    assert abs((info.last_write_at - began).total_seconds()) < 60
    if store.engine.dialect.name == "sqlite":
        query = text("SELECT started_at, last_write_at FROM sweeps WHERE id = :s")
        with store.engine.connect() as conn:
            started, last = conn.execute(query, {"s": writer.id}).one()
        # SQLAlchemy's SQLite text format, microseconds always written (as Core wrote started_at).
        form = r"\d{4}-\d\d-\d\d \d\d:\d\d:\d\d\.\d{6}"
        assert re.fullmatch(form, started) and re.fullmatch(form, last), (started, last)
