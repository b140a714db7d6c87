"""Stores of an older schema version, made by this program, to test migrations on.

:func:`create_store_at_version` lays out an empty store of an earlier version exactly as that
release did, and :func:`fill_v1_example` puts a small, fixed example into a version-1 store
through that version's own tables (a meter, a fixture, a reference set, a finished sweep and one
whose writer died, a plan, and units in two lots and in none). ``EXAMPLE_V1`` describes the
example so that a test can check every value survived a migration. As version 1 did, an
invalid reading is stored as NULL and an overrange one as infinity, a DC value with a NULL
frequency. The example is demo data of
our own invention.
"""

from __future__ import annotations

import math
from datetime import UTC, datetime, timedelta

from sqlalchemy import Connection, text

from acquire.errors import StoreError
from acquire.store.catalog import plan_hash
from acquire.store.engine import Database
from acquire.store.migrate import create_schema, stored_version
from acquire.store.schema import build_metadata, identity_key
from acquire.store.url import parse_store_url

_T0 = datetime(2026, 1, 5, 9, 30, tzinfo=UTC)

#: The example a version-1 store is filled with (see :func:`fill_v1_example`).
EXAMPLE_V1 = {
    "meter": ("Example Instruments", "LCR-1", "SN-0042", "1.2.3", "simulated"),
    "fixture": ("bench-leads", "two 10 cm leads with clips"),
    "reference": {
        "name": "bench-leads morning",
        "frequency": [1e3, 1e4, 1e5, 1e6],
        "open": [complex(5e4, -2e6), complex(4e3, -2e5), complex(400, -2e4), complex(40, -2e3)],
        "short": [
            complex(0.02, 0.002),
            complex(0.02, 0.02),
            complex(0.021, 0.19),
            complex(0.03, 1.9),
        ],
        "captured_at": _T0,
        "temperature": 23.0,
    },
    "plan": ("Ls at 1 kHz from 330 uH to 350 uH; Rdc at most 5.5 ohm", "demo-coil plan"),
    "sweep_complete": {
        "dut": "demo-coil",
        "frequency": [1e2, 1e3, 1e4, 1e5, 1e6],
        "raw": [
            complex(4.8, 0.21),
            complex(4.8, 2.14),
            complex(4.9, 21.4),
            complex(6.1, 216.0),
            complex(40.0, 2400.0),
        ],
        "settings": {"level": 1.0, "speed": "medium"},
    },
    "sweep_running": {
        "dut": "demo-coil",
        "frequency": [1e2, 1e3],
        "raw": [complex(4.8, 0.21), complex(4.8, 2.14)],
    },
    # serial, lot, attempt, outcome, bin, Ls at 1 kHz (H), Rdc (ohm), Q at 100 kHz
    "units": [
        ("DC-0001", "LOT-A", 1, "pass", "1", 3.41e-4, 4.81, 38.2),
        ("DC-0002", "LOT-A", 1, "fail", "reject", 3.52e-4, 4.95, float("inf")),
        ("DC-0002", "LOT-A", 2, "pass", "2", 3.49e-4, 4.93, 37.9),
        ("DC-0003", "LOT-B", 1, "pass", "1", 3.38e-4, 4.77, float("nan")),
        ("DC-0099", "", 1, "pass", "1", 3.40e-4, 4.80, 38.5),
    ],
}


def attempt_id_of(index: int) -> str:
    """The attempt id of example unit ``index`` (fixed, so tests can look units up)."""
    return f"00000000-0000-4000-8000-{index:012d}"


def create_store_at_version(url: str, version: int, schema: str | None = None) -> None:
    """Create an empty store of schema ``version`` at ``url`` (which must hold no store yet)."""
    db = Database(parse_store_url(url, schema))

    def work(conn: Connection) -> None:
        if db.location.schema is not None:
            conn.execute(text(f'CREATE SCHEMA IF NOT EXISTS "{db.location.schema}"'))
        if stored_version(conn) is not None:
            raise StoreError(f"{db.location.shown} already holds a store")
        create_schema(conn, version, note=f"created at version {version} for a migration test")

    try:
        db.write("creating an old store", work)
    finally:
        db.dispose()


def fill_v1_example(url: str, schema: str | None = None) -> None:
    """Write :data:`EXAMPLE_V1` into the empty version-1 store at ``url``, as version 1 did."""
    db = Database(parse_store_url(url, schema))
    t = build_metadata(1).tables
    ex = EXAMPLE_V1

    def work(conn: Connection) -> None:
        if stored_version(conn) != 1:
            raise StoreError(f"{db.location.shown} is not a version-1 store")
        fields = ex["meter"]
        names = ("manufacturer", "model", "serial", "firmware", "dialect")
        meter = dict(zip(names, fields, strict=True))
        meter_id = conn.execute(
            t["meters"].insert().returning(t["meters"].c.id),
            {"key": identity_key(*fields), **meter, "first_seen": _T0},
        ).scalar_one()
        name, notes = ex["fixture"]
        fixture_id = conn.execute(
            t["fixtures"].insert().returning(t["fixtures"].c.id),
            {"key": identity_key(name), "name": name, "notes": notes, "created_at": _T0},
        ).scalar_one()
        ref = ex["reference"]
        ref_id = conn.execute(
            t["reference_sets"].insert().returning(t["reference_sets"].c.id),
            {
                "name": ref["name"],
                "fixture_id": fixture_id,
                "meter_id": meter_id,
                "fixture": name,
                "meter": " ".join(fields[:3]),
                "captured_at": ref["captured_at"],
                "temperature": ref["temperature"],
                "notes": "",
                "method": "open-short",
                "standards": "open,short",
                "points": len(ref["frequency"]),
                "saved_at": _T0,
            },
        ).scalar_one()
        conn.execute(
            t["reference_points"].insert(),
            [
                {
                    "reference_set_id": ref_id,
                    "idx": i,
                    "frequency": f,
                    "open_r": zo.real,
                    "open_x": zo.imag,
                    "short_r": zs.real,
                    "short_x": zs.imag,
                }
                for i, (f, zo, zs) in enumerate(
                    zip(ref["frequency"], ref["open"], ref["short"], strict=True)
                )
            ],
        )
        for key, status, start in (
            ("sweep_complete", "complete", 1),
            ("sweep_running", "running", 2),
        ):
            sweep = ex[key]
            began = _T0 + timedelta(hours=start)
            sweep_id = conn.execute(
                t["sweeps"].insert().returning(t["sweeps"].c.id),
                {
                    "dut": sweep["dut"],
                    "meter_id": meter_id,
                    "fixture_id": fixture_id,
                    "reference_set_id": ref_id if status == "complete" else None,
                    "settings": sweep.get("settings"),
                    "status": status,
                    "note": "",
                    "points": len(sweep["frequency"]),
                    "started_at": began,
                    "finished_at": began + timedelta(minutes=2) if status == "complete" else None,
                },
            ).scalar_one()
            conn.execute(
                t["sweep_points"].insert(),
                [
                    {
                        "sweep_id": sweep_id,
                        "idx": i,
                        "frequency": f,
                        "raw_r": z.real,
                        "raw_x": z.imag,
                    }
                    for i, (f, z) in enumerate(zip(sweep["frequency"], sweep["raw"], strict=True))
                ],
            )
        plan_text, plan_name = ex["plan"]
        plan_id = conn.execute(
            t["plans"].insert().returning(t["plans"].c.id),
            {"hash": plan_hash(plan_text), "name": plan_name, "text": plan_text, "created_at": _T0},
        ).scalar_one()
        for i, (serial, lot, attempt, outcome, bin_, ls, rdc, q) in enumerate(ex["units"]):
            began = _T0 + timedelta(days=1, minutes=i)
            unit_id = conn.execute(
                t["units"].insert().returning(t["units"].c.id),
                {
                    "attempt_id": attempt_id_of(i),
                    "serial": serial,
                    "serial_key": identity_key(serial),
                    "lot": lot,
                    "attempt": attempt,
                    "station": "bench-1",
                    "operator": "demo operator",
                    "plan_id": plan_id,
                    "reference_set_id": ref_id,
                    "meter_id": meter_id,
                    "fixture_id": fixture_id,
                    "started_at": began,
                    "finished_at": began + timedelta(seconds=20),
                    "outcome": outcome,
                    "bin": bin_,
                    "notes": "",
                    "saved_at": began + timedelta(seconds=20),
                },
            ).scalar_one()
            ls_ok = "pass" if 3.3e-4 <= ls <= 3.5e-4 else "fail"
            conn.execute(
                t["measurements"].insert(),
                [
                    {
                        "unit_id": unit_id,
                        "seq": 0,
                        "parameter": "Ls",
                        "frequency": 1e3,
                        "value": ls,
                        "si_unit": "H",
                        "low_limit": 3.3e-4,
                        "high_limit": 3.5e-4,
                        "verdict": ls_ok,
                    },
                    {
                        "unit_id": unit_id,
                        "seq": 1,
                        "parameter": "Rdc",
                        "frequency": None,
                        "value": rdc,
                        "si_unit": "ohm",
                        "low_limit": None,
                        "high_limit": 5.5,
                        "verdict": "pass",
                    },
                    {
                        "unit_id": unit_id,
                        "seq": 2,
                        "parameter": "Q",
                        "frequency": 1e5,
                        "value": None if math.isnan(q) else q,
                        "si_unit": "",
                        "low_limit": 30.0,
                        "high_limit": None,
                        "verdict": "pass" if 30.0 <= q < math.inf else "error",
                    },
                ],
            )

    try:
        db.write("filling an old store", work)
    finally:
        db.dispose()
