"""Plain records that go into and come out of a results store.

A production unit is written as a :class:`UnitRecord` holding its :class:`MeasurementRecord`
rows. Make the record (or at least its ``attempt_id``) when the attempt *starts*: the id is what
makes a retried write (after a lost connection, or a station restarted mid-save) store the unit
once. :func:`dataclasses.replace` keeps the id while the rest of the record is filled in.

Verdicts and outcomes are free words chosen by the test plan; the store counts ``"pass"`` as
passing when it works out yields, and every other word as not passing.
"""

from __future__ import annotations

import math
import uuid
from dataclasses import dataclass, field
from datetime import datetime
from typing import Any

from acquire.errors import StoreError


def _utc_now() -> datetime:
    from acquire.store.plain_values import utc_now

    return utc_now()


#: The verdict and outcome word that counts as passing in yields.
PASS = "pass"
#: Longest parameter name, unit and verdict of a measurement: they are the test plan's words
#: (and are indexed for lot statistics); serials, names and notes have no limit.
WORD_LIMITS = {"parameter": 100, "unit": 20, "verdict": 40}


#: The fields of a measurement that hold numbers (floats or None).
_FLOAT_FIELDS: tuple[str, ...] = ("value", "frequency", "low", "high", "uncertainty")
_FLOAT_FIELDS += ("tolerance_low", "tolerance_high", "bias_current")


def new_attempt_id() -> str:
    """A fresh attempt id (a random UUID, canonical text form)."""
    return str(uuid.uuid4())


def _aware(name: str, value: datetime | None) -> None:
    if value is not None and value.tzinfo is None:
        raise StoreError(f"{name} must be a timezone-aware datetime (UTC), not {value!r}")


@dataclass(frozen=True)
class MeasurementRecord:
    """One judged value of a unit: ``parameter`` (``"Ls"``, ``"Q"``, ...) at ``frequency`` Hz
    (None for DC values such as a winding's DC resistance; 0 Hz means the same and becomes None),
    ``value`` in the SI unit ``unit`` (NaN for an invalid reading, infinite for an overrange one),
    the acceptance limits actually applied ``low`` and ``high`` (after any guard band; None for an
    open side) and the verdict.

    ``uncertainty`` is the expanded uncertainty U (k = 2) of ``value`` in the same unit, None when
    unknown (NaN is taken as unknown and kept as None, so a stored record reads back equal; an
    infinite U is kept). ``tolerance_low`` and ``tolerance_high`` are the test plan's tolerance
    limits before any guard band (None for an open side; NaN is refused). ``bias_current`` is
    the DC bias (A) the value was measured under, None for none.
    """

    parameter: str
    value: float
    unit: str = ""
    frequency: float | None = None
    low: float | None = None
    high: float | None = None
    verdict: str = ""
    uncertainty: float | None = None
    tolerance_low: float | None = None
    tolerance_high: float | None = None
    bias_current: float | None = None

    def __post_init__(self) -> None:
        for name in _FLOAT_FIELDS:
            v = getattr(self, name)
            if v is not None:
                object.__setattr__(self, name, float(v))
        if self.frequency == 0.0:
            object.__setattr__(self, "frequency", None)
        if self.uncertainty is not None and math.isnan(self.uncertainty):
            object.__setattr__(self, "uncertainty", None)
        for name in ("tolerance_low", "tolerance_high"):
            v = getattr(self, name)
            if v is not None and math.isnan(v):
                raise StoreError(
                    f"a measurement's {name} is NaN: give the plan's limit (None: open side)"
                )
        for name, longest in WORD_LIMITS.items():
            if len(getattr(self, name)) > longest:
                raise StoreError(
                    f"a measurement's {name} may have at most {longest} characters (it names a "
                    f"quantity of the test plan); got {len(getattr(self, name))}"
                )

    def same_as(self, other: MeasurementRecord) -> bool:
        """Equal field by field, with NaN equal to NaN (an invalid reading stays invalid)."""

        def eq(a: Any, b: Any) -> bool:
            if isinstance(a, float) and isinstance(b, float):
                return a == b or (math.isnan(a) and math.isnan(b))
            return a == b

        return all(eq(getattr(self, f), getattr(other, f)) for f in self.__dataclass_fields__)


@dataclass(frozen=True, kw_only=True)
class UnitRecord:
    """One test attempt on one production unit, with its measurements.

    ``attempt`` numbers the attempts on the same serial (1 for the first test, 2 for the first
    retest, ...); ``attempt_id`` identifies this attempt uniquely across every station;
    ``outcome`` is the unit's verdict (``"pass"``, ``"fail"``, ...) and ``bin`` the bin it was
    sorted into. ``lot`` is a lot name ("" for none); the lot is recorded when first used.
    ``reference_override`` is "" or the reason the operator gave for measuring with references
    the station would have refused (too old, failed a check); ``temperature`` is the winding
    temperature (°C) the DC resistance was corrected from, None when none was used (NaN is taken
    as None). ``check_acknowledgement_id`` is the acknowledgement of a stopped check standard
    (``Store.acknowledge_check``) in force when the unit was tested, None for none.
    """

    serial: str
    outcome: str
    measurements: tuple[MeasurementRecord, ...] = ()
    lot: str = ""
    attempt: int = 1
    bin: str = ""
    station: str = ""
    operator: str = ""
    plan_id: int | None = None
    reference_set_id: int | None = None
    meter_id: int | None = None
    fixture_id: int | None = None
    started_at: datetime | None = field(default_factory=_utc_now)
    finished_at: datetime | None = None
    notes: str = ""
    attempt_id: str = field(default_factory=new_attempt_id)
    reference_override: str = ""
    temperature: float | None = None
    check_acknowledgement_id: int | None = None

    def __post_init__(self) -> None:
        try:
            canonical = str(uuid.UUID(str(self.attempt_id)))
        except ValueError:
            raise StoreError(
                f"attempt id {self.attempt_id!r} is not a UUID: make it with new_attempt_id()"
            ) from None
        object.__setattr__(self, "attempt_id", canonical)
        object.__setattr__(self, "measurements", tuple(self.measurements))
        _aware("started_at", self.started_at)
        _aware("finished_at", self.finished_at)
        if self.attempt < 1:
            raise StoreError(f"attempt numbers start at 1, not {self.attempt}")
        if self.temperature is not None:
            t = float(self.temperature)
            if math.isinf(t):
                raise StoreError(f"a unit's temperature must be finite (°C), not {t}")
            object.__setattr__(self, "temperature", None if math.isnan(t) else t)


@dataclass(frozen=True)
class MeterInfo:
    """A meter as recorded from its ``*IDN?`` reply, with the dialect used to drive it."""

    id: int
    manufacturer: str
    model: str
    serial: str
    firmware: str
    dialect: str
    first_seen: datetime


@dataclass(frozen=True)
class FixtureInfo:
    """A test fixture (leads, clips, a jig) by name."""

    id: int
    name: str
    notes: str
    created_at: datetime


@dataclass(frozen=True)
class PlanInfo:
    """A test plan's text, identified by the SHA-256 ``hash`` of that text."""

    id: int
    hash: str
    name: str
    text: str
    created_at: datetime


@dataclass(frozen=True)
class LotInfo:
    """A production lot and how many unit attempts are stored for it."""

    id: int
    name: str
    notes: str
    created_at: datetime
    attempts: int


@dataclass(frozen=True)
class LotYield:
    """Yield of a lot counted per serial number.

    ``first_pass`` counts serials whose first attempt passed, ``final_pass`` those whose latest
    attempt passed (retests included); the yields divide them by ``serials``.
    """

    lot: str
    attempts: int
    serials: int
    first_pass: int
    final_pass: int

    @property
    def first_pass_yield(self) -> float:
        return self.first_pass / self.serials if self.serials else math.nan

    @property
    def final_yield(self) -> float:
        return self.final_pass / self.serials if self.serials else math.nan


@dataclass(frozen=True)
class ReferenceSetInfo:
    """A stored reference set, without its arrays (see ``Store.load_reference_set``)."""

    id: int
    name: str
    fixture: str
    meter: str
    captured_at: datetime | None
    standards: tuple[str, ...]
    points: int
    fixture_id: int | None = None
    meter_id: int | None = None
    method: str = ""
    saved_at: datetime | None = None


class ReportedRun:
    """A stored run as the store reports it: ``status`` may say ``interrupted`` where the
    database still holds ``running`` (``recorded_status``) because its writer is gone."""

    status: str
    recorded_status: str

    @property
    def abandoned(self) -> bool:
        """The writer died without finishing the run (found by the store, not recorded)."""
        return self.recorded_status == "running" and self.status == "interrupted"


@dataclass(frozen=True)
class SweepInfo(ReportedRun):
    """A stored sweep, without its points (see ``Store.sweep_points``).

    ``status`` is ``"complete"``, ``"interrupted"`` or ``"running"``. A sweep whose writer died
    without finishing it still says ``running`` in the database (``recorded_status``); the store
    reports it as ``"interrupted"`` (and ``abandoned`` is True) once it can tell the writer is gone:
    the writing process no longer exists on this host, or nothing has been written for longer
    than the store's ``stale_after``. Its points are whole batches, as written.
    """

    id: int
    dut: str
    status: str
    points: int
    started_at: datetime
    finished_at: datetime | None
    meter_id: int | None
    fixture_id: int | None
    reference_set_id: int | None
    settings: dict[str, Any] | None
    note: str
    recorded_status: str
    last_write_at: datetime | None
    writer: str
