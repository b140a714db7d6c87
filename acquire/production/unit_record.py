"""A judged unit in the words the store keeps: its measurement records and the note a record
must carry when a guard band met a value without uncertainty."""

from __future__ import annotations

import numpy as np

from acquire.production.judgement import UnitJudgement
from acquire.production.plan import TestPlan
from acquire.store.records import MeasurementRecord


def unknown_u_note(judgement: UnitJudgement, plan: TestPlan) -> str:
    """What the record must say when a guard band met a value with no uncertainty: its
    acceptance limits are infinite (nothing could be accepted), stored as empty limits."""
    if plan.decision.factor <= 0:
        return ""
    unknown = [j.check.key for j in judgement.judged if not np.isfinite(j.uncertainty)]
    if not unknown:
        return ""
    return (
        f"no uncertainty for {', '.join(unknown)}: under the guard band no value could be "
        "accepted (its stored acceptance limits are empty)"
    )


def measurement_records(
    judgement: UnitJudgement, bias: dict[str, float] | None = None
) -> tuple[MeasurementRecord, ...]:
    """The judged values as store records: the acceptance limits applied, the tolerance limits,
    the verdict and the expanded uncertainty of each, and the bias read back for a check
    measured under bias (``bias`` maps check keys to A)."""
    bias = bias or {}
    return tuple(
        MeasurementRecord(
            j.check.name,
            j.value,
            j.check.unit,
            j.check.frequency,
            j.low,
            j.high,
            j.verdict,
            uncertainty=j.uncertainty,
            tolerance_low=j.check.limit.low,
            tolerance_high=j.check.limit.high,
            bias_current=bias.get(j.check.key, j.check.bias),
        )
        for j in judgement.judged
    )
