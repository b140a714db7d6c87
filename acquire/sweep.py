"""Running a sweep: drive the meter over a frequency plan, correct each point, stream it on.

:func:`run_sweep` asks the meter for the plan's frequencies (``meter.sweep(frequencies,
on_points=...)`` of :class:`drivers.meter.ImpedanceMeter`), corrects every chunk of points that
arrives with the reference set in use, evaluates each point's expanded uncertainty and flags
(:class:`acquire.sweep_uncertainty.PointUncertainty`, vectorised per chunk) and appends it to a
:class:`acquire.sweep_state.SweepState` for the live view. A
:class:`acquire.sweep_saving.PointSaver` writes the points to the store's sweep writer on a
thread of its own: those that arrived since the last write go in one transaction at most every
``flush_interval`` seconds and at the end, so a fast meter is not held up by one transaction
per point, a crash loses at most that interval, and a store that is out of reach for a while
only delays the writing (the points wait in memory and are written once it is back).

Ctrl-C (or SIGTERM and SIGHUP, :mod:`acquire.signals`) and meter faults end the sweep the same
way: the points completed so far are written, the sweep is marked ``interrupted`` with the
reason, and the outcome says so. A store that never came back is reported point for point
(measured, saved). Any other error (a bug) also marks the sweep interrupted, then propagates.
"""

from __future__ import annotations

import queue
import threading
import time
from collections.abc import Callable, Iterator
from dataclasses import dataclass
from typing import Any, Protocol

import numpy as np

from acquire.compensation.interpolation import END_TOLERANCE
from acquire.errors import CompensationError, InputError, StoreError
from acquire.plan import FrequencyPlan, check_range
from acquire.signals import held, leave_stops_to_the_main_thread, stop_reason
from acquire.sweep_saving import PointSaver, SaveReport
from acquire.sweep_state import SweepState
from acquire.sweep_uncertainty import PointUncertainty
from acquire.uncertainty import expanded, mean_of_repeats
from acquire.units import format_si
from drivers.errors import InstrumentError


class Meter(Protocol):
    """What a sweep needs of a meter (:class:`drivers.meter.ImpedanceMeter` provides it)."""

    @property
    def frequency_range(self) -> tuple[float, float]: ...

    def sweep(self, frequencies: np.ndarray, on_points: Callable | None = None) -> np.ndarray: ...


class Writer(Protocol):
    """What a sweep needs of the store's sweep writer (``store.begin_sweep(...)``)."""

    id: int

    def add_points(
        self,
        frequency: np.ndarray,
        raw_z: np.ndarray,
        corrected_z: np.ndarray | None,
        uncertainty: np.ndarray | None = None,
        flags: Any = None,
    ) -> None: ...

    def finish(self, status: str = "complete", note: str = "") -> None: ...


@dataclass(frozen=True, eq=False)
class SweepOutcome:
    """What a sweep produced: the completed points, how it ended, and where it was stored.

    ``corrected`` is None when no reference set was used. ``uncertainty`` is the (n, 2)
    expanded uncertainty (k = 2, ohm) [U_R, U_X] of the shown (corrected, else raw) impedance,
    NaN where unknown, and ``cov`` the (n, 2, 2) covariance of R and X (ohm²) it comes from;
    ``flags`` the (n,) flags texts ('' for a measured value, else words
    such as ``beyond-accuracy``). ``status`` is ``"complete"`` or
    ``"interrupted"``; ``reason`` says why it stopped early (the driver's message for a meter
    fault); ``error`` is the exception that stopped it, if any. ``saved`` is how many of the
    points the store holds (None without a store), and ``store_problem`` why the rest, or the
    sweep's end, could not be written ('' when everything was); ``store_waits`` counts the
    writes that had to wait for the store.
    """

    frequency: np.ndarray
    raw: np.ndarray
    corrected: np.ndarray | None
    status: str
    planned: int
    reason: str = ""
    sweep_id: int | None = None
    error: BaseException | None = None
    flags: np.ndarray | None = None
    cov: np.ndarray | None = None
    saved: int | None = None
    store_problem: str = ""
    store_waits: int = 0

    @property
    def uncertainty(self) -> np.ndarray | None:
        """The (n, 2) expanded uncertainty [U_R, U_X] that ``cov`` gives (None without it)."""
        return None if self.cov is None else expanded(self.cov)

    @property
    def interrupted(self) -> bool:
        return self.status != "complete"

    @property
    def shown(self) -> np.ndarray:
        """Corrected impedance when there is one, else raw."""
        return self.raw if self.corrected is None else self.corrected

    def message(self, where: str = "") -> str:
        """One line for the operator: how the sweep ended and where its points are."""
        place = f" in {where}" if where else ""
        stored = f" as sweep {self.sweep_id}{place}" if self.sweep_id is not None else ""
        n = self.frequency.size
        if self.saved is not None and self.store_problem:
            lost = n - self.saved
            what = f"{lost} not saved" if lost else "its end not recorded"
            return (
                f"sweep interrupted ({self.reason}): {n} of {self.planned} points measured, "
                f"{self.saved} saved{stored}; {what} ({self.store_problem}); the store marks "
                "the sweep interrupted once this program has ended"
            )
        if not self.interrupted:
            late = (
                "; the store was out of reach for a while and the points waited in memory"
                if self.store_waits
                else ""
            )
            return f"sweep complete: {n} points saved{stored}{late}"
        return (
            f"sweep interrupted ({self.reason}): {n} of {self.planned} points saved{stored}, "
            "marked interrupted"
        )


def check_coverage(plan: FrequencyPlan, references: Any) -> None:
    """Refuse a plan that reaches outside the reference set's grid (nothing is extrapolated).

    The ends are allowed the same rounding as the correction itself allows
    (:data:`acquire.compensation.interpolation.END_TOLERANCE`), so a plan that passes here is
    never refused part-way through the sweep.
    """
    grid = np.asarray(references.frequency, dtype=float)
    low, high = float(grid[0]), float(grid[-1])
    if plan.start < low * (1 - END_TOLERANCE) or plan.stop > high * (1 + END_TOLERANCE):
        raise CompensationError(
            f"the reference set covers {format_si(low, 'Hz')} to {format_si(high, 'Hz')} but the "
            f"plan spans {format_si(plan.start, 'Hz')} to {format_si(plan.stop, 'Hz')}; narrow "
            "the plan or capture references over the whole span"
        )


class _Sink:
    """Receives chunks from the driver: corrects them and appends them to the state."""

    def __init__(
        self,
        state: SweepState,
        references: Any,
        on_progress: Callable[[], None] | None,
        uncertainty: PointUncertainty | None,
    ) -> None:
        self.state = state
        self.references = references
        self.uncertainty = uncertainty
        self.on_progress = on_progress

    def __call__(self, f_chunk: np.ndarray, z_chunk: np.ndarray, u_m: Any = None) -> None:
        f = np.asarray(f_chunk, dtype=float).reshape(-1)
        z = np.asarray(z_chunk, dtype=complex).reshape(-1)
        corrected, values = None, None
        if self.uncertainty is not None:
            values = self.uncertainty.evaluate(f, z, self.references, u_m)
            corrected = values.corrected
        elif self.references is not None:
            with np.errstate(all="ignore"):
                corrected = np.asarray(self.references.correct(f, z), dtype=complex)
        self.state.add(f, z, corrected, values)
        if self.on_progress is not None:
            self.on_progress()


class _Handoff:
    """Runs a :class:`_Sink` on a thread of its own, chunk after chunk in the order received.

    The driver calls :meth:`hold` with each chunk as it arrives; :meth:`release` (called just
    before the next block is asked of the meter) hands the held chunks to the thread, so
    correcting them, evaluating their uncertainty, filling the state and calling
    ``on_progress`` happen while the meter measures the next block instead of between blocks.
    :meth:`finish` waits until every chunk is in the state. A failure of the sink (or of
    ``on_progress``) is raised once on the sweep's thread, by the next :meth:`release` or by
    :meth:`finish`; the chunks after it are not added.
    """

    def __init__(self, sink: _Sink) -> None:
        self._sink = sink
        self._held: list[tuple[Any, ...]] = []
        self._queue: queue.SimpleQueue[tuple[Any, ...] | None] = queue.SimpleQueue()
        self._failed = False
        self._failure: BaseException | None = None
        self._done = threading.Event()
        self._thread = threading.Thread(target=self._run, name="sweep-chunks", daemon=True)
        self._thread.start()

    def hold(self, f: np.ndarray, z: np.ndarray, u_m: Any = None) -> None:
        self._held.append((f, z, u_m))

    def release(self) -> None:
        with held():  # handed over whole: a stop in between would send a chunk twice
            for chunk in self._held:
                self._queue.put(chunk)
            self._held.clear()
        self._raise()

    def finish(self) -> None:
        """Every chunk received is in the state when this returns. Ctrl-C or a stop signal
        does not cut that short (what is left is a few chunks of arithmetic); it is raised once
        the state is whole, so the sweep ends as interrupted with every point it measured.

        The end is told by an event the thread sets, not by ``Thread.join``/``is_alive``: a
        join interrupted by a signal can leave ``is_alive`` saying False while the thread still
        works, which once let a unit be judged on a sweep with no points in its state.
        """
        with held():  # the tool's handlers (acquire.signals) raise a stop after the block
            for chunk in self._held:
                self._queue.put(chunk)
            self._held.clear()
            if not self._done.is_set():
                self._queue.put(None)
            stop: KeyboardInterrupt | None = None
            while not self._done.is_set():  # Python's own Ctrl-C handler, outside the tool's
                try:
                    self._done.wait()
                except KeyboardInterrupt as exc:
                    stop = stop or exc
            self._raise()
        if stop is not None:
            raise stop

    def _raise(self) -> None:
        failure, self._failure = self._failure, None
        if failure is not None:
            raise failure

    def _run(self) -> None:
        leave_stops_to_the_main_thread()
        try:
            while (chunk := self._queue.get()) is not None:
                if not self._failed:
                    try:
                        self._sink(*chunk)
                    except BaseException as exc:  # noqa: BLE001 - raised on the sweep's thread
                        self._failure, self._failed = exc, True
        finally:
            self._done.set()


def run_sweep(
    meter: Meter,
    plan: FrequencyPlan,
    references: Any = None,
    writer: Writer | None = None,
    state: SweepState | None = None,
    on_progress: Callable[[], None] | None = None,
    flush_interval: float = 0.25,
    block: int | str | None = "auto",
    block_seconds: float = 0.5,
    uncertainty: PointUncertainty | str | None = "auto",
    repeats: int = 1,
    store_patience: float = 30.0,
) -> SweepOutcome:
    """Sweep ``meter`` over ``plan``; see the module docstring for how it streams and stops.

    ``references`` is a :class:`acquire.compensation.ReferenceSet` (or None for raw readings);
    its grid must cover the plan. ``writer`` is the store's sweep writer (or None to keep the
    points in memory only); without a reference set it is given no corrected values.
    ``state`` receives every point (one is made if not given); ``on_progress`` is called after
    each chunk, on the thread that corrects the chunks while the meter measures on.
    ``block`` splits the plan into several ``meter.sweep`` calls of that many
    points, so a meter that answers a whole list at once still streams in steps; ``"auto"``
    (the default) sizes the blocks from the time per point seen so far to take about
    ``block_seconds`` each, and None sends the whole plan in one call. Each block costs a
    round trip or two beyond the meter's measuring (its reply, the error queue read after it);
    the default of half a second keeps that near half a percent of a slow sweep's time while
    the live view still gets new points twice a second (Ctrl-C does not wait for a block: it
    stops the sweep at once, and the block being measured is not kept).
    The plan is checked against ``meter.frequency_range`` before anything is sent.

    ``uncertainty`` says how each point's uncertainty is evaluated: ``"auto"`` (the default)
    takes the meter's dialect accuracy and settings and the state's quantities
    (:meth:`PointUncertainty.for_meter`), None skips it (no uncertainty, no flags). With
    ``repeats`` of 2 or more every block is read that many times; each point keeps the mean and
    the Type A standard uncertainty of it (JCGM 100:2008 4.2.3), and points stream per block.

    ``store_patience`` is how many seconds the end of the sweep waits for a store that is out
    of reach before it reports the points it could not write (they stay in the outcome).
    """
    if type(repeats) is not int or repeats < 1:
        raise InputError(f"repeats must be a whole number of 1 or more, not {repeats!r}")
    check_range(plan, meter.frequency_range)
    if references is not None:
        check_coverage(plan, references)
    if state is None:
        state = SweepState(plan, corrected_too=references is not None)
    if uncertainty == "auto":
        uncertainty = PointUncertainty.for_meter(meter, state.quantities)
    elif isinstance(uncertainty, str):
        raise InputError(f"uncertainty must be 'auto', None or a PointUncertainty: {uncertainty!r}")
    sink = _Sink(state, references, on_progress, uncertainty)
    known = uncertainty is not None
    saver = None
    if writer is not None:
        saver = PointSaver(writer, state, known, flush_interval, store_patience)
    reason = ""
    error: BaseException | None = None
    state.start()
    if saver is not None:
        saver.start()
    chunks = _Handoff(sink)
    try:
        try:
            for frequencies in _blocks(plan, block, block_seconds):
                chunks.release()
                if repeats == 1:
                    meter.sweep(np.array(frequencies), on_points=chunks.hold)
                    continue
                readings = [meter.sweep(np.array(frequencies)) for _ in range(repeats)]
                mean, u_m = mean_of_repeats(np.asarray(readings, dtype=complex))
                chunks.hold(np.asarray(frequencies), mean, u_m)
            chunks.finish()
        except KeyboardInterrupt as exc:
            reason, error = stop_reason(exc), exc
        except InstrumentError as exc:
            reason, error = f"meter fault: {exc}", exc
        finally:
            chunks.finish()
    except BaseException as exc:
        _close(saver, state, "interrupted", f"stopped by an error: {exc}")
        raise
    status = "interrupted" if error is not None else "complete"
    report = _close(saver, state, status, reason)
    if report is not None and report.problem and error is None:
        status, reason = "interrupted", "the store was out of reach"
        error = StoreError(f"the store was out of reach: {report.problem}")
        state.finish(status, reason)
    f, raw, corrected = state.points()
    n = f.size
    return SweepOutcome(
        frequency=f.copy(),
        raw=raw.copy(),
        corrected=None if corrected is None else corrected.copy(),
        status=status,
        planned=len(plan),
        reason=reason,
        sweep_id=getattr(writer, "id", None),
        error=error,
        flags=state.flags[:n].copy() if known else None,
        cov=state.cov[:n].copy() if known else None,
        saved=None if report is None else report.saved,
        store_problem="" if report is None else report.problem,
        store_waits=0 if report is None else report.waits,
    )


#: Bounds of the automatic block size (points per ``meter.sweep`` call).
FIRST_BLOCK, LARGEST_BLOCK = 8, 4096


def _blocks(plan: FrequencyPlan, block: int | str | None, seconds: float) -> Iterator[np.ndarray]:
    """The plan's frequencies in blocks; ``"auto"`` adapts the size to the time per point."""
    f = plan.frequencies
    if block is None:
        yield f
        return
    if block != "auto":
        yield from plan.chunks(int(block))
        return
    i, size = 0, FIRST_BLOCK
    while i < f.size:
        began = time.monotonic()
        part = f[i : i + size]
        yield part
        i += part.size
        per_point = (time.monotonic() - began) / part.size
        wanted = int(seconds / per_point) if per_point > 0 else LARGEST_BLOCK
        size = max(FIRST_BLOCK, min(wanted, LARGEST_BLOCK))


def _close(
    saver: PointSaver | None, state: SweepState, status: str, note: str
) -> SaveReport | None:
    """Write what is left and mark the sweep; the state is marked even if the saver fails."""
    try:
        return None if saver is None else saver.close(status, note)
    finally:
        state.finish(status, note)
