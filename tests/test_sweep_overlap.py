"""A chunk is corrected while the meter measures the next block, and nothing is lost by it."""

from __future__ import annotations

import threading

import numpy as np

from acquire.plan import log_plan
from acquire.sweep import run_sweep


class BlockMeter:
    """Answers each block at once with Z = 1 + jf/1 kHz, and says when a block was asked for."""

    frequency_range = (1.0, 1e9)

    def __init__(self) -> None:
        self.asked: list[threading.Event] = [threading.Event() for _ in range(100)]
        self.calls = 0

    def sweep(self, frequencies, on_points=None):
        f = np.asarray(frequencies, dtype=float)
        self.asked[self.calls].set()
        self.calls += 1
        z = 1 + 1j * f / 1e3
        if on_points is not None:
            on_points(f.copy(), z)
        return z


class WaitingReferences:
    """A correction (the identity) that notes whether the next block was asked for meanwhile."""

    def __init__(self, meter: BlockMeter, grid: np.ndarray) -> None:
        self.frequency = grid
        self.meter = meter
        self.chunks = 0
        self.overlapped: list[bool] = []

    def correct(self, f, z):
        self.chunks += 1
        if self.chunks < 4:  # the plan's 4 blocks: the last has no next block
            self.overlapped.append(self.meter.asked[self.chunks].wait(5.0))
        return z


def test_the_next_block_is_asked_for_while_a_chunk_is_corrected():
    plan = log_plan("100Hz", "10kHz", 32)
    meter = BlockMeter()
    refs = WaitingReferences(meter, plan.frequencies)
    outcome = run_sweep(meter, plan, refs, block=8, uncertainty=None)
    assert outcome.status == "complete"
    assert refs.overlapped == [True, True, True]
    assert np.array_equal(outcome.frequency, plan.frequencies)
    assert np.array_equal(outcome.corrected, 1 + 1j * plan.frequencies / 1e3)
