"""The station loop: serial in, measure, judge, bin, record, show; hundreds of times a shift.

A :class:`Station` takes one serial at a time (:meth:`Station.test`): the serial is checked
against the plan (pattern, seen before, retests), the references against their age, meter and
fixture, then the unit is measured (one list sweep plus the DC resistance), judged with the
plan's decision rule, sorted into a bin and recorded in one transaction (or kept in the local
outbox while the store is away: the screen says how many wait). A meter fault makes the
attempt's outcome "error": it is recorded and the serial may be tested again. :meth:`Station.run`
repeats that for every line the screen reads until the end of input or Ctrl-C.

A plan with checks under a DC bias holds the bias only while a unit is measured
(:mod:`acquire.production.measure`); :mod:`acquire.production.station_bias` switches it off
before every prompt and at the end, shows the stored energy and asks for its confirmation.

The station knows nothing of the command line: the meter, the record keeper, the screen and the
ways to read the store come in as objects.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np

from acquire.production.admission import SerialBook, clean_serial
from acquire.production.check_guard import CHECK_HINT, guard_acknowledgement, guard_blocks
from acquire.production.judgement import UnitJudgement, error_judgement, judge_unit
from acquire.production.measure import UnitMeasurement, measure_unit
from acquire.production.plan import CONDITIONAL_PASS, PASS, REJECT_BIN, TestPlan
from acquire.production.reference_guard import CAPTURE_HINT, check_problems, reference_blocks
from acquire.production.screen import NOT_TESTED, ShownUnit, StationStatus
from acquire.production.station_bias import BiasGuard
from acquire.production.unit_record import measurement_records, unknown_u_note
from acquire.signals import held, stop_reason
from acquire.store.records import UnitRecord, new_attempt_id
from acquire.store.schema import utc_now
from drivers.errors import InstrumentError

#: How many recent units the screen lists.
SHOWN_UNITS = 8


@dataclass(frozen=True)
class StationContext:
    """Who and what a session's units are recorded with; ``supply`` the DC bias supply (None:
    the meter's own), ``unattended`` skips confirming the stored energy (recorded)."""

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
        check: Any = None,
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
        self.bias = BiasGuard(context.plan, self.supply, context.unattended)
        self.check = check  # a CheckGuard (acquire.production.check_guard), or None

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
        found, held = self.blocks, guard_blocks(self.check)
        parts = (
            [] if not found or self.context.override else [f"{'; '.join(found)}. {CAPTURE_HINT}"]
        )
        return " ".join(parts + ([f"{'; '.join(held)}. {CHECK_HINT}"] if held else []))

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
            energy=self.bias.line(),
        )

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
        if self.check is not None:
            self.check.refresh()
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
        self.bias.note_unit(measured)
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
                self.meter, c.plan, self.references, c.temperature, supply=self.supply()
            )
        return self._measure(self.meter, c.plan, self.references, c.temperature)

    def supply(self) -> Any:
        """The bias supply: the context's, else the meter's own."""
        return self.context.supply if self.context.supply is not None else self.meter.bias()

    def _has(self, operation: str) -> bool:
        has = getattr(self.meter, "has", None)
        return bool(has(operation)) if has is not None else False

    def _notes(self, measured: UnitMeasurement, judgement: UnitJudgement) -> str:
        return self.bias.note(measured.error or unknown_u_note(judgement, self.context.plan))

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
            check_acknowledgement_id=guard_acknowledgement(self.check),
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
                self.message = self.bias.off() or self.message  # bias off before a prompt
                ended = self.bias.needs_confirmation() and self.bias.confirm(
                    self.screen.ask, interactive
                )
                blocked = self.blocked
                if ended or (blocked and not interactive):
                    self.message = ended or f"session ended: the station is stopped: {blocked}"
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
            self.message = self.bias.off() or self.message
        return self.status()
