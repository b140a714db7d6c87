"""Reading the DC-bias parts of a plan file: ``[bias]``, a step's ``bias`` and ``[[saturation]]``.

A plan that uses any bias states its largest, ``max_bias`` under ``[bias]`` (with the ramp's
``ramp_step`` and ``ramp_dwell``); a step's ``bias`` and a saturation check's limits may not
exceed it. A ``[[saturation]]`` table is a limit (``minimum`` and/or ``maximum``, in A) on the
current at which Ls at ``frequency`` has dropped by ``drop`` from zero bias, found on a sweep of
``points`` bias currents from 0 A to ``max_bias``. Refusals are :class:`PlanError` lines like
every other key's (:mod:`acquire.production.plan_file`).
"""

from __future__ import annotations

import dataclasses
from collections.abc import Mapping
from typing import Any

from acquire.errors import InputError
from acquire.production.plan import SATURATION, BiasRamp, Check
from acquire.production.plan_values import (
    UNITS,
    LimitError,
    TableReader,
    check_name,
    read_limit,
)
from acquire.units import format_si, parse_fraction, parse_quantity

SATURATION_KEYS = ("frequency", "drop", "points", "minimum", "maximum")
#: Points of a saturation check's bias sweep when the plan does not say.
SATURATION_POINTS = 25


class BiasTables(TableReader):
    """Reads frequencies, the plan's bias and its saturation checks."""

    def frequency(self, raw: Any, path: str) -> float:
        value = self.quantity(raw, lambda t: parse_quantity(t, "Hz"), path, '"10kHz"')
        if value <= 0:
            raise self.fail(
                path, f"{format_si(value, 'Hz')} is not above 0 Hz", 'write e.g. "10kHz"'
            )
        return value

    def bias_ramp(self, table: Mapping[str, Any]) -> BiasRamp:
        """The ``[bias]`` table: the plan's largest bias and its ramp (defaults of BiasRamp)."""
        default = BiasRamp()
        maximum = None
        if "max_bias" in table:
            maximum = self.current(table["max_bias"], "bias.max_bias")
            if maximum == 0:
                raise self.fail("bias.max_bias", "0 A allows no bias", 'write e.g. "6A"')
        step = default.step
        if "ramp_step" in table:
            step = self.current(table["ramp_step"], "bias.ramp_step")
            if step == 0:
                raise self.fail("bias.ramp_step", "a step of 0 A never moves", 'write e.g. "0.5A"')
        dwell = default.dwell
        if "ramp_dwell" in table:
            path = "bias.ramp_dwell"
            dwell = self.quantity(
                table["ramp_dwell"], lambda t: parse_quantity(t, "s"), path, '"50ms"'
            )
            if not 0 <= dwell <= 60:
                raise self.fail(path, f"{dwell:g} s is not 0 to 60 s", 'write e.g. "50ms"')
        return BiasRamp(maximum=maximum, step=step, dwell=dwell)

    def current(self, raw: Any, path: str) -> float:
        """A DC current of 0 A or more."""
        value = self.quantity(raw, lambda t: parse_quantity(t, "A"), path, '"3A"')
        if value < 0:
            raise self.fail(path, f"{format_si(value, 'A')} is negative", 'write e.g. "3A"')
        return value

    def allowed_bias(self, value: float, ramp: BiasRamp, path: str, what: str) -> None:
        """Refuse a bias (or a current limit) the plan's largest bias does not allow."""
        if ramp.maximum is None:
            raise self.fail(
                path,
                f"{what} needs the plan's largest bias",
                'add max_bias = "6A" (at most what the part and fixture are rated for) under '
                "[bias]",
            )
        if value > ramp.maximum:
            raise self.fail(
                path,
                f"{format_si(value, 'A')} is above the plan's max_bias of "
                f"{format_si(ramp.maximum, 'A')}",
                "lower it, or raise bias.max_bias if the part and fixture are rated for it",
            )

    def step_bias(
        self, step: Mapping[str, Any], path: str, frequency: float | None, ramp: BiasRamp
    ) -> float | None:
        """A step's DC bias in A (None: none, and "0A" is none)."""
        if "bias" not in step:
            return None
        if frequency is None:
            raise self.fail(f"{path}.bias", "the DC step is measured without bias", "remove it")
        value = self.current(step["bias"], f"{path}.bias")
        if value == 0:
            return None
        self.allowed_bias(value, ramp, f"{path}.bias", "a step under bias")
        return value

    def saturation(self, data: Mapping[str, Any], ramp: BiasRamp) -> tuple[Check, ...]:
        """The ``[[saturation]]`` checks: the current where Ls has dropped by ``drop``."""
        found: dict[str, Check] = {}
        for i, row in enumerate(self.tables(data, "saturation", "saturation"), 1):
            path = f"saturation[{i}]"
            self.known(row, SATURATION_KEYS, path)
            if ramp.maximum is None:
                self.allowed_bias(0.0, ramp, path, "a saturation check")
            if "frequency" not in row:
                raise self.fail(path, "the check has no frequency", 'add frequency = "100kHz"')
            frequency = self.frequency(row["frequency"], f"{path}.frequency")
            if "drop" not in row:
                raise self.fail(path, "the check has no drop", 'add drop = "20%"')
            drop = self.drop(row["drop"], f"{path}.drop")
            points = self.count(row, "points", path, SATURATION_POINTS) or SATURATION_POINTS
            if points < 3:
                raise self.fail(f"{path}.points", f"{points} points cannot bracket a drop",
                                "write 3 or more (25 is usual)")  # fmt: skip
            limits = {k: v for k, v in row.items() if k in ("minimum", "maximum")}
            if not limits:
                raise self.fail(path, "the check has no limit", 'add minimum = "2.5A" (or maximum)')
            try:
                limit = read_limit(limits, SATURATION)
            except LimitError as exc:
                raise self.fail(f"{path}.{exc.key}", exc.reason, exc.todo) from None
            check = Check(SATURATION, frequency, limit, UNITS[SATURATION])
            for side in ("minimum", "maximum"):
                if side in row:
                    value = check.limit.low if side == "minimum" else check.limit.high
                    assert value is not None
                    self.allowed_bias(value, ramp, f"{path}.{side}", "a saturation check")
            check = dataclasses.replace(check, drop=drop, points=points)
            if check.key in found:
                raise self.fail(path, f"{check_name(check)} is checked twice",
                                "keep one check per drop and frequency")  # fmt: skip
            found[check.key] = check
        return tuple(found.values())

    def drop(self, raw: Any, path: str) -> float:
        todo = 'write a percentage, e.g. "20%"'
        if isinstance(raw, bool) or not isinstance(raw, str | int | float):
            raise self.fail(path, f"{raw!r} is not a percentage", todo)
        try:
            value = parse_fraction(raw)
        except InputError as exc:
            raise self.fail(path, str(exc), todo) from None
        if not 0 < value < 1:
            raise self.fail(path, f"{raw!r} is not between 0 % and 100 %", todo)
        return value
