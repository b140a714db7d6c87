"""The results store: one object in front of an SQLite file or a PostgreSQL database."""

from __future__ import annotations

from collections.abc import Iterable
from datetime import datetime
from pathlib import Path
from types import TracebackType
from typing import TYPE_CHECKING, Any

from sqlalchemy import Engine

from acquire.errors import StoreError
from acquire.store import (
    bias_runs,
    catalog,
    check_results,
    grr_studies,
    lot_query,
    production,
    references,
    rise_runs,
    sweeps,
)
from acquire.store.engine import Database
from acquire.store.lot_query import LotFilter, OutcomeCounts
from acquire.store.migrate import ensure_schema, stored_revision
from acquire.store.publishing import PublishOutbox
from acquire.store.records import (
    FixtureInfo,
    LotInfo,
    LotYield,
    MeterInfo,
    PlanInfo,
    ReferenceSetInfo,
    SweepInfo,
    UnitRecord,
)
from acquire.store.schema import SCHEMA_REVISION
from acquire.store.station_states import LineStates
from acquire.store.store_file import check_store_file
from acquire.store.sweeps import STALE_AFTER_S, SweepWriter
from acquire.store.url import parse_store_url

if TYPE_CHECKING:
    import pandas as pd

    from acquire.bias.records import BiasSettings, BiasSweepResult, RiseResult, RiseSettings
    from acquire.compensation import ReferenceSet
    from acquire.msa.records import GrrData


def open_store(
    url: str,
    *,
    schema: str | None = None,
    stale_after: float = STALE_AFTER_S,
    create: bool = True,
    by_migrations: bool = False,
) -> Store:
    """Open (creating or upgrading as needed) the results store at ``url``.

    ``url`` is ``sqlite:///path/file.db`` (or a bare file path) or ``postgresql://user@host/db``
    (see :mod:`acquire.store.url`); ``schema`` puts a PostgreSQL store's tables in that schema;
    ``stale_after`` is how many seconds without a write make a running sweep count as abandoned.
    With ``create=False`` (for reading) a store must already be there: a missing, empty or other
    SQLite file, an in-memory store or a database (or schema) without a store is refused and
    left as it was. Raises :class:`~acquire.errors.StoreError` when the store cannot be reached,
    is not a store, or is at a schema revision this program does not know (a newer release
    wrote it).

    A new (or empty) SQLite file is made from the frozen script of the newest layout
    (:mod:`acquire.store.new_sqlite`), the same store Alembic's migrations make in a fraction of
    the time; ``by_migrations=True`` makes it by running every migration instead (the reference
    the script is checked against, :mod:`acquire.store.head_schema`).
    """
    location = parse_store_url(url, schema)
    if not create:
        check_store_file(location)
    elif location.path is not None and not location.path.parent.is_dir():
        raise StoreError(
            f"cannot create store {location.path}: the folder {location.path.parent} does not "
            "exist (create it, or choose another path)"
        )
    made = False
    if create and not by_migrations and location.engine == "sqlite":
        from acquire.store.new_sqlite import make_if_new

        made = make_if_new(url)
    db = Database(location)
    try:
        if not create and db.read("reading the schema revision", stored_revision) is None:
            raise StoreError(
                f"there is no results store in {location.shown} (the database holds none of "
                "its tables): check the URL and schema; reading does not create a store"
            )
        created, found = ensure_schema(db)
        sweeps.close_dead_writers(db)  # sweeps whose process died (SIGKILL, power) on this host
    except BaseException:
        db.dispose()
        raise
    return Store(db, created or made, found, stale_after)


class Store(PublishOutbox, LineStates):
    """Meters, fixtures, reference sets, sweeps, plans, lots and units in one database.

    Make one with :func:`open_store`. Every method is one transaction (a sweep's points, one per
    ``add_points`` batch). A store may be shared by threads (each gets its own connection),
    except an in-memory SQLite store, which has a single connection and serves one thread; a
    process that forks should open its own store rather than use its parent's.
    """

    def __init__(self, db: Database, created: bool, found: str | None, stale_after: float):
        self._db = db
        self._created = created
        self._found = found
        self._stale_after = stale_after
        self._lots: dict[str, int] = {}

    @property
    def url(self) -> str:
        """The store's URL, any password hidden."""
        return self._db.location.shown

    @property
    def path(self) -> Path | None:
        """The SQLite file, or None for PostgreSQL and in-memory stores."""
        return self._db.location.path

    @property
    def engine_name(self) -> str:
        """``"sqlite"`` or ``"postgresql"``."""
        return self._db.location.engine

    @property
    def created(self) -> bool:
        """True if opening made a new, empty store (callers print its location then)."""
        return self._created

    @property
    def migrated_from(self) -> str | None:
        """The older revision it was upgraded from on opening ("released": the first release's)."""
        return None if self._created or self._found == SCHEMA_REVISION else self._found

    @property
    def schema_revision(self) -> str:
        """The schema revision the store is at (the newest this program knows)."""
        return SCHEMA_REVISION

    @property
    def engine(self) -> Engine:
        """The SQLAlchemy engine, for read-only queries of your own (``sqlalchemy.text``)."""
        return self._db.engine

    # meters, fixtures, plans, lots
    def record_meter(
        self, manufacturer: str, model: str, serial: str, firmware: str, dialect: str = ""
    ) -> int:
        return catalog.record_meter(self._db, manufacturer, model, serial, firmware, dialect)

    def record_fixture(self, name: str, notes: str = "") -> int:
        return catalog.record_fixture(self._db, name, notes)

    def record_plan(self, text: str, name: str = "") -> int:
        return catalog.record_plan(self._db, text, name)

    def record_lot(self, name: str, notes: str = "") -> int:
        lot_id = catalog.record_lot(self._db, name, notes)
        self._lots[name] = lot_id
        return lot_id

    def meter(self, meter_id: int) -> MeterInfo:
        return catalog.meter(self._db, meter_id)

    def fixture(self, fixture_id: int) -> FixtureInfo:
        return catalog.fixture(self._db, fixture_id)

    def plan(self, plan_id: int | None = None, hash: str | None = None) -> PlanInfo:
        return catalog.plan(self._db, plan_id, hash)

    def lot(self, name: str) -> LotInfo:
        return catalog.lot(self._db, name)

    def list_lots(self) -> list[LotInfo]:
        return catalog.list_lots(self._db)

    # reference sets
    def save_reference_set(
        self,
        refs: ReferenceSet,
        name: str | None = None,
        meter_id: int | None = None,
        fixture_id: int | None = None,
    ) -> int:
        return references.save_reference_set(self._db, refs, name, meter_id, fixture_id)

    def load_reference_set(self, ref_id: int) -> ReferenceSet:
        return references.load_reference_set(self._db, ref_id)

    def reference_set_info(self, ref_id: int) -> ReferenceSetInfo:
        return references.reference_set_info(self._db, ref_id)

    def list_reference_sets(self) -> list[ReferenceSetInfo]:
        return references.list_reference_sets(self._db)

    # sweeps
    def begin_sweep(
        self,
        dut: str = "",
        meter_id: int | None = None,
        fixture_id: int | None = None,
        reference_set_id: int | None = None,
        settings: dict[str, Any] | None = None,
    ) -> SweepWriter:
        return sweeps.begin_sweep(self._db, dut, meter_id, fixture_id, reference_set_id, settings)

    def sweep_info(self, sweep_id: int) -> SweepInfo:
        return sweeps.sweep_info(self._db, sweep_id, self._stale_after)

    def list_sweeps(self) -> list[SweepInfo]:
        return sweeps.list_sweeps(self._db, self._stale_after)

    def sweep_points(self, sweep_id: int) -> pd.DataFrame:
        return sweeps.sweep_points(self._db, sweep_id)

    def close_abandoned_sweeps(self) -> list[int]:
        return sweeps.close_abandoned_sweeps(self._db, self._stale_after)

    # bias sweeps and temperature-rise runs (acquire.store.bias_runs, acquire.store.rise_runs)
    def begin_bias_sweep(self, settings: BiasSettings) -> bias_runs.BiasSweepWriter:
        return bias_runs.begin_bias_sweep(self._db, settings)

    def load_bias_sweep(self, sweep_id: int) -> BiasSweepResult:
        return bias_runs.load_bias_sweep(self._db, sweep_id, self._stale_after)

    def list_bias_sweeps(self) -> list[bias_runs.BiasSweepInfo]:
        return bias_runs.list_bias_sweeps(self._db, self._stale_after)

    def begin_rise_run(self, settings: RiseSettings) -> rise_runs.RiseWriter:
        return rise_runs.begin_rise_run(self._db, settings)

    def load_rise_run(self, run_id: int) -> RiseResult:
        return rise_runs.load_rise_run(self._db, run_id, self._stale_after)

    def list_rise_runs(self) -> list[rise_runs.RiseRunInfo]:
        return rise_runs.list_rise_runs(self._db, self._stale_after)

    # gauge R&R studies (acquire.store.grr_studies)
    def begin_grr_study(self, settings: grr_studies.GrrStudySettings) -> grr_studies.GrrStudyWriter:
        return grr_studies.begin_grr_study(self._db, settings)

    def load_grr_study(self, study_id: int) -> tuple[grr_studies.GrrStudyInfo, GrrData]:
        return grr_studies.load_grr_study(self._db, study_id, self._stale_after)

    def grr_study_info(self, study_id: int) -> grr_studies.GrrStudyInfo:
        return grr_studies.grr_study_info(self._db, study_id, self._stale_after)

    def grr_measurements(self, study_id: int) -> list[grr_studies.GrrMeasurement]:
        return grr_studies.grr_measurements(self._db, study_id)

    def list_grr_studies(self) -> list[grr_studies.GrrStudyInfo]:
        return grr_studies.list_grr_studies(self._db, self._stale_after)

    # production
    def save_unit(self, unit: UnitRecord) -> bool:
        return production.save_unit(self._db, unit, self._lots)

    def save_units(self, units: Iterable[UnitRecord], batch: int = 1000) -> int:
        return production.save_units(self._db, units, self._lots, batch)

    def load_unit(self, attempt_id: str) -> UnitRecord:
        return production.load_unit(self._db, attempt_id)

    def unit_attempts(self, serial: str) -> list[UnitRecord]:
        return production.unit_attempts(self._db, serial)

    def lot_units(self, lot: str) -> pd.DataFrame:
        return production.lot_units(self._db, lot)

    def lot_summary(self, lot: str) -> pd.DataFrame:
        return production.lot_summary(self._db, lot)

    def lot_yield(self, lot: str) -> LotYield:
        return production.lot_yield(self._db, lot)

    # selections of units (acquire.store.lot_query; the reports read these)
    def quantity_summary(self, chosen: LotFilter) -> list[Any]:
        from acquire.store.quantity_summary import quantity_rows

        return quantity_rows(self._db, chosen)

    def lot_numbers(self, chosen: LotFilter) -> tuple[OutcomeCounts, list[Any]]:
        from acquire.store.packed_statistics import lot_numbers

        return lot_numbers(self._db, chosen)

    def limit_counts(self, chosen: LotFilter, column: str) -> list[Any]:
        return lot_query.limit_counts(self._db, chosen, column)

    def outcome_counts(self, chosen: LotFilter) -> OutcomeCounts:
        return lot_query.outcome_counts(self._db, chosen)

    def measurement_rows(
        self, chosen: LotFilter, parameter: str | None = None, frequency: float | None = None
    ) -> pd.DataFrame:
        return lot_query.measurement_rows(self._db, chosen, parameter, frequency)

    # check standards (acquire.store.check_results)
    def save_check(
        self,
        standard: str,
        values: list[check_results.CheckValue],
        station: str = "",
        plan_hash: str = "",
        checked_at: datetime | None = None,
    ) -> str:
        return check_results.save_check(self._db, standard, values, station, plan_hash, checked_at)

    def check_history(
        self, standard: str, quantity: str | None = None
    ) -> list[check_results.CheckRow]:
        return check_results.check_history(self._db, standard, quantity)

    def check_summary(self, standard: str) -> check_results.CheckSummary:
        return check_results.check_summary(self._db, standard)

    def list_check_standards(self) -> list[tuple[str, int, datetime | None]]:
        return check_results.list_standards(self._db)

    def acknowledge_check(
        self,
        standard: str,
        made_by: str,
        reason: str,
        acknowledged: str,
        check_id: str | None,
        made_at: datetime | None = None,
    ) -> check_results.Acknowledgement:
        return check_results.acknowledge(
            self._db, standard, made_by, reason, acknowledged, check_id, made_at
        )

    def check_acknowledgements(self, standard: str) -> list[check_results.Acknowledgement]:
        return check_results.acknowledgements(self._db, standard)

    # lifetime
    def close(self) -> None:
        """Release the store's connections (the store cannot be used afterwards)."""
        self._db.dispose()

    def __enter__(self) -> Store:
        return self

    def __exit__(
        self,
        kind: type[BaseException] | None,
        exc: BaseException | None,
        tb: TracebackType | None,
    ) -> None:
        self.close()

    def __repr__(self) -> str:
        return f"Store({self.url!r})"
