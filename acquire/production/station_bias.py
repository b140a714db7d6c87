"""The station's care of a DC bias: off before any part change, the stored energy, confirmation.

An inductor carrying a current I stores ½·L·I²; a current broken while it flows arcs and can
destroy the meter's input and hurt the operator. A :class:`BiasGuard` (a plan with checks under
bias only) ramps the supply to zero and switches it off before every prompt for a part and when
the session ends, shows the energy a unit stores at the plan's largest bias (the plan's estimate
until the first unit gives its zero-bias Ls), and asks the operator to confirm while that energy
is unknown or above :data:`acquire.bias.energy.CONFIRM_ABOVE`, unless the session runs
unattended. The measurement itself holds the bias inside :func:`acquire.bias.ramp.energised`;
this is the second line of protection.
"""

from __future__ import annotations

from collections.abc import Callable
from typing import Any

from acquire.bias.energy import CONFIRM_ABOVE, stored_energy
from acquire.production.measure import UnitMeasurement
from acquire.production.plan import TestPlan
from acquire.production.plan_text import planned_energy
from acquire.signals import held
from acquire.units import format_si
from drivers.errors import InstrumentError

#: What a unit of a session run unattended with bias checks records.
UNATTENDED_NOTE = "run unattended: the stored energy under bias was not confirmed by an operator"


class BiasGuard:
    """The bias side of one station session (see the module docstring).

    ``supply`` gives the bias supply when asked (the context's, else the meter's own)."""

    def __init__(self, plan: TestPlan, supply: Callable[[], Any], unattended: bool) -> None:
        self.plan = plan
        self.supply = supply
        self.unattended = unattended
        #: The stored energy at the plan's largest bias (J): measured on a unit, else planned.
        self.energy: float | None = planned_energy(plan)
        self.measured = False
        self.confirmed = False

    @property
    def active(self) -> bool:
        return self.plan.needs_bias

    def line(self) -> str:
        """The stored-energy line for the screen ('' for a plan without bias checks)."""
        if not self.active or self.plan.bias.maximum is None:
            return ""
        at = format_si(self.plan.bias.maximum, "A")
        if self.energy is None:
            return (
                f"stored energy at {at}: unknown until the first unit is measured; "
                "ramped to 0 A before every part change"
            )
        how = "measured, ½·L·I²" if self.measured else "from the plan's limits, ½·L·I²"
        return f"stored energy at {at}: {format_si(self.energy, 'J')} ({how})"

    def note_unit(self, measured: UnitMeasurement) -> None:
        """The first unit that gives a zero-bias Ls gives the energy shown from then on."""
        top = self.plan.bias.maximum
        if not self.active or self.measured or measured.inductance is None or top is None:
            return
        self.energy = float(stored_energy(measured.inductance, top))
        self.measured = True

    def off(self) -> str:
        """Ramp the bias to zero and switch it off; '' or a warning when the supply did not
        answer (nothing then shows the bias is off)."""
        if not self.active:
            return ""
        try:
            with held():
                self.supply().ramp_to(0.0, self.plan.bias.step, self.plan.bias.dwell)
        except InstrumentError as exc:
            return (
                f"could not confirm the bias is off ({exc}): check the meter and the supply "
                "before touching the part"
            )
        return ""

    def needs_confirmation(self) -> bool:
        """True while the operator must confirm the stored energy before the next unit."""
        if not self.active or self.unattended or self.confirmed:
            return False
        return self.energy is None or self.energy > CONFIRM_ABOVE

    def confirm(self, ask: Callable[[str], str | None], interactive: bool) -> str:
        """Ask the operator (``ask`` reads an answer); '' when confirmed, else why the session
        ends."""
        what = "unknown" if self.energy is None else format_si(self.energy, "J")
        if not interactive:
            return (
                f"session ended: the stored energy at the largest bias is {what} (confirmation "
                f"needed above {CONFIRM_ABOVE:g} J); run with --unattended to go on without an "
                "operator"
            )
        answer = ask(
            f"the part will store {what} at the largest bias; an interrupted current arcs. "
            "Type yes to go on"
        )
        if answer is None or answer.strip().lower() != "yes":
            return "session ended: the stored energy was not confirmed"
        self.confirmed = True
        return ""

    def note(self, note: str) -> str:
        """A unit's notes with the unattended note added when it applies."""
        if not (self.active and self.unattended):
            return note
        return f"{note}; {UNATTENDED_NOTE}" if note else UNATTENDED_NOTE
