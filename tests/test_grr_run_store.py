"""Gauge R&R studies in the store on both engines, and the simulator's seating commands.

Store: every measurement written in its own transaction and loaded back bit for bit (NaN as
NULL and infinity kept, as the store's schema module documents), names kept as text, an
exception ending a study ``interrupted`` with its completed part. Simulator: behaviour
``drivers/simulator/COMMANDS.md`` states for ``SIMulate:PART`` and ``SIMulate:OPERator``.
"""

from __future__ import annotations

import math

import numpy as np
import pytest
from store_support import store_location

from acquire.errors import StoreError
from acquire.store import open_store
from acquire.store.grr_studies import GrrStudySettings
from drivers.meter import ImpedanceMeter
from drivers.simulator.seating import seating_message

NAMES = ("Ana", "<i>Ben</i>", "Chen \"C\" 'x'; --")


@pytest.fixture(params=["sqlite", "postgresql"])
def store(request, tmp_path):
    with (
        store_location(request.param, tmp_path) as (url, schema),
        open_store(url, schema=schema) as opened,
    ):
        yield opened


def _settings(**changes) -> GrrStudySettings:
    base = {"name": "study <1>", "quantity": "Ls@100000", "unit": "H", "parts": 2,
            "operator_names": NAMES, "trials": 2, "seed": 2**62 + 3, "tolerance": 2e-5}  # fmt: skip
    return GrrStudySettings(**(base | changes))


def test_measurements_load_back_exactly(store):
    rng = np.random.default_rng(11)
    values = 3.44e-4 * (1 + 0.01 * rng.standard_normal(12))
    values[3], values[7] = math.nan, math.inf
    rows = [(p, o, t) for t in (1, 2) for o in NAMES for p in (2, 1)]
    with store.begin_grr_study(_settings()) as writer:
        for (p, o, t), v in zip(rows, values, strict=True):
            writer.add(p, o, t, float(v), float(v) * 1e-3)
    info, data = store.load_grr_study(writer.id)
    assert (info.status, info.measurements, info.operators) == ("complete", 12, 3)
    assert info.operator_names == NAMES and info.seed == 2**62 + 3 and info.name == "study <1>"
    assert info.tolerance == 2e-5 and info.ended is not None
    assert data.part.tolist() == [r[0] for r in rows]
    assert data.operator.tolist() == [r[1] for r in rows]
    assert data.trial.tolist() == [r[2] for r in rows]
    assert np.array_equal(data.value, values, equal_nan=True)  # bit for bit, NaN and inf kept
    assert data.value.dtype == np.float64 and data.part.dtype == np.int64
    assert (data.quantity, data.unit) == ("Ls@100000", "H")
    u = [r.uncertainty for r in store.grr_measurements(writer.id)]
    assert np.array_equal(u, values * 1e-3, equal_nan=True)
    assert [s.id for s in store.list_grr_studies()] == [writer.id]


def test_an_exception_ends_the_study_interrupted_with_what_was_stored(store):
    with pytest.raises(KeyboardInterrupt), store.begin_grr_study(_settings()) as writer:
        writer.add(1, "Ana", 1, 3.4e-4, 1e-7)
        writer.add(2, "Ana", 1, 3.5e-4, 1e-7)
        raise KeyboardInterrupt
    info, data = store.load_grr_study(writer.id)
    assert info.status == "interrupted" and "KeyboardInterrupt" in info.note
    assert data.value.tolist() == [3.4e-4, 3.5e-4]
    with pytest.raises(StoreError, match="already interrupted"):
        writer.add(1, "Ben", 1, 3.4e-4, 1e-7)


def test_no_such_study_says_what_to_do(store):
    with pytest.raises(StoreError, match="no gauge R&R study 99"):
        store.load_grr_study(99)


def test_seating_commands_on_the_simulator(simulator):
    sim = simulator(dut="demo-coil", fixture="bench-leads", measure_time=0, noise=False, seed=9)
    f = np.array([1e5])
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        q = meter.session.query
        assert q("SIM:PART?") == "0" and q("SIM:OPER?") == '""'
        assert q(seating_message(4, 'Ben "B"')) == "1"
        assert q("SIM:PART?;SIM:OPER?") == '4;"Ben ""B"""'
        first = meter.sweep(f)
        assert q(seating_message(4, 'Ben "B"')) == "1"
        again = meter.sweep(f)
        assert q(seating_message(4, "Ana")) == "1"
        other = meter.sweep(f)
        sim.insert("demo-coil")  # something else put in: the seated part is out
        assert q("SIM:PART?") == "0"
        assert meter.errors() == []
    # the same part seated by the same operator differs only by the seating's own random part
    # (bench-leads.toml seating_repeat 0.05 %, 1 sigma; noise off): within 5 sigma of twice it
    assert abs(again[0].imag / first[0].imag - 1) < 5 * np.sqrt(2) * 5e-4
    off_b, off_a = sim.seating_offset('Ben "B"'), sim.seating_offset("Ana")
    assert off_b != off_a and off_b == sim.seating_offset('Ben "B"')
    want = (1 + off_a.inductance) / (1 + off_b.inductance)
    assert abs(other[0].imag / first[0].imag - want) < 5 * np.sqrt(2) * 5e-4
    assert sim.part_profile(4) == sim.part_profile(4) and sim.part_profile(4) != sim.part_profile(5)
