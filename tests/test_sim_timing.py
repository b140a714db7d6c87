"""A simulated measurement takes its duration in total, its own computing included.

The time is checked as a mechanism, never by the wall clock (shared machines are noisy): the
instrument's clock is replaced by one that steps by a set computing time, and its sleep by one
that records what it was asked to wait. The expected waits are computed: duration (the
``SIMulate:TIME`` override per point, times the points) minus the computing time, never below 0.
"""

from __future__ import annotations

import asyncio

import numpy as np
import pytest

from drivers.simulator.instrument import Instrument

FREQUENCIES = (1e3, 1e4, 1e5, 1e6)


class SteppingClock:
    """Each reading is ``step`` seconds after the one before."""

    def __init__(self, step: float) -> None:
        self.now, self.step = 100.0, step

    def __call__(self) -> float:
        now = self.now
        self.now += self.step
        return now


def instrument(per_point: float, computing: float, waits: list[float]) -> Instrument:
    meter = Instrument(dut="air-core-coil", measure_time=per_point, seed=3)
    meter.clock = SteppingClock(computing)

    async def record(seconds: float) -> None:
        waits.append(seconds)

    meter.sleep = record
    meter.settings.mode = "LIST"
    meter.settings.frequency_list = FREQUENCIES
    return meter


async def list_reading(meter: Instrument):
    task = meter.initiate()
    assert task is not None
    return await task


@pytest.mark.parametrize(
    ("per_point", "computing", "expected"),
    [
        (0.005, 0.003, 4 * 0.005 - 0.003),  # computed: 4 points x 5 ms, less 3 ms of computing
        (0.005, 0.5, 0.0),  # computing longer than the measurement: no wait, never negative
        (0.0, 0.001, 0.0),
    ],
)
def test_a_list_reading_sleeps_only_what_its_computing_left(per_point, computing, expected):
    waits: list[float] = []
    meter = instrument(per_point, computing, waits)
    reading = asyncio.run(list_reading(meter))
    assert waits == [pytest.approx(expected, abs=1e-12)]
    assert reading.z.shape == (len(FREQUENCIES),) and meter.last is reading


def test_a_dc_reading_sleeps_only_what_its_computing_left():
    waits: list[float] = []
    meter = instrument(0.010, 0.004, waits)

    async def dc() -> float:
        return await meter.start_dc()

    value = asyncio.run(dc())
    assert waits == [pytest.approx(0.010 - 0.004, abs=1e-12)]  # computed: 10 ms less 4 ms
    assert np.isfinite(value)


def test_an_aborted_reading_leaves_the_noise_as_it_was():
    """Draws are counted when a reading completes (computed first, counted at the end)."""
    fresh = Instrument(dut="air-core-coil", measure_time=0.0, seed=3)
    fresh.settings.mode, fresh.settings.frequency_list = "LIST", FREQUENCIES
    expected = asyncio.run(list_reading(fresh)).z

    meter = Instrument(dut="air-core-coil", measure_time=0.0, seed=3)
    meter.settings.mode, meter.settings.frequency_list = "LIST", FREQUENCIES
    stopped = asyncio.Event()

    async def hang(seconds: float) -> None:
        await stopped.wait()

    async def abort_then_measure():
        meter.sleep = hang
        task = meter.initiate()
        await asyncio.sleep(0)  # the reading is computed and now waits out its time
        meter.abort()
        with pytest.raises(asyncio.CancelledError):
            await task
        meter.sleep = asyncio.sleep
        return await list_reading(meter)

    np.testing.assert_array_equal(asyncio.run(abort_then_measure()).z, expected)
