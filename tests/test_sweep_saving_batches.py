"""The saver writes a backlog of points in bounded batches, in order, each point once."""

from __future__ import annotations

import numpy as np

from acquire.plan import log_plan
from acquire.sweep_saving import LARGEST_BATCH, PointSaver
from acquire.sweep_state import SweepState


class Recorder:
    """A sweep writer that keeps the frequencies of each call (no store needed)."""

    def __init__(self) -> None:
        self.calls: list[np.ndarray] = []
        self.ended: tuple[str, str] | None = None

    def add_points(self, f, raw, corrected=None, uncertainty=None, flags=None) -> None:
        self.calls.append(np.array(f))

    def finish(self, status: str = "complete", note: str = "") -> None:
        self.ended = (status, note)


def test_a_backlog_goes_in_batches_of_at_most_the_largest_batch_in_order():
    plan = log_plan("100Hz", "10MHz", 5 * LARGEST_BATCH + 7)
    state = SweepState(plan)
    state.start()
    writer = Recorder()
    saver = PointSaver(writer, state, known=False, interval=60.0)
    saver.start()
    state.add(plan.frequencies, np.full(len(plan), 1 + 1j))  # all at once, as a fast list sweep
    report = saver.close("complete", "")
    sizes = [c.size for c in writer.calls]
    assert max(sizes) <= LARGEST_BATCH
    assert np.array_equal(np.concatenate(writer.calls), plan.frequencies)
    assert report.saved == len(plan) and report.complete and writer.ended == ("complete", "")
