"""The JSON messages a station publishes: a unit record, and the station's status.

A unit record (``"schema": "acquire-unit-record/1"``, described by ``unit-record.schema.json``
beside this module) holds one stored test attempt as the store holds it, names instead of row
ids. The JSON is strict: no NaN or Infinity tokens. A measured value that is not a finite number
is ``null`` with ``value_note`` saying why ("invalid" for NaN, "overrange+" / "overrange-" for
an infinite reading); a finite value has ``value_note`` "". An uncertainty is ``null`` when it
is unknown or unbounded; a limit is ``null`` for an open side. Times are ISO 8601 with their UTC
offset (``2026-03-01T08:15:02.123456+00:00``); frequencies in Hz (``null`` for DC values),
values, limits and uncertainties in the measurement's SI ``unit``.

A status (``"schema": "acquire-station-status/1"``, described by ``station-status.schema.json``)
is a :class:`StationState` with the line: state ("running", "blocked" or "stopped") and why,
lot, plan, counts, problems.
"""

from __future__ import annotations

import json
import math
from dataclasses import asdict
from datetime import datetime
from typing import Any

from acquire.production.station_watch import STOPPED, StationState
from acquire.store.publishing import UnitContext
from acquire.store.records import MeasurementRecord, UnitRecord

#: The unit record's schema name and version; the version changes with any change of fields.
UNIT_SCHEMA = "acquire-unit-record/1"
#: The status message's schema name and version.
STATUS_SCHEMA = "acquire-station-status/1"
#: Why a station's retained status says "stopped" when its connection dropped (the MQTT will).
CONNECTION_LOST = "connection lost"


def _time(value: datetime | None) -> str | None:
    return None if value is None else value.isoformat()


def _finite(value: float | None) -> float | None:
    return None if value is None or not math.isfinite(value) else float(value)


def _value(value: float) -> tuple[float | None, str]:
    if math.isnan(value):
        return None, "invalid"
    if math.isinf(value):
        return None, "overrange+" if value > 0 else "overrange-"
    return float(value), ""


def _measurement(m: MeasurementRecord) -> dict[str, Any]:
    value, note = _value(m.value)
    return {
        "parameter": m.parameter,
        "frequency": m.frequency,
        "value": value,
        "value_note": note,
        "unit": m.unit,
        "uncertainty": _finite(m.uncertainty),
        "low": _finite(m.low),
        "high": _finite(m.high),
        "tolerance_low": _finite(m.tolerance_low),
        "tolerance_high": _finite(m.tolerance_high),
        "bias_current": _finite(m.bias_current),
        "verdict": m.verdict,
    }


def unit_message(unit: UnitRecord, context: UnitContext) -> dict[str, Any]:
    """The unit record of ``unit`` (as :data:`UNIT_SCHEMA` describes it)."""
    meter = None if context.meter is None else asdict(context.meter)
    references = None
    if context.reference_set_id is not None:
        references = {"id": context.reference_set_id, "name": context.reference_set_name}
    return {
        "schema": UNIT_SCHEMA,
        "attempt_id": unit.attempt_id,
        "serial": unit.serial,
        "lot": unit.lot,
        "attempt": unit.attempt,
        "outcome": unit.outcome,
        "bin": unit.bin,
        "station": unit.station,
        "operator": unit.operator,
        "plan": {"name": context.plan_name, "hash": context.plan_hash},
        "meter": meter,
        "fixture": context.fixture,
        "reference_set": references,
        "started_at": _time(unit.started_at),
        "finished_at": _time(unit.finished_at),
        "temperature": _finite(unit.temperature),
        "reference_override": unit.reference_override,
        "measurements": [_measurement(m) for m in unit.measurements],
    }


def status_message(state: StationState, line: str) -> dict[str, Any]:
    """The retained status of a station in ``state`` on ``line``."""
    fields = asdict(state)
    fields["started_at"] = _time(state.started_at)
    fields["updated_at"] = _time(state.updated_at)
    return {"schema": STATUS_SCHEMA, "line": line, **fields}


def lost_message(state: StationState, line: str) -> dict[str, Any]:
    """The status the broker publishes for the station if its connection drops (the will)."""
    message = status_message(state, line)
    message.update(state=STOPPED, reason=CONNECTION_LOST)
    return message


def encode(message: dict[str, Any]) -> bytes:
    """A message as strict UTF-8 JSON (NaN or infinity raise ValueError, never leave as tokens)."""
    return json.dumps(message, allow_nan=False, ensure_ascii=False).encode("utf-8")
