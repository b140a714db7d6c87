"""Reading a test plan from its TOML file, refusing a malformed one with a message that says where.

The layout is our own (``acquire/examples/coil-plan.toml`` shows every key,
``acquire/examples/README.md`` explains them): ``[plan]``, ``[references]``, ``[meter]``,
``[temperature]``, ``[decision]``, ``[serial]``, ``[retest]``, ``[bias]``, ``[[step]]`` tables
with their ``[[step.check]]`` (a step may be measured under a DC ``bias``), ``[[saturation]]``
tables (limits on the saturation current at a drop), ``[[bin]]`` tables with their
``[[bin.check]]`` and ``[bins]``. A plan that uses any bias must state its largest, ``max_bias``
under ``[bias]``; no bias of the plan may exceed it. Every
quantity is text with its unit and an optional SI prefix (``"344uH"``, ``"4.95ohm"``,
``"10kHz"``, ``"3%"``), read with :mod:`acquire.units`; a plain number is taken in SI units.

A malformed plan raises :class:`PlanError`, one line:
``"<file>: <key path or line N>: <reason>; <what to do>"``. Key paths count tables from 1:
``step[2].check[1].tolerance`` is the tolerance of the first check of the second ``[[step]]``.
"""

from __future__ import annotations

import dataclasses
import re
import tomllib
from collections.abc import Mapping
from pathlib import Path
from typing import Any

from acquire.impedance import KEYS
from acquire.production.check_guard import read_section
from acquire.production.plan import (
    DC_RESISTANCE,
    REJECT_BIN,
    BiasRamp,
    BinRule,
    Check,
    DecisionRule,
    MeterSettings,
    RetestPolicy,
    SerialPolicy,
    Temperature,
    TestPlan,
)
from acquire.production.plan_bias import BiasTables
from acquire.production.plan_text import describe_plan
from acquire.production.plan_values import (
    UNITS,
    LimitError,
    PlanError,
    age_seconds,
    check_name,
    either,
    kelvin,
    read_limit,
    toml_message,
)
from acquire.units import format_si, parse_quantity, parse_temperature

__all__ = ["PlanError", "describe_plan", "example_plan_path", "load_plan", "parse_plan"]

#: The top-level keys of a plan file, and the keys allowed in each of its plain tables.
TOP_KEYS = (
    "plan", "references", "meter", "temperature", "decision", "serial", "retest", "bias", "step",
    "saturation", "bin", "bins", "check_standard",
)  # fmt: skip
TABLE_KEYS: dict[str, tuple[str, ...]] = {
    "plan": ("name", "version", "part", "notes"),
    "references": ("fixture", "max_age"),
    "meter": ("level", "speed", "averaging", "repeats"),
    "temperature": ("source", "value", "half_width"),
    "decision": ("rule", "guard_factor", "statements"),
    "serial": ("pattern", "seen_before"),
    "retest": ("attempts", "on_fail", "on_error"),
    "bias": ("max_bias", "ramp_step", "ramp_dwell"),
    "bins": ("otherwise",),
    "check_standard": ("name", "max_age"),
}
LIMIT_KEYS = ("nominal", "tolerance", "tolerance_low", "tolerance_high", "minimum", "maximum")
STEP_KEYS = ("frequency", "dc", "bias", "check")
BIN_KEYS = ("name", "check")
SPEEDS = ("fast", "medium", "slow")
TEMPERATURE_SOURCES = ("fixed", "per-lot", "none")
#: Bin names the station itself uses (compared without case).
RESERVED_BINS = (REJECT_BIN, "error")


def example_plan_path(kind: str = "coil") -> Path:
    """An example plan shipped with the tool: ``acquire/examples/coil-plan.toml`` (the demo
    coil), or with ``kind="choke"`` ``choke-plan.toml`` (a power choke under DC bias)."""
    from importlib.resources import files

    return Path(str(files("acquire").joinpath("examples", f"{kind}-plan.toml")))


def load_plan(path: str | Path) -> TestPlan:
    """Read and check the plan file at ``path``; raises :class:`PlanError` when it is malformed."""
    where = str(path)
    try:
        data = Path(path).read_bytes()
    except FileNotFoundError:
        raise PlanError(
            f"{where}: no such file; give the path of a test plan "
            f"(the example one is {example_plan_path()})"
        ) from None
    except OSError as exc:
        raise PlanError(f"{where}: cannot be read ({exc.strerror}); give a readable file") from None
    try:
        text = data.decode("utf-8")
    except UnicodeDecodeError as exc:
        line = data[: exc.start].count(b"\n") + 1
        raise PlanError(f"{where}: line {line}: not UTF-8 text; save the plan as UTF-8") from None
    return parse_plan(text, where)


def parse_plan(text: str, source: str = "<text>") -> TestPlan:
    """The :class:`TestPlan` written in ``text`` (TOML); ``source`` names it in messages."""
    try:
        data = tomllib.loads(text)
    except tomllib.TOMLDecodeError as exc:
        raise PlanError(toml_message(str(exc), text, source)) from None
    except ValueError:  # Python's limit on the digits of an integer (4300 by default)
        raise PlanError(
            f"{source}: an integer of thousands of digits; TOML integers fit in 64 bits "
            "(TOML 1.0, Integer): write a quantity with its unit instead"
        ) from None
    return _Reader(source).plan(data, text)


class _Reader(BiasTables):
    """Reads a parsed TOML document into a :class:`TestPlan`."""

    def plan(self, data: dict[str, Any], text: str) -> TestPlan:
        self.known(data, TOP_KEYS, "")
        for key, allowed in TABLE_KEYS.items():
            self.known(self.table(data, key, key), allowed, key)
        head = self.table(data, "plan", "plan")
        name = self.name(head, "name", "plan")
        if not name:
            raise self.fail("plan.name", "the plan has no name", 'add name = "..." under [plan]')
        version, part = self.name(head, "version", "plan"), self.name(head, "part", "plan")
        notes = self.text(head, "notes", "plan")
        references = self.table(data, "references", "references")
        fixture = self.name(references, "fixture", "references")
        max_age = self.age(references)
        meter = self.meter(self.table(data, "meter", "meter"))
        temperature = self.temperature(self.table(data, "temperature", "temperature"))
        decision = self.decision(self.table(data, "decision", "decision"))
        serial = self.serial(self.table(data, "serial", "serial"))
        retest = self.retest(self.table(data, "retest", "retest"))
        ramp = self.bias_ramp(self.table(data, "bias", "bias"))
        checks = self.steps(data, ramp) + self.saturation(data, ramp)
        if any(c.quantity == DC_RESISTANCE for c in checks) and temperature.source == "none":
            raise self.fail(
                "temperature.source",
                "the plan judges the DC resistance but gives no winding temperature",
                'set source = "fixed" with a value, or source = "per-lot"',
            )
        bins, otherwise = self.bins(data, {c.key: c for c in checks})
        standard = None
        if "check_standard" in data:
            standard = read_section(self, self.table(data, "check_standard", "check_standard"))
        return TestPlan(
            name=name, version=version, part=part, notes=notes, checks=checks,
            fixture=fixture, max_reference_age=max_age, meter=meter, temperature=temperature,
            bins=bins, otherwise_bin=otherwise, decision=decision, serial=serial,
            retest=retest, bias=ramp, check_standard=standard, text=text, source=self.source,
        )  # fmt: skip

    def steps(self, data: Mapping[str, Any], ramp: BiasRamp) -> tuple[Check, ...]:
        checks: dict[str, tuple[Check, str]] = {}
        steps = self.tables(data, "step", "step")
        if not steps:
            raise self.fail("step", "the plan has no [[step]]", "add a [[step]] with a frequency")
        for i, step in enumerate(steps, 1):
            path = f"step[{i}]"
            self.known(step, STEP_KEYS, path)
            frequency = self.step_frequency(step, path)
            bias = self.step_bias(step, path, frequency, ramp)
            rows = self.tables(step, "check", f"{path}.check")
            if not rows:
                raise self.fail(
                    path, "the step checks nothing", f"add a [[step.check]] after {path}"
                )
            for j, row in enumerate(rows, 1):
                check = self.check(row, frequency, f"{path}.check[{j}]", LIMIT_KEYS)
                check = dataclasses.replace(check, bias=bias)
                if check.key in checks:
                    self.twice(check, *checks[check.key], f"{path}.check[{j}]")
                checks[check.key] = (check, f"{path}.check[{j}]")
        return tuple(check for check, _ in checks.values())

    def twice(self, check: Check, first: Check, first_path: str, path: str) -> None:
        if first.frequency == check.frequency and first.bias == check.bias:
            raise self.fail(path, f"{check_name(check)} is checked twice (also at {first_path})",
                            "keep one check per quantity and frequency")  # fmt: skip
        raise self.fail(
            f"{path.rsplit('.', 1)[0]}.frequency",
            f"{check.frequency!r} Hz here and {first.frequency!r} Hz at {first_path} agree to "
            f"6 digits, so their checks share the name {check.key}",
            "merge the two steps or move the frequencies (or biases) apart",
        )

    def step_frequency(self, step: Mapping[str, Any], path: str) -> float | None:
        dc = self.flag(step, "dc", path, False)
        if dc and "frequency" in step:
            raise self.fail(path, "a step is either dc = true or has a frequency", "remove one")
        if dc:
            return None
        if "frequency" not in step:
            raise self.fail(
                path, "the step has no frequency", 'add frequency = "10kHz" or dc = true'
            )
        return self.frequency(step["frequency"], f"{path}.frequency")

    def check(
        self, row: Mapping[str, Any], frequency: float | None, path: str, allowed: tuple[str, ...]
    ) -> Check:
        self.known(row, ("quantity", *allowed), path)
        if "quantity" not in row:
            raise self.fail(path, "the check has no quantity", 'add quantity = "Ls" (or Rs, Q ...)')
        quantity = self.text(row, "quantity", path)
        dc = frequency is None
        known = (DC_RESISTANCE,) if dc else KEYS
        if quantity not in known:
            where = "the DC step" if dc else "an AC step"
            raise self.fail(
                f"{path}.quantity",
                f"{quantity!r} is not measured by {where}",
                f"use {either(known)}",
            )
        try:
            limit = read_limit(row, quantity)
        except LimitError as exc:
            raise self.fail(f"{path}{exc.key and '.' + exc.key}", exc.reason, exc.todo) from None
        return Check(quantity, frequency, limit, UNITS[quantity])

    def bins(
        self, data: Mapping[str, Any], plan_checks: Mapping[str, Check]
    ) -> tuple[tuple[BinRule, ...], str]:
        rules: list[BinRule] = []
        for i, row in enumerate(self.tables(data, "bin", "bin"), 1):
            path = f"bin[{i}]"
            self.known(row, BIN_KEYS, path)
            name = self.bin_name(row, "name", path, [r.name for r in rules])
            rows = self.tables(row, "check", f"{path}.check")
            if not rows:
                raise self.fail(path, f"bin {name!r} has no check", "add a [[bin.check]] after it")
            checks: list[Check] = []
            for j, check_row in enumerate(rows, 1):
                where = f"{path}.check[{j}]"
                check = self.bin_check(check_row, where, plan_checks)
                if any(c.key == check.key for c in checks):
                    raise self.fail(
                        where, f"{check_name(check)} appears twice in bin {name!r}", "keep one"
                    )
                checks.append(check)
            rules.append(BinRule(name, tuple(checks)))
        table = self.table(data, "bins", "bins")
        otherwise = self.bin_name(table, "otherwise", "bins", [r.name for r in rules], "pass")
        return tuple(rules), otherwise

    def bin_name(
        self, table: Mapping[str, Any], key: str, path: str, taken: list[str], default: str = ""
    ) -> str:
        name = self.name(table, key, path, default)
        if not name:
            raise self.fail(f"{path}.{key}", "the bin has no name", 'add name = "..."')
        if name.casefold() in RESERVED_BINS:
            raise self.fail(f"{path}.{key}", f"{name!r} is the station's own bin", "choose another")
        if name in taken:
            raise self.fail(
                f"{path}.{key}", f"bin {name!r} is named twice", "give each bin its own name"
            )
        return name

    def bin_check(self, row: Mapping[str, Any], path: str, plan: Mapping[str, Check]) -> Check:
        quantity = row.get("quantity")
        frequency = None
        if quantity != DC_RESISTANCE:
            if "frequency" not in row:
                raise self.fail(path, "the bin's check has no frequency", 'add frequency = "10kHz"')
            frequency = self.frequency(row["frequency"], f"{path}.frequency")
        elif "frequency" in row:
            raise self.fail(f"{path}.frequency", "Rdc is measured at DC", "remove the frequency")
        bias = None
        if "bias" in row:
            bias = self.current(row["bias"], f"{path}.bias") or None
        rest = {k: v for k, v in row.items() if k not in ("frequency", "bias")}
        check = dataclasses.replace(self.check(rest, frequency, path, LIMIT_KEYS), bias=bias)
        if check.key not in plan:
            raise self.fail(
                path,
                f"no step checks {check_name(check)}",
                "a bin can only use a quantity, frequency and bias a step checks",
            )
        return check

    def age(self, table: Mapping[str, Any]) -> float:
        path = "references.max_age"
        raw = table.get("max_age", 8)
        value = self.quantity(raw, age_seconds, path, '"8h" or 8 (hours)')
        if value <= 0:
            raise self.fail(path, "the age must be above 0", 'write e.g. "8h"')
        return value

    def meter(self, table: Mapping[str, Any]) -> MeterSettings:
        level = None
        if "level" in table:
            path = "meter.level"
            level = self.quantity(table["level"], lambda t: parse_quantity(t, "V"), path, '"1V"')
            if level <= 0:
                raise self.fail(
                    path, f"{format_si(level, 'V')} is not above 0 V", 'write e.g. "1V"'
                )
        speed = self.word(table, "speed", "meter", SPEEDS, "medium") if "speed" in table else None
        return MeterSettings(
            level=level,
            speed=speed,
            averaging=self.count(table, "averaging", "meter", None),
            repeats=self.count(table, "repeats", "meter", 1) or 1,
        )

    def temperature(self, table: Mapping[str, Any]) -> Temperature:
        source = self.word(table, "source", "temperature", TEMPERATURE_SOURCES, "none")
        value = None
        if source == "fixed":
            if "value" not in table:
                raise self.fail(
                    "temperature.value", "a fixed temperature needs its value", 'add value = "23C"'
                )
            value = self.quantity(table["value"], parse_temperature, "temperature.value", '"23C"')
        elif "value" in table:
            raise self.fail(
                "temperature.value",
                f'a value is not used with source = "{source}"',
                'remove it, or set source = "fixed"',
            )
        half = self.quantity(table.get("half_width", 1.0), kelvin, "temperature.half_width", '"1K"')
        if half < 0:
            raise self.fail("temperature.half_width", "a half-width is not negative", 'write "1K"')
        return Temperature(source=source, value=value, half_width=half)

    def decision(self, table: Mapping[str, Any]) -> DecisionRule:
        rule = self.word(table, "rule", "decision", ("simple", "guarded"), "guarded")
        statements = self.word(table, "statements", "decision", ("binary", "non-binary"), "binary")
        factor = 1.0
        if "guard_factor" in table:
            if rule == "simple":
                raise self.fail(
                    "decision.guard_factor",
                    "simple acceptance has no guard band",
                    'remove guard_factor or set rule = "guarded"',
                )
            raw = table["guard_factor"]
            factor = self.quantity(
                raw, lambda t: parse_quantity(t, "%"), "decision.guard_factor", "1"
            )
            if factor < 0:
                raise self.fail(
                    "decision.guard_factor", f"{factor:g} is negative", "write 0 or more"
                )
        return DecisionRule(
            guarded=rule == "guarded", guard_factor=factor, binary=statements == "binary"
        )

    def serial(self, table: Mapping[str, Any]) -> SerialPolicy:
        pattern = self.text(table, "pattern", "serial", ".+")
        try:
            compiled = re.compile(pattern)
        except (re.error, OverflowError, RecursionError) as exc:  # too large or nested too deep
            raise self.fail(
                "serial.pattern",
                f"not a regular expression ({exc})",
                "fix it (Python re syntax, matched in full)",
            ) from None
        if compiled.fullmatch(""):
            raise self.fail(
                "serial.pattern",
                "the pattern accepts an empty serial",
                'require at least one character, e.g. "[A-Z0-9-]+"',
            )
        seen = self.word(table, "seen_before", "serial", ("retest", "refuse"), "refuse")
        return SerialPolicy(pattern=pattern, seen_before=seen)

    def retest(self, table: Mapping[str, Any]) -> RetestPolicy:
        return RetestPolicy(
            attempts=self.count(table, "attempts", "retest", 3) or 3,
            on_fail=self.flag(table, "on_fail", "retest", True),
            on_error=self.flag(table, "on_error", "retest", True),
        )
