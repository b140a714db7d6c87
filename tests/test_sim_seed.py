"""A seed reproduces every value bit for bit, however the points are grouped into messages.

No outside reference is needed: the check is that two runs with the same seed store exactly the
same numbers (computed: compared with ``np.testing.assert_array_equal``), while a different seed
gives different ones (so the comparison is not vacuous).
"""

from __future__ import annotations

import io

import numpy as np
import pytest
from rich.console import Console

from acquire.demo import SWEEP_STEPS, run_demo
from acquire.store import open_store
from drivers.meter import ImpedanceMeter

F = np.geomspace(100.0, 10e6, 23)


def sweep_in_blocks(sim, size: int | None, mode: str, seed: int = 1) -> np.ndarray:
    """``F`` measured with noise in blocks of ``size`` points (None: all at once)."""
    sim.reseed(seed)
    step = size or F.size
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        parts = [meter.sweep(F[i : i + step], mode=mode) for i in range(0, F.size, step)]
    return np.concatenate(parts)


@pytest.fixture(scope="module")
def sim_options():
    return {"noise": True, "seed": 1}


def test_grouping_and_mode_do_not_change_the_noise(sim):
    reference = sweep_in_blocks(sim, None, "list")
    for size in (1, 7, None):
        for mode in ("list", "points"):
            np.testing.assert_array_equal(sweep_in_blocks(sim, size, mode), reference)
    assert not np.array_equal(sweep_in_blocks(sim, None, "list", seed=2), reference)
    assert np.all(reference != sim.seen_impedance(F))  # noise is on


def test_a_dc_reading_between_blocks_does_not_shift_the_noise(sim):
    reference = sweep_in_blocks(sim, None, "list")
    sim.reseed(1)
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        first = meter.sweep(F[:10])
        meter.dc_resistance()
        rest = meter.sweep(F[10:])
    np.testing.assert_array_equal(np.concatenate([first, rest]), reference)


def _stored(url: str) -> dict[str, np.ndarray]:
    with open_store(url) as store:
        (info,) = store.list_sweeps()
        points = store.sweep_points(info.id)
    columns = ("frequency", "raw_r", "raw_x", "corrected_r", "corrected_x")
    return {c: points[c].to_numpy() for c in columns}


def test_demo_with_and_without_live_view_stores_the_same_values(tmp_path):
    plain = f"sqlite:///{tmp_path / 'plain.db'}"
    live = f"sqlite:///{tmp_path / 'live.db'}"
    quiet = Console(file=io.StringIO(), width=120)
    run_demo(plain, live=False, seed=1, measure_time=0, console=quiet, steps=SWEEP_STEPS)
    console = Console(file=io.StringIO(), force_terminal=True, width=150, height=50)
    run_demo(live, live=True, seed=1, measure_time=0.002, console=console, steps=SWEEP_STEPS)
    a, b = _stored(plain), _stored(live)
    assert a["frequency"].size == 201
    for column in a:
        np.testing.assert_array_equal(a[column], b[column], err_msg=column)
