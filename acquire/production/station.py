"""The station loop: serial in, measure, judge, bin, record, show; hundreds of times a shift.

A :class:`Station` takes one serial at a time (:meth:`Station.test`): the serial is checked
against the plan (pattern, seen before, retests), the references against their age, meter and
fixture, then the unit is measured (one list sweep plus the DC resistance), judged with the
plan's decision rule, sorted into a bin and recorded in one transaction (or kept in the local
outbox while the store is away: the screen says how many wait). A meter fault makes the
attempt's outcome "error": it is recorded and the serial may be tested again. :meth:`Station.run`
repeats that for every line the screen reads until the end of input or Ctrl-C.

A plan with checks under a DC bias measures them inside :func:`acquire.bias.ramp.energised`
(:mod:`acquire.production.measure`), so the bias is back at zero and off when a unit's
measurement ends, however it ends; the station also ramps the supply to zero and switches it off
before every prompt for a part and when the session ends, as a second line of protection. The
energy a unit stores at the plan's largest bias (½·L·I², L its zero-bias Ls) is shown from the
first unit on; before the first unit, and whenever that energy (or, before any unit, the plan's
estimate from its zero-bias Ls limits) is unknown or above
:data:`acquire.bias.energy.CONFIRM_ABOVE`, the operator must confirm, unless the session runs
``unattended`` (then recorded on every unit).

The station knows nothing of the command line: the meter, the record keeper, the screen and the
ways to read the store come in as objects.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from acquire.bias.energy import CONFIRM_ABOVE, stored_energy
from acquire.production.admission import SerialBook, clean_serial
from acquire.production.judgement import UnitJudgement, error_judgement, judge_unit
from acquire.production.measure import UnitMeasurement, measure_unit
from acquire.production.plan import CONDITIONAL_PASS, PASS, REJECT_BIN, TestPlan
from acquire.production.plan_text import planned_energy
from acquire.production.reference_guard import CAPTURE_HINT, check_problems, reference_blocks
from acquire.production.screen import NOT_TESTED, ShownUnit, StationStatus
from acquire.signals import held, stop_reason
from acquire.store.records import MeasurementRecord, UnitRecord, new_attempt_id
from acquire.store.schema import utc_now
from acquire.units import format_si
from drivers.errors import InstrumentError

#: How many recent units the screen lists.
SHOWN_UNITS = 8


@dataclass(frozen=True)
class StationContext:
    """Who and what a session's units are recorded with.

    ``supply`` is the DC bias supply for a plan with checks under bias (None: the meter's own,
    ``meter.bias()``); ``unattended`` runs such a plan without asking the operator to confirm
    the stored energy (recorded on every unit)."""

    plan: TestPlan
    lot: str
    operator: str
    station: str
    meter_name: str = ""
    plan_id: int | None = None
    meter_id: int | None = None
    fixture_id: int | None = None
    temperature: float | None = None
    override: str = ""
    supply: Any = None
    unattended: bool = False


@dataclass
class Tally:
    """Running counts of a session: per serial its first and latest outcome and latest bin."""

    first: dict[str, str] = field(default_factory=dict)
    latest: dict[str, tuple[str, str]] = field(default_factory=dict)
    attempts: int = 0
    refused: int = 0

    def add(self, serial: str, outcome: str, bin_: str) -> None:
        self.attempts += 1
        self.first.setdefault(serial, outcome)
        self.latest[serial] = (outcome, bin_)

    def bins(self, order: list[str]) -> dict[str, int]:
        counts = dict.fromkeys(order, 0)
        for _, b in self.latest.values():
            if b:
                counts[b] = counts.get(b, 0) + 1
        return counts

    def outcomes(self) -> dict[str, int]:
        counts: dict[str, int] = {}
        for o, _ in self.latest.values():
            counts[o] = counts.get(o, 0) + 1
        return counts


def _fault(text: str) -> UnitMeasurement:
    """A unit whose measurement a meter fault stopped before it began."""
    empty = np.zeros(0)
    return UnitMeasurement({}, {}, empty, empty.astype(complex), None, None, None, text, 0.0)


def _unknown_u_note(judgement: UnitJudgement, plan: TestPlan) -> str:
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


#: What a unit of a session run unattended with bias checks records.
UNATTENDED_NOTE = "run unattended: the stored energy under bias was not confirmed by an operator"


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


class Station:
    """One station's session; see the module docstring.

    ``references`` is the (id, ReferenceSet) in use and ``reload_references`` finds the newest
    one again (after the operator captured new references); ``history(serial)`` gives the
    outcomes of a serial's stored attempts; ``keeper`` saves a :class:`UnitRecord` and says
    whether it reached the store (True) or waits in the outbox (False); ``screen`` shows a
    :class:`StationStatus`, rings, and reads lines.
    """

    def __init__(
        self,
        meter: Any,
        context: StationContext,
        keeper: Any,
        screen: Any,
        references: tuple[int | None, Any],
        reload_references: Callable[[], tuple[int | None, Any]],
        history: Callable[[str], list[str]],
        measure: Callable[..., UnitMeasurement] = measure_unit,
    ) -> None:
        self.meter = meter
        self.context = context
        self.keeper = keeper
        self.screen = screen
        self.reference_id, self.references = references
        self._reload = reload_references
        self._measure = measure
        self.book = SerialBook(context.plan, history)
        self.tally = Tally()
        self.last: list[ShownUnit] = []
        self.current: ShownUnit | None = None
        self.message = ""
        self._in_fixture = ""
        self._checked: tuple[Any, list[str]] = (object(), [])
        #: The stored energy at the plan's largest bias: measured on a unit, else planned.
        self.energy: float | None = planned_energy(context.plan)
        self.energy_measured = False
        self.confirmed = False

    # -- state ---------------------------------------------------------------------------------

    @property
    def blocks(self) -> list[str]:
        """Why the references stop the station now (empty when they do not)."""
        c = self.context
        if self._checked[0] is not self.references:
            found = check_problems(self.references, c.plan.frequencies)
            self._checked = (self.references, found)
        return reference_blocks(
            self.references, c.meter_name, c.plan.fixture, c.plan.max_reference_age,
            problems=self._checked[1],
        )  # fmt: skip

    @property
    def blocked(self) -> str:
        """The reason the station is stopped ('' when it runs, or runs on an override)."""
        found = self.blocks
        if not found or self.context.override:
            return ""
        return f"{'; '.join(found)}. {CAPTURE_HINT}"

    def status(self) -> StationStatus:
        c, t = self.context, self.tally
        passed = sum(1 for o, _ in t.latest.values() if o == PASS)
        order = [b.name for b in c.plan.bins] + [c.plan.otherwise_bin, REJECT_BIN]
        override = c.override if self.blocks else ""
        return StationStatus(
            station=c.station,
            operator=c.operator,
            lot=c.lot,
            plan=c.plan.title,
            tested=len(t.latest),
            passed=passed,
            first_pass=sum(1 for o in t.first.values() if o == PASS),
            bins=t.bins(order),
            outcomes=t.outcomes(),
            waiting=self.keeper.waiting,
            blocked=self.blocked,
            override=override,
            last=tuple(self.last[:SHOWN_UNITS]),
            current=self.current,
            message=self.message,
            energy=self.energy_line(),
        )

    def energy_line(self) -> str:
        """The stored-energy line of a plan with bias checks ('' for a plan without)."""
        plan = self.context.plan
        if not plan.needs_bias or plan.bias.maximum is None:
            return ""
        at = format_si(plan.bias.maximum, "A")
        if self.energy is None:
            return (
                f"stored energy at {at}: unknown until the first unit is measured; "
                "ramped to 0 A before every part change"
            )
        how = "measured, ½·L·I²" if self.energy_measured else "from the plan's limits, ½·L·I²"
        return f"stored energy at {at}: {format_si(self.energy, 'J')} ({how})"

    def show(self) -> None:
        self.screen.show(self.status())

    def resume(self, attempts: Any) -> int:
        """Count the lot's attempts already stored from this station (rows with ``serial``,
        ``outcome`` and ``bin``, oldest first), so a restarted session goes on with the lot's
        counts; returns how many were counted."""
        n = 0
        for row in attempts:
            self.tally.add(str(row.serial), str(row.outcome), str(row.bin))
            n += 1
        return n

    def reload_references(self) -> None:
        """Take the newest reference set of the plan's fixture from the store."""
        self.reference_id, self.references = self._reload()
        self.message = (
            f"references reloaded: set {self.reference_id}"
            if self.reference_id is not None
            else "no reference set found for this fixture"
        )

    # -- one unit --------------------------------------------------------------------------------

    def test(self, line: str) -> ShownUnit | None:
        """Take one scanned line through the station; the unit shown, or None if refused."""
        serial = clean_serial(line)
        self.message = ""
        admission = self.book.admit(serial)
        if not admission.admitted:
            self._refuse(serial, admission.refusal)
            return None
        if self.blocked:
            self._refuse(serial, f"{serial} not measured: the station is stopped (above)")
            return None
        started = utc_now()
        attempt_id = new_attempt_id()
        measured = self._measure_unit(serial)
        self._note_energy(measured)
        with held():  # a stop signal or Ctrl-C from here ends the session once it is recorded
            return self._conclude(serial, admission.attempt, attempt_id, started, measured)

    def _conclude(
        self, serial: str, attempt: int, attempt_id: str, started: Any, measured: UnitMeasurement
    ) -> ShownUnit:
        """Judge a measured unit, record it, count it and show it."""
        plan = self.context.plan
        if measured.error:
            judgement = error_judgement(plan)
        else:
            values = {k: (measured.values[k], measured.uncertainty[k]) for k in measured.values}
            judgement = judge_unit(plan, values)
        record = self._record(serial, attempt, attempt_id, started, measured, judgement)
        saved = self.keeper.save(record)
        self.book.record(serial, judgement.outcome)
        self.tally.add(serial, judgement.outcome, judgement.bin)
        failing = tuple(j.describe() for j in judgement.failing)
        if measured.error:
            failing = (f"{measured.error}; scan the serial again to retry",)
        shown = ShownUnit(
            serial=serial,
            attempt=attempt,
            outcome=judgement.outcome,
            bin=judgement.bin,
            failing=failing,
            recorded=bool(saved),
            at=record.finished_at or started,
        )
        self.current = shown
        self.last.insert(0, shown)
        del self.last[SHOWN_UNITS:]
        if self.book.unsure(serial):
            self.message = f"the store was away: {serial}'s earlier attempts could not be checked"
        self.show()
        if judgement.outcome not in (PASS, CONDITIONAL_PASS):
            self.screen.ring()
        return shown

    def _refuse(self, serial: str, reason: str) -> None:
        """Show a scanned line as not tested, in large letters, with the reason."""
        self.tally.refused += 1
        self.message = reason
        self.current = ShownUnit(serial, 0, NOT_TESTED, "", (), True, utc_now())
        self.show()
        self.screen.ring()
        return None

    def _measure_unit(self, serial: str) -> UnitMeasurement:
        """Measure the unit in the fixture; a simulated meter gets a new unit for a new serial."""
        if serial != self._in_fixture and self._has("next_unit"):
            try:
                self.meter.next_unit()
            except InstrumentError as exc:
                return _fault(f"meter fault: {exc}")
        self._in_fixture = serial
        c = self.context
        if c.plan.needs_bias:
            return self._measure(
                self.meter, c.plan, self.references, c.temperature, supply=self.supply
            )
        return self._measure(self.meter, c.plan, self.references, c.temperature)

    @property
    def supply(self) -> Any:
        """The bias supply: the context's, else the meter's own."""
        return self.context.supply if self.context.supply is not None else self.meter.bias()

    def bias_off(self) -> None:
        """Ramp the bias to zero and switch it off (a plan with bias checks; nothing otherwise).
        A meter that does not answer leaves a warning: nothing then shows the bias is off."""
        plan = self.context.plan
        if not plan.needs_bias:
            return
        try:
            with held():
                self.supply.ramp_to(0.0, plan.bias.step, plan.bias.dwell)
        except InstrumentError as exc:
            self.message = (
                f"could not confirm the bias is off ({exc}): check the meter and the supply "
                "before touching the part"
            )

    def needs_confirmation(self) -> bool:
        """True while the operator must confirm the stored energy before the next unit."""
        if not self.context.plan.needs_bias or self.context.unattended or self.confirmed:
            return False
        return self.energy is None or self.energy > CONFIRM_ABOVE

    def confirm(self, interactive: bool) -> bool:
        """Ask the operator to confirm the stored energy; False ends the session."""
        what = "unknown" if self.energy is None else f"{format_si(self.energy, 'J')}"
        if not interactive:
            self.message = (
                f"session ended: the stored energy at the largest bias is {what} (confirmation "
                f"needed above {CONFIRM_ABOVE:g} J); run with --unattended to go on without an "
                "operator"
            )
            return False
        answer = self.screen.ask(
            f"the part will store {what} at the largest bias; an interrupted current arcs. "
            "Type yes to go on"
        )
        if answer is None or answer.strip().lower() != "yes":
            self.message = "session ended: the stored energy was not confirmed"
            return False
        self.confirmed = True
        return True

    def _has(self, operation: str) -> bool:
        has = getattr(self.meter, "has", None)
        return bool(has(operation)) if has is not None else False

    def _note_energy(self, measured: UnitMeasurement) -> None:
        """The first unit that gives a zero-bias Ls gives the energy shown from then on."""
        top = self.context.plan.bias.maximum
        if self.energy_measured or measured.inductance is None or top is None:
            return
        if self.context.plan.needs_bias:
            self.energy = float(stored_energy(measured.inductance, top))
            self.energy_measured = True

    def _notes(self, measured: UnitMeasurement, judgement: UnitJudgement) -> str:
        c = self.context
        note = measured.error or _unknown_u_note(judgement, c.plan)
        if c.plan.needs_bias and c.unattended:
            note = f"{note}; {UNATTENDED_NOTE}" if note else UNATTENDED_NOTE
        return note

    def _record(
        self,
        serial: str,
        attempt: int,
        attempt_id: str,
        started: Any,
        measured: UnitMeasurement,
        judgement: UnitJudgement,
    ) -> UnitRecord:
        c = self.context
        override = c.override if self.blocks else ""
        return UnitRecord(
            serial=serial,
            outcome=judgement.outcome,
            measurements=measurement_records(judgement, measured.bias),
            lot=c.lot,
            attempt=attempt,
            bin=judgement.bin,
            station=c.station,
            operator=c.operator,
            plan_id=c.plan_id,
            reference_set_id=self.reference_id,
            meter_id=c.meter_id,
            fixture_id=c.fixture_id,
            started_at=started,
            finished_at=utc_now(),
            notes=self._notes(measured, judgement),
            attempt_id=attempt_id,
            reference_override=override,
            temperature=measured.temperature,
        )

    # -- the session -----------------------------------------------------------------------------

    def run(self, interactive: bool) -> StationStatus:
        """Read serials until the end of input or Ctrl-C; the final status.

        Blocked by its references, an interactive station waits for the operator to capture new
        ones and press Enter; a station reading piped serials stops, since no one can.
        """
        self.show()
        try:
            while True:
                self.bias_off()
                if self.needs_confirmation() and not self.confirm(interactive):
                    self.show()
                    break
                blocked = self.blocked
                if blocked and not interactive:
                    self.message = f"session ended: the station is stopped: {blocked}"
                    self.show()
                    break
                prompt = "press Enter when new references are captured" if blocked else "serial"
                line = self.screen.ask(prompt)
                if line is None:
                    break
                if not line.strip():
                    if blocked:
                        self.reload_references()
                        self.show()
                    continue
                self.test(line)
        except KeyboardInterrupt as stop:
            self.message = f"session ended: {stop_reason(stop)}"
        finally:
            self.bias_off()
        return self.status()
