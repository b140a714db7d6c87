"""The simulator-only commands (``SIMulate:``): what is in the fixture, noise, time, seed, faults.

No real meter has these; tests, the demo and a user at ``nc`` use them to steer the simulation.
"""

from __future__ import annotations

from drivers.errors import ProfileError
from drivers.simulator import state
from drivers.simulator.faults import FaultSpec
from drivers.simulator.instrument import Instrument, Session
from drivers.simulator.scpi_parser import (
    ScpiError,
    boolean,
    expect,
    format_number,
    integer,
    keyword,
    number,
    quote,
    string,
)

_FAULT_WORDS = ("DROP", "STALl", "GARBle", "TRUNcate", "COUNt", "ERRor", "OVERrange")
_FAULT_KINDS = dict(zip(("DROP", "STAL", "GARB", "TRUN", "COUN", "ERR", "OVER"),
                        ("drop", "stall", "garble", "truncate", "count", "error", "overrange"),
                        strict=True))  # fmt: skip


class SimulateCommands:
    """Handlers of the ``SIMulate:`` subsystem (mixed into the full command table)."""

    instrument: Instrument

    def _profile(self, load, text: str):
        try:
            return load(string(text))
        except ProfileError as exc:
            raise ScpiError(-224, str(exc)) from exc

    async def sim_dut(self, session: Session, params) -> None:
        expect(params, 1)
        self._profile(
            lambda name: self.instrument.insert(name, deferred=True, client=True), params[0]
        )

    async def sim_dut_query(self, session: Session, params) -> str:
        expect(params, 0)
        return quote(self.instrument.dut.name)

    async def sim_unit_next(self, session: Session, params) -> None:
        expect(params, 0)
        self.instrument.next_unit()

    async def sim_unit_query(self, session: Session, params) -> str:
        expect(params, 0)
        return str(self.instrument.unit)

    async def sim_fixture(self, session: Session, params) -> None:
        expect(params, 1)
        self._profile(lambda name: self.instrument.set_fixture(name, client=True), params[0])

    async def sim_fixture_query(self, session: Session, params) -> str:
        expect(params, 0)
        return quote(self.instrument.fixture.name)

    async def sim_noise(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.noise = boolean(params[0])

    async def sim_noise_query(self, session: Session, params) -> str:
        expect(params, 0)
        return "1" if self.instrument.noise else "0"

    async def sim_time(self, session: Session, params) -> None:
        expect(params, 1)
        if params[0].strip().upper() == "AUTO":
            self.instrument.time_override = None
        else:
            self.instrument.time_override = number(params[0], "S", 0.0, state.TIME_MAX)

    async def sim_time_query(self, session: Session, params) -> str:
        expect(params, 0)
        return format_number(self.instrument.point_time())

    async def sim_seed(self, session: Session, params) -> None:
        expect(params, 1)
        self.instrument.reseed(integer(params[0], 0, 2**63 - 1))

    async def sim_seed_query(self, session: Session, params) -> str:
        expect(params, 0)
        return str(self.instrument.seed)

    async def sim_fault(self, session: Session, params) -> None:
        expect(params, 1, 2)
        kind = _FAULT_KINDS[keyword(params[0], _FAULT_WORDS)]
        value: float | None = None
        if len(params) == 2:
            if kind == "overrange":
                value = number(params[1], "HZ", 0.0)
            else:
                value = integer(params[1], -(2**31), 2**31 - 1)
        try:
            self.instrument.arm_fault(FaultSpec.build(kind, value), deferred=True)
        except ValueError as exc:
            raise ScpiError(-224 if len(params) == 2 else -109, str(exc)) from exc

    async def sim_fault_rate(self, session: Session, params) -> None:
        expect(params, 2)
        kind = _FAULT_KINDS[keyword(params[0], _FAULT_WORDS)]
        try:
            spec = FaultSpec.build(kind, rate=number(params[1], "", 0.0, 1.0))
            self.instrument.arm_fault(spec, deferred=True)
        except ValueError as exc:
            raise ScpiError(-224, str(exc)) from exc

    async def sim_fault_clear(self, session: Session, params) -> None:
        expect(params, 0)
        self.instrument.faults.clear()
