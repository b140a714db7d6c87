"""Who seats a part in the simulated fixture, and what that seating does to the reading.

A gauge R&R study measures the same parts again and again, each seated in the fixture by one of
several operators. The simulator holds those parts and gives each operator a seating of their
own, so a study run on it has a known reproducibility:

- ``SIMulate:PART <n>`` seats study part ``n``: the last inserted DUT's values drawn from its
  spread by a generator keyed by the seed and ``n`` alone (:func:`part_unit`), so part 7 is the
  same coil every time it is seated.
- ``SIMulate:OPERator <name>`` says who seats the next parts. Each operator has an offset of
  their own (:func:`operator_offset`), drawn once from the seed and the name: a relative change
  of the coil's inductance, normal with standard deviation ``seating_spread`` (how deep the coil
  sits against the fixture's clips), and a contact resistance in series with the part,
  ``seating_contact`` times the magnitude of a standard normal draw (ohm).
- Each seating adds a small random part of its own (:func:`seating_draw`): a relative change of
  the inductance, normal with standard deviation ``seating_repeat``, and the same fraction of
  ``seating_contact`` on the contact (never below 0 Ω in all). Seatings are numbered from the
  last seed, so a run is reproduced exactly by its seed and its order of seatings.

The three settings are keys of the fixture profile (0 by default: no effect). Inserting a DUT or
a standard, or the next production unit, takes the seated part out and its contact with it.
The true offsets are there for tests
(:meth:`drivers.simulator.handle.SimulatorHandle.seating_offset`).
"""

from __future__ import annotations

import dataclasses
import hashlib
from dataclasses import dataclass
from typing import Any

import numpy as np

from drivers.simulator.profiles import DutProfile, FixtureProfile, draw_unit
from drivers.simulator.scpi_parser import expect, integer, quote, string

#: Keys of the seed sequences of this module's draws (apart from every other stream's).
_PART, _OPERATOR, _SEATING = 0x5EA701, 0x5EA702, 0x5EA703
#: The largest part number ``SIMulate:PART`` takes.
PART_MAX = 1_000_000
#: The longest operator name the simulator keeps, in characters.
NAME_MAX = 200


@dataclass(frozen=True)
class SeatingOffset:
    """What one seating does: ``inductance`` the relative change of the coil's inductance,
    ``contact`` the resistance (ohm) in series between fixture and part."""

    inductance: float = 0.0
    contact: float = 0.0

    def __add__(self, other: SeatingOffset) -> SeatingOffset:
        return SeatingOffset(
            self.inductance + other.inductance, max(0.0, self.contact + other.contact)
        )


def name_key(name: str) -> int:
    """A 64-bit number standing for an operator's name (any text, case kept)."""
    return int.from_bytes(hashlib.sha256(name.encode("utf-8")).digest()[:8], "big")


def operator_offset(seed: int, name: str, fixture: FixtureProfile) -> SeatingOffset:
    """The operator's own offset under ``fixture``'s seating settings (none for no name)."""
    if not name:
        return SeatingOffset()
    draws = np.random.default_rng([seed, _OPERATOR, name_key(name)]).standard_normal(2)
    return SeatingOffset(
        fixture.seating_spread * float(draws[0]), fixture.seating_contact * abs(float(draws[1]))
    )


def seating_draw(seed: int, index: int, fixture: FixtureProfile) -> SeatingOffset:
    """The random part of seating number ``index`` (from 0 after each seed)."""
    draws = np.random.default_rng([seed, _SEATING, index]).standard_normal(2)
    r = fixture.seating_repeat
    return SeatingOffset(r * float(draws[0]), r * fixture.seating_contact * float(draws[1]))


def part_unit(nominal: DutProfile, seed: int, part: int) -> DutProfile:
    """Study part ``part``: ``nominal``'s values drawn from its spread, fixed by seed and part."""
    unit = draw_unit(nominal, np.random.default_rng([seed, _PART, part]))
    return dataclasses.replace(unit, name=f"{nominal.name} part {part}")


def seated(dut: DutProfile, offset: SeatingOffset) -> DutProfile:
    """``dut`` as it sits in the fixture: its inductance (if it has one) changed by the offset."""
    inductance = dut.values.get("inductance")
    if inductance is None or offset.inductance == 0.0:
        return dut
    values = dict(dut.values)
    values["inductance"] = inductance * (1.0 + offset.inductance)
    return dataclasses.replace(dut, values=values)


def with_contact(fixture: FixtureProfile, offset: SeatingOffset | None) -> FixtureProfile:
    """``fixture`` with the seating's contact resistance in series (itself when none)."""
    if offset is None or offset.contact == 0.0:
        return fixture
    return dataclasses.replace(
        fixture, series_resistance=fixture.series_resistance + offset.contact
    )


class Seating:
    """Who seats parts now, the part seated and its seating, and how many seatings so far."""

    def __init__(self) -> None:
        self.operator = ""
        self.part = 0
        self.offset: SeatingOffset | None = None
        self.count = 0

    def reseed(self) -> None:
        """Number seatings from 0 again (the seed changed)."""
        self.count = 0

    def clear(self) -> None:
        """The seated part was taken out (something else was put in)."""
        self.part = 0
        self.offset = None

    def fixture(self, fixture: FixtureProfile) -> FixtureProfile:
        """The fixture as a measurement sees it: with the seated part's contact."""
        return with_contact(fixture, self.offset)

    def seat(self, instrument: Any, part: int) -> DutProfile:
        """Seat study part ``part`` by the present operator in ``instrument``'s fixture."""
        seed, fixture = instrument.seed, instrument.fixture
        offset = operator_offset(seed, self.operator, fixture) + seating_draw(
            seed, self.count, fixture
        )
        self.count += 1
        instrument.dut = seated(part_unit(instrument.nominal, seed, part), offset)
        self.part, self.offset = part, offset
        return instrument.dut


class SeatingCommands:
    """Handlers of ``SIMulate:PART`` and ``SIMulate:OPERator`` (mixed into the command table)."""

    instrument: Any  # the Instrument (not imported: it holds a Seating)

    def seating_table(self) -> tuple[tuple[str, Any, Any], ...]:
        """``(pattern, command, query)`` of each seating header."""
        s = self
        return (
            ("SIMulate:PART", s.sim_part, s.sim_part_query),
            ("SIMulate:OPERator", s.sim_operator, s.sim_operator_query),
        )

    async def sim_part(self, session: Any, params) -> None:
        expect(params, 1)
        self.instrument.seating.seat(self.instrument, integer(params[0], 1, PART_MAX))

    async def sim_part_query(self, session: Any, params) -> str:
        expect(params, 0)
        return str(self.instrument.seating.part)

    async def sim_operator(self, session: Any, params) -> None:
        expect(params, 1)
        self.instrument.seating.operator = " ".join(string(params[0]).split())[:NAME_MAX]

    async def sim_operator_query(self, session: Any, params) -> str:
        expect(params, 0)
        return quote(self.instrument.seating.operator)


def seating_message(part: int, operator: str) -> str:
    """The message a client sends to have ``operator`` seat ``part`` (answered ``1`` when done).

    Characters outside ASCII travel as Python's backslash escapes; the simulator keys the
    operator's offset by the text it receives, so the same name always gets the same offset.
    """
    sent = operator.encode("ascii", "backslashreplace").decode("ascii")
    return f"SIM:OPER {quote(sent)};SIM:PART {int(part)};*OPC?"


def sent_name(operator: str) -> str:
    """The operator's name as the simulator keeps it (see :func:`seating_message`)."""
    text = operator.encode("ascii", "backslashreplace").decode("ascii")
    return " ".join(text.split())[:NAME_MAX]
