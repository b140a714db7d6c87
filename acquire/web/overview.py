"""The line overview as plain data: every station's newest state, its lot's numbers, and each
lot's yield over time. Reads the store only.

A station's ``tested``, ``passed`` and ``yield_`` are the store's own outcome counts for its lot
at that station (:meth:`acquire.store.Store.outcome_counts`, the counts ``acquire lot LOT
--station NAME --json`` reports): serials, and serials whose latest attempt passed. A lot's
yield over time is the final yield (serials whose latest attempt so far passed, over serials
tested so far) after each attempt in test order, at every station of the lot; its last point is
the lot's final yield as ``acquire lot LOT`` reports it.
"""

from __future__ import annotations

import math
from dataclasses import dataclass
from datetime import datetime
from typing import TYPE_CHECKING, Any

import numpy as np

from acquire.store.lot_query import LotFilter
from acquire.store.records import PASS
from acquire.store.schema import utc_now

if TYPE_CHECKING:
    import pandas as pd

    from acquire.store import Store
    from acquire.store.station_states import StoredStationState

#: Seconds without a new state after which a station that has not stopped is called silent.
SILENT_AFTER_S = 60.0
#: How many of a station's latest attempts the page lists.
RECENT_UNITS = 8


@dataclass(frozen=True)
class RecentUnit:
    """One attempt as the page lists it: serial, attempt number, outcome and bin."""

    serial: str
    attempt: int
    outcome: str
    bin: str


@dataclass(frozen=True)
class StationView:
    """A station on the page: its stored ``state`` (see :class:`StoredStationState`), whether
    it is ``silent``, and its lot's numbers at this station from the store's outcome counts:
    ``tested`` serials, ``passed`` (latest attempt), ``attempts``, ``yield_`` (NaN for none)
    and its latest attempts, newest first."""

    state: StoredStationState
    silent: bool
    tested: int
    passed: int
    attempts: int
    yield_: float
    recent: tuple[RecentUnit, ...]

    @property
    def shown_state(self) -> str:
        """ "silent" for a station that stopped telling, else its stored state."""
        return "silent" if self.silent else self.state.state


@dataclass(frozen=True)
class LotView:
    """A lot on the page: its final yield over every station (``serials``, ``passed``,
    ``yield_``) and the yield after each attempt in test order (``times``: UTC datetimes,
    ``yields``: fractions)."""

    lot: str
    serials: int
    passed: int
    yield_: float
    times: tuple[datetime, ...]
    yields: np.ndarray


@dataclass(frozen=True)
class LineOverview:
    """The whole page: ``stations`` by name, ``lots`` of the stations' current lots, and when
    it was read (``read_at``, UTC)."""

    stations: tuple[StationView, ...]
    lots: tuple[LotView, ...]
    read_at: datetime


def counted_yield(passed: int, serials: int) -> float:
    """Final yield as the lot report counts it: passed serials over serials (NaN for none)."""
    return passed / serials if serials else math.nan


def cumulative_yield(serials: np.ndarray, attempts: np.ndarray, outcomes: np.ndarray) -> np.ndarray:
    """The final yield after each attempt, given in test order: serials whose latest attempt so
    far (highest attempt number; the later one for equal numbers) passed, over serials so far."""
    latest: dict[Any, tuple[int, bool]] = {}
    passed = 0
    out = np.empty(len(serials), dtype=float)
    for i, (serial, attempt, outcome) in enumerate(zip(serials, attempts, outcomes, strict=True)):
        before = latest.get(serial)
        if before is None or int(attempt) >= before[0]:
            ok = outcome == PASS
            passed += int(ok) - (int(before[1]) if before is not None else 0)
            latest[serial] = (int(attempt), ok)
        out[i] = passed / len(latest)
    return out


def _in_test_order(units: pd.DataFrame) -> pd.DataFrame:
    import pandas as pd

    for name in ("started_at", "finished_at"):
        units = units.assign(**{name: pd.to_datetime(units[name], utc=True)})
    tested = units["finished_at"].where(units["finished_at"].notna(), units["started_at"])
    ordered = units.assign(tested=tested, row=np.arange(len(units)))
    return ordered.sort_values(["tested", "row"], kind="stable", na_position="first")


def lot_view(store: Store, lot: str, units: pd.DataFrame) -> LotView:
    """Lot ``lot``'s yields (``units``: ``store.lot_units(lot)``)."""
    counts = store.outcome_counts(LotFilter(lot=lot))
    ordered = _in_test_order(units).dropna(subset=["tested"])
    yields = cumulative_yield(
        ordered["serial"].to_numpy(), ordered["attempt"].to_numpy(), ordered["outcome"].to_numpy()
    )
    times = tuple(t.to_pydatetime() for t in ordered["tested"])
    passed, serials = counts.passed, counts.serials
    return LotView(lot, serials, passed, counted_yield(passed, serials), times, yields)


def station_view(
    store: Store, state: StoredStationState, units: pd.DataFrame | None, now: datetime
) -> StationView:
    """``state`` with its lot's numbers at its station (``units``: its lot's, or None)."""
    age = (now - state.updated_at).total_seconds()
    silent = state.state != "stopped" and age > SILENT_AFTER_S
    if units is None:
        return StationView(state, silent, 0, 0, 0, math.nan, ())
    counts = store.outcome_counts(LotFilter(lot=state.lot, station=state.station))
    mine = units[units["station"] == state.station].tail(RECENT_UNITS).iloc[::-1]
    recent = tuple(
        RecentUnit(str(r.serial), int(r.attempt), str(r.outcome), str(r.bin))
        for r in mine.itertuples()
    )
    yield_ = counted_yield(counts.passed, counts.serials)
    return StationView(
        state, silent, counts.serials, counts.passed, counts.attempts, yield_, recent
    )


def read_overview(store: Store, now: datetime | None = None) -> LineOverview:
    """The line as the store holds it now (``now``: UTC, for tests)."""
    now = utc_now() if now is None else now
    states = store.station_states()
    # a station records its lot before it tells its first state, so each lot is there
    units = {lot: store.lot_units(lot) for lot in dict.fromkeys(s.lot for s in states if s.lot)}
    stations = tuple(station_view(store, s, units.get(s.lot), now) for s in states)
    lots = tuple(lot_view(store, lot, frame) for lot, frame in units.items())
    return LineOverview(stations, lots, now)
