"""The results store: every reference set, sweep and production unit, in one database.

An SQLite file on one bench (the default), or a PostgreSQL database that a line of stations
writes to at once; one schema and one code path (SQLAlchemy Core) serve both::

    from acquire.store import open_store, UnitRecord, MeasurementRecord

    with open_store("sqlite:///results.db") as store:
        unit = UnitRecord(serial="A1", lot="L7", outcome="pass",
                          measurements=[MeasurementRecord("Ls", 3.4e-4, "H", 1e3, verdict="pass")])
        store.save_unit(unit)
        print(store.lot_summary("L7"))

Every record is written in one transaction; SQLite runs in WAL mode with ``synchronous=FULL``
(a unit reported saved survives a power cut; see :mod:`~acquire.store.engine`). A unit's
``attempt_id`` makes a repeated write store it once. A sweep left "running" by a process that
died is reported as interrupted (see :mod:`~acquire.store.sweeps`).

The layout changes only through Alembic migrations shipped in the package
(:mod:`~acquire.store.migrations`): opening a store made by an older release runs the revisions it
lacks, under a lock so that stations opening it together do the work once; a store at a revision
this program does not know (a newer release wrote it) is refused and left untouched.

Modules: :mod:`~acquire.store.url` (store URLs), :mod:`~acquire.store.engine` (connections,
transactions, SQLite durability settings), :mod:`~acquire.store.schema` (the tables of the
newest revision), :mod:`~acquire.store.migrate` (creating and upgrading),
:mod:`~acquire.store.migrations` (the revisions), :mod:`~acquire.store.records` (dataclasses),
:mod:`~acquire.store.catalog` (meters, fixtures, plans, lots), :mod:`~acquire.store.references`,
:mod:`~acquire.store.sweeps` and :mod:`~acquire.store.production` (units, lot statistics), and
:mod:`~acquire.store.quick_read` (listing an SQLite store's reference sets with the standard
library alone, for a command that only reads).

The names below are loaded on first use, so that importing one submodule (``records``,
``quick_read``) does not load SQLAlchemy, which takes longer to import than numpy.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from acquire.store.catalog import plan_hash
    from acquire.store.core import Store, open_store
    from acquire.store.records import (
        PASS,
        FixtureInfo,
        LotInfo,
        LotYield,
        MeasurementRecord,
        MeterInfo,
        PlanInfo,
        ReferenceSetInfo,
        SweepInfo,
        UnitRecord,
        new_attempt_id,
    )
    from acquire.store.schema import SCHEMA_REVISION
    from acquire.store.sweeps import SweepWriter

#: Each public name and the submodule that defines it.
_HOMES = {
    "plan_hash": "catalog",
    "Store": "core",
    "open_store": "core",
    "SCHEMA_REVISION": "schema",
    "SweepWriter": "sweeps",
    **dict.fromkeys(
        (
            "PASS",
            "FixtureInfo",
            "LotInfo",
            "LotYield",
            "MeasurementRecord",
            "MeterInfo",
            "PlanInfo",
            "ReferenceSetInfo",
            "SweepInfo",
            "UnitRecord",
            "new_attempt_id",
        ),
        "records",
    ),
}

__all__ = [
    "PASS",
    "SCHEMA_REVISION",
    "FixtureInfo",
    "LotInfo",
    "LotYield",
    "MeasurementRecord",
    "MeterInfo",
    "PlanInfo",
    "ReferenceSetInfo",
    "Store",
    "SweepInfo",
    "SweepWriter",
    "UnitRecord",
    "new_attempt_id",
    "open_store",
    "plan_hash",
]


def __getattr__(name: str) -> Any:
    home = _HOMES.get(name)
    value: Any
    if home == "records":
        from acquire.store import records

        value = getattr(records, name)
    elif home == "core":
        from acquire.store import core

        value = getattr(core, name)
    elif home == "catalog":
        from acquire.store import catalog

        value = getattr(catalog, name)
    elif home == "schema":
        from acquire.store import schema

        value = getattr(schema, name)
    elif home == "sweeps":
        from acquire.store import sweeps

        value = getattr(sweeps, name)
    else:
        raise AttributeError(f"module 'acquire.store' has no attribute {name!r}")
    globals()[name] = value
    return value
