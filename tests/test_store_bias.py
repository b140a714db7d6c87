"""Bias sweeps and temperature-rise runs in the store, on both engines: written point by point,
loaded back bit for bit, an interrupted or abandoned run kept with its completed part, and a
store of revision 0003 upgraded with every row kept.

The chokes are our own invention (tests/bias_support.py). NaN is stored as NULL and infinity as
itself, as the store's schema module documents.
"""

from __future__ import annotations

import math
import subprocess
import sys
from dataclasses import replace

import numpy as np
import pytest
from bias_support import bias_result, expected_drop, rise_result
from sqlalchemy import text
from store_support import store_location

from acquire.bias.records import COMPLETE, FAILED, INTERRUPTED, BiasSweepResult, RiseResult
from acquire.bias.saturation import DropCurrent
from acquire.errors import StoreError
from acquire.store import open_store
from acquire.store.schema import SCHEMA_REVISION


@pytest.fixture(params=["sqlite", "postgresql"])
def place(request, tmp_path):
    with store_location(request.param, tmp_path) as found:
        yield found


@pytest.fixture
def store(place):
    url, schema = place
    with open_store(url, schema=schema) as opened:
        yield opened


def _write(store, result: BiasSweepResult, count: int | None = None):
    writer = store.begin_bias_sweep(result.settings)
    c = result.curve
    for i in range(c.setpoint.size if count is None else count):
        corrected = None if c.corrected is None else c.corrected[i]
        writer.add_point(i, c.setpoint[i], c.applied[i], c.raw[i], corrected, c.ls[i], c.rs[i],
                         c.q[i])  # fmt: skip
    return writer


def _same(a: np.ndarray | None, b: np.ndarray | None) -> bool:
    if a is None or b is None:
        return a is None and b is None
    return a.dtype == b.dtype and np.array_equal(a, b, equal_nan=True)


def _same_sweep(got: BiasSweepResult, want: BiasSweepResult) -> None:
    for name in ("setpoint", "applied", "raw", "corrected", "ls", "rs", "q"):
        assert _same(getattr(got.curve, name), getattr(want.curve, name)), name
    assert np.array_equal(got.settings.currents, want.settings.currents)
    assert replace(got.settings, currents=None) == replace(want.settings, currents=None)
    assert (got.drops, got.status, got.note) == (want.drops, want.status, want.note)


def test_a_bias_sweep_loads_back_bit_for_bit(store):
    want = bias_result()
    c = want.curve
    # An invalid reading (NaN) and an overrange one (infinity) at two steps.
    raw, cor, q = c.raw.copy(), c.corrected.copy(), c.q.copy()
    raw[4], cor[4], q[4] = complex(math.nan, math.nan), complex(math.nan, math.nan), math.nan
    raw[7], q[7] = complex(math.inf, math.inf), math.inf
    want = replace(want, curve=replace(c, raw=raw, corrected=cor, q=q))
    writer = _write(store, want)
    assert writer.points == 13
    writer.finish(COMPLETE, want.drops, "")
    got = store.load_bias_sweep(writer.id)
    _same_sweep(got, want)
    assert got.started and got.ended >= got.started
    assert [d.reached for d in got.drops] == [True, True, True, False]
    assert got.drops[3] == DropCurrent(0.7, None, float(c.applied[-1]))
    # The stored drop current is the invented curve's own within the interpolation error.
    assert got.drops[1].current == pytest.approx(expected_drop(0.2), abs=0.02)


def test_a_sweep_without_references_loads_without_corrected_values(store):
    want = bias_result(corrected=False)
    writer = _write(store, want)
    writer.finish(FAILED, want.drops, "meter fault at step 13")
    got = store.load_bias_sweep(writer.id)
    assert got.curve.corrected is None
    _same_sweep(got, replace(want, status=FAILED, note="meter fault at step 13"))
    (info,) = store.list_bias_sweeps()
    assert (info.id, info.status, info.points, info.dut) == (writer.id, FAILED, 13, "choke 7")
    assert (info.frequency, info.maximum, info.supply) == (100e3, 6.5, "simulated source SN 12")
    assert info.drops == want.drops and not info.abandoned


def test_an_exception_leaves_the_completed_points_marked_interrupted(store):
    want = bias_result()
    with pytest.raises(KeyboardInterrupt), _write(store, want, count=5):
        raise KeyboardInterrupt
    (info,) = store.list_bias_sweeps()
    got = store.load_bias_sweep(info.id)
    assert (got.status, got.note, got.drops) == (INTERRUPTED, "stopped by KeyboardInterrupt", ())
    assert np.array_equal(got.curve.ls, want.curve.ls[:5])
    assert np.array_equal(got.curve.raw, want.curve.raw[:5])
    # A writer whose sweep another program closed (as abandoned) stores nothing more.
    late = _write(store, want, count=2)
    with store.engine.begin() as conn:
        conn.execute(text("UPDATE bias_sweeps SET status = 'interrupted' WHERE id = :i"),
                     {"i": late.id})  # fmt: skip
    with pytest.raises(StoreError, match="no longer running"):
        late.add_point(2, 1.0, 1.0, 1j, None, 1.0, 1.0, 1.0)
    with pytest.raises(StoreError, match="no longer running"):
        late.finish(COMPLETE)
    assert store.load_bias_sweep(late.id).curve.ls.size == 2


def test_a_point_sent_again_is_stored_once_and_points_go_in_order(store):
    want = bias_result()
    writer = _write(store, want, count=3)
    c = want.curve
    writer.add_point(2, c.setpoint[2], c.applied[2], c.raw[2], c.corrected[2], 1.0, 2.0, 3.0)
    with pytest.raises(StoreError, match="next is point 3, not 5"):
        writer.add_point(5, 1.0, 1.0, 1j, None, 1.0, 1.0, 1.0)
    writer.finish(INTERRUPTED, (), "stopped by the operator")
    got = store.load_bias_sweep(writer.id)
    assert np.array_equal(got.curve.ls, c.ls[:3])
    with pytest.raises(StoreError, match="already interrupted"):
        writer.add_point(3, 1.0, 1.0, 1j, None, 1.0, 1.0, 1.0)
    with pytest.raises(StoreError, match="finishes as"):
        store.begin_bias_sweep(want.settings).finish("done")
    with pytest.raises(StoreError, match="no bias sweep 99"):
        store.load_bias_sweep(99)


def _dead_pid() -> int:
    done = subprocess.run([sys.executable, "-c", "import os; print(os.getpid())"],
                          capture_output=True, text=True, check=True)  # fmt: skip
    return int(done.stdout)


def test_a_run_whose_writer_died_is_reported_interrupted(store):
    bias = _write(store, bias_result(), count=4)
    rise = store.begin_rise_run(rise_result().settings)
    rise.add_reading(0.0, 0.0825, 0.0)
    pid = _dead_pid()
    with store.engine.begin() as conn:
        for table in ("bias_sweeps", "rise_runs"):
            conn.execute(text(f"UPDATE {table} SET writer_pid = :pid"), {"pid": pid})
    (info,) = store.list_bias_sweeps()
    assert (info.status, info.recorded_status, info.abandoned) == (INTERRUPTED, "running", True)
    got = store.load_bias_sweep(bias.id)
    assert got.status == INTERRUPTED and "ended without finishing" in got.note
    assert got.curve.ls.size == 4
    (run,) = store.list_rise_runs()
    assert (run.status, run.abandoned, run.readings, run.final_rise) == (INTERRUPTED, True, 1, 0.0)
    assert store.load_rise_run(rise.id).status == INTERRUPTED


def _same_rise(got: RiseResult, want: RiseResult) -> None:
    for name in ("times", "resistance", "rise"):
        assert _same(getattr(got, name), getattr(want, name)), name
    strip = {"times": None, "resistance": None, "rise": None}
    assert replace(got, **strip) == replace(want, **strip)


def test_a_temperature_rise_run_loads_back_bit_for_bit(store):
    want = rise_result()
    writer = store.begin_rise_run(want.settings)
    for t, r, rise in zip(want.times[:7], want.resistance[:7], want.rise[:7], strict=True):
        writer.add_reading(t, r, rise)
    writer.finish(want)  # the five readings not streamed are stored with the result
    assert writer.readings == 12
    got = store.load_rise_run(writer.id)
    _same_rise(got, want)
    assert got.steps == ((3.0, 37.6), (3.1, 39.9)) and got.final_rise == want.final_rise
    (info,) = store.list_rise_runs()
    assert (info.id, info.status, info.readings, info.current, info.settled) == (
        writer.id,
        COMPLETE,
        12,
        3.1,
        True,
    )
    assert info.final_rise == want.final_rise and info.target_rise == 40.0
    with pytest.raises(StoreError, match="already complete"):
        writer.finish(want)


def test_an_interrupted_temperature_rise_run_keeps_its_readings(store):
    want = rise_result(readings=4)
    with pytest.raises(RuntimeError), store.begin_rise_run(want.settings) as writer:
        for t, r, rise in zip(want.times, want.resistance, want.rise, strict=True):
            writer.add_reading(t, r, rise)
        raise RuntimeError("meter fault")
    got = store.load_rise_run(writer.id)
    assert (got.status, got.note, got.settled, got.current) == (
        INTERRUPTED,
        "stopped by RuntimeError: meter fault",
        False,
        3.0,
    )
    assert math.isnan(got.r_cold) and math.isnan(got.t_cold) and got.steps == ()
    assert np.array_equal(got.rise, want.rise) and got.settings == want.settings
    with pytest.raises(StoreError, match="no temperature-rise run 42"):
        store.load_rise_run(42)


def test_a_revision_0003_store_upgrades_with_every_row_kept(place):
    from test_store_migration import _raw, _same_rows, check_example, dump, fill, make_revision

    url, schema = place
    make_revision(url, schema, "0003")
    fill(url, schema)
    before = dump(url, schema)
    assert "bias_sweeps" not in before
    with open_store(url, schema=schema) as store:
        assert store.migrated_from == "0003"
        check_example(store)
        writer = _write(store, bias_result())
        writer.finish(COMPLETE, bias_result().drops)
        store.begin_rise_run(rise_result().settings).finish(rise_result())
        _same_sweep(store.load_bias_sweep(writer.id), bias_result())
    after = dump(url, schema)
    assert len(after.pop("bias_points")) == 13 and len(after.pop("rise_readings")) == 12
    assert len(after.pop("bias_drops")) == 4
    assert len(after.pop("bias_sweeps")) == 1 and len(after.pop("rise_runs")) == 1
    _same_rows(before, after)
    assert _raw(url, schema, "SELECT DISTINCT bias_current FROM measurements") == [(None,)]
    assert _raw(url, schema, "SELECT version_num FROM alembic_version") == [(SCHEMA_REVISION,)]
