"""A test plan: what a production station measures on each unit and how it judges and bins it.

These are the plain, frozen objects the rest of production testing works with; reading them
from a TOML file (and refusing a malformed one) is :mod:`acquire.production.plan_file`. All
values are SI (henry, ohm, hertz, seconds, degrees Celsius for temperatures).

- A :class:`Check` judges one quantity (a key of :data:`acquire.impedance.KEYS`, or ``"Rdc"``,
  the winding's DC resistance corrected to 20 °C) at one frequency (None for ``Rdc``) against
  its :class:`Limit` (the tolerance limits, before any guard band). An AC check may be made
  under a DC ``bias`` (A); a saturation check (quantity ``"Isat"``) judges the current at which
  Ls has dropped by ``drop`` from its zero-bias value, found on a bias sweep of ``points``
  points from 0 A to the plan's largest bias (:class:`BiasRamp`).
- A :class:`BinRule` is a class (for example a tighter tolerance on Ls) a passing unit goes into
  when every one of its checks is satisfied; the first rule satisfied wins.
- The :class:`DecisionRule` states, as ILAC-G8:09/2019 asks, simple or guard-banded acceptance
  (guard band ``w = guard_factor × U``, U the expanded uncertainty with k = 2), and binary
  (pass/fail) or non-binary (pass, conditional pass, conditional fail, fail) statements.
"""

from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np

#: The quantity name of the winding's DC resistance (corrected to 20 °C).
DC_RESISTANCE = "Rdc"
#: The quantity name of a saturation current (A): where Ls has dropped by a stated fraction.
SATURATION = "Isat"
#: Reference temperature of a corrected DC resistance, °C.
REFERENCE_TEMPERATURE = 20.0

#: Statements of a decision (the unit's outcome is the worst of its checks' statements).
PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, FAIL = (
    "pass",
    "conditional pass",
    "conditional fail",
    "fail",
)
#: A unit whose measurement failed on the meter: never pass or fail.
ERROR = "error"
#: The bin of a unit that fails (or conditionally fails) any check.
REJECT_BIN = "reject"


@dataclass(frozen=True)
class Limit:
    """Tolerance limits in SI units: ``low`` and/or ``high`` (None for an open side).

    ``nominal`` is set when the plan wrote the limit as nominal ± tolerance; ``text`` is how the
    plan wrote it, for screens and ``plan check`` (e.g. ``"330 µH ± 5 %"``, ``"≤ 1.2 Ω"``).
    """

    low: float | None
    high: float | None
    nominal: float | None = None
    text: str = ""


@dataclass(frozen=True)
class Check:
    """One judged quantity at one frequency (Hz; None for the DC resistance ``Rdc``).

    ``bias`` is the DC bias (A) the quantity is measured under (None: none). A saturation check
    (quantity :data:`SATURATION`) has its ``drop`` (a fraction, 0 to 1) and the ``points`` of its
    bias sweep, from 0 A to the plan's largest bias.
    """

    quantity: str
    frequency: float | None
    limit: Limit
    unit: str = ""
    bias: float | None = None
    drop: float | None = None
    points: int | None = None

    @property
    def name(self) -> str:
        """The quantity as recorded: ``"Ls"``, or ``"Isat20%"`` for a saturation current."""
        if self.drop is None:
            return self.quantity
        return f"{self.quantity}{self.drop * 100:g}%"

    @property
    def key(self) -> str:
        """A short unique name: ``"Ls@10000"`` (frequency in Hz, as ``%g``), ``"Rdc"``,
        ``"Ls@100000@3A"`` under a bias (A, as ``%g``), ``"Isat20%@100000"``. A check without a
        bias keeps the name it had before biases existed."""
        if self.frequency is None:
            return self.name
        key = f"{self.name}@{self.frequency:g}"
        return key if self.bias is None else f"{key}@{self.bias:g}A"

    @property
    def saturation(self) -> bool:
        return self.quantity == SATURATION


@dataclass(frozen=True)
class BinRule:
    """A bin (class) a passing unit goes into when all its ``checks`` are satisfied."""

    name: str
    checks: tuple[Check, ...]


@dataclass(frozen=True)
class DecisionRule:
    """Simple (``guard_factor`` 0) or guard-banded acceptance; binary or non-binary statements."""

    guarded: bool = True
    guard_factor: float = 1.0
    binary: bool = True

    @property
    def factor(self) -> float:
        """The guard band in units of U: ``guard_factor`` when guarded, else 0."""
        return self.guard_factor if self.guarded else 0.0


@dataclass(frozen=True)
class MeterSettings:
    """Meter settings for every unit: level (V rms), speed word, averaging, and ``repeats``
    (readings per frequency; 2 or more adds the unit's own scatter as Type A uncertainty)."""

    level: float | None = None
    speed: str | None = None
    averaging: int | None = None
    repeats: int = 1


@dataclass(frozen=True)
class Temperature:
    """Where the winding temperature comes from: ``"fixed"`` (``value`` °C), ``"per-lot"`` (typed
    when the station starts a lot), or ``"none"`` (the plan judges no DC resistance).
    ``half_width`` (K) bounds its error, taken as a rectangular distribution."""

    source: str = "none"
    value: float | None = None
    half_width: float = 1.0


@dataclass(frozen=True)
class BiasRamp:
    """The plan's DC bias: the largest bias any check may use (A; None when no check uses
    one), and how it is ramped: at most ``step`` (A) at a time, ``dwell`` (s) after each step."""

    maximum: float | None = None
    step: float = 0.5
    dwell: float = 0.05


@dataclass(frozen=True)
class SerialPolicy:
    """Serials must match ``pattern`` (a Python regular expression, matched in full).

    ``seen_before`` says what a serial whose latest attempt passed means: ``"retest"`` (measure
    the same unit again, as a new attempt) or ``"refuse"`` (a duplicate label: refused).
    """

    pattern: str = ".+"
    seen_before: str = "refuse"


@dataclass(frozen=True)
class RetestPolicy:
    """At most ``attempts`` attempts per serial (the first included); a serial whose latest
    attempt failed may be tested again when ``on_fail``, one that ended in a meter error when
    ``on_error``. Every attempt is stored: the first is the first-pass result, the latest the
    final one."""

    attempts: int = 3
    on_fail: bool = True
    on_error: bool = True


@dataclass(frozen=True)
class CheckStandardPlan:
    """The check standard a station's results depend on (``[check_standard]``): its ``name``, and
    ``max_age`` (seconds; None: no limit), how old its newest check may be before the station
    stops (:mod:`acquire.production.check_guard`)."""

    name: str
    max_age: float | None = None


@dataclass(frozen=True)
class TestPlan:
    """A whole test plan; ``text`` is the file's exact text (stored with every unit, with its
    SHA-256 :attr:`hash`), ``source`` where it was read from."""

    __test__ = False  # not a pytest test class

    name: str
    version: str
    part: str
    checks: tuple[Check, ...]
    notes: str = ""
    fixture: str = ""
    max_reference_age: float | None = 8 * 3600.0
    meter: MeterSettings = field(default_factory=MeterSettings)
    temperature: Temperature = field(default_factory=Temperature)
    bins: tuple[BinRule, ...] = ()
    otherwise_bin: str = "pass"
    decision: DecisionRule = field(default_factory=DecisionRule)
    serial: SerialPolicy = field(default_factory=SerialPolicy)
    retest: RetestPolicy = field(default_factory=RetestPolicy)
    bias: BiasRamp = field(default_factory=BiasRamp)
    check_standard: CheckStandardPlan | None = None
    text: str = ""
    source: str = ""

    @property
    def hash(self) -> str:
        """SHA-256 of :attr:`text`, as the store keys plans."""
        from acquire.store.catalog import plan_hash

        return plan_hash(self.text)

    @property
    def frequencies(self) -> np.ndarray:
        """The distinct AC frequencies of the checks, ascending (one list sweep measures all)."""
        found = {c.frequency for c in self.checks if c.frequency is not None}
        return np.array(sorted(found), dtype=float)

    def frequencies_at(self, bias: float | None) -> np.ndarray:
        """The distinct frequencies of the AC checks measured at ``bias`` (None: zero bias),
        with every saturation sweep's frequencies at the sweep's points, ascending."""
        found = {c.frequency for c in self.checks if not c.saturation and c.bias == bias}
        level = 0.0 if bias is None else bias
        found |= {c.frequency for c in self.checks if c.saturation and level in self.sweep(c)}
        return np.array(sorted(f for f in found if f is not None), dtype=float)

    def sweep(self, check: Check) -> tuple[float, ...]:
        """The bias currents (A) of a saturation check's sweep: ``points`` from 0 A to the
        plan's largest bias, evenly spaced."""
        if not check.saturation or self.bias.maximum is None or check.points is None:
            return ()
        return tuple(float(x) for x in np.linspace(0.0, self.bias.maximum, check.points))

    @property
    def bias_levels(self) -> tuple[float, ...]:
        """Every bias above zero that a unit is measured at (A), ascending."""
        found = {c.bias for c in self.checks if c.bias is not None}
        for check in self.checks:
            found.update(self.sweep(check))
        return tuple(sorted(b for b in found if b is not None and b > 0))

    @property
    def needs_bias(self) -> bool:
        """True when any check is measured under a DC bias (a biased or saturation check)."""
        return bool(self.bias_levels)

    @property
    def needs_dc_resistance(self) -> bool:
        return any(c.quantity == DC_RESISTANCE for c in self.checks)

    @property
    def title(self) -> str:
        """``name`` and ``version`` on one line, e.g. ``"DC-330 final test v3"``."""
        return f"{self.name} v{self.version}" if self.version else self.name
