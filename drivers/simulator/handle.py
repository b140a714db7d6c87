"""Run the simulated meter on a background thread, for tests, benchmarks and the demo.

>>> from drivers.simulator import running
>>> with running(dut="air-core-coil", measure_time=0) as sim:
...     print(sim.resource)          # TCPIP0::127.0.0.1::<port>::SOCKET

The handle changes what is in the fixture and arms faults from Python, and gives the exact
impedances (no noise) the meter is simulating, from the same physics.
"""

from __future__ import annotations

import asyncio
import threading
import warnings
from collections.abc import Callable, Iterator
from concurrent.futures import Future
from contextlib import contextmanager
from pathlib import Path
from typing import Any, TypeVar

import numpy as np

from drivers.errors import InstrumentError, ProfileError
from drivers.simulator.faults import FaultSpec
from drivers.simulator.instrument import Instrument
from drivers.simulator.profiles import DutProfile, FixtureProfile, MeterProfile, load_dut
from drivers.simulator.seating import SeatingOffset, operator_offset, part_unit, sent_name
from drivers.simulator.server import LOOPBACK, SimulatorServer

T = TypeVar("T")
_START_TIMEOUT = 10.0


class SimulatorHandle:
    """A running simulated meter; every change is made on the server's own thread."""

    def __init__(
        self,
        server: SimulatorServer,
        loop: asyncio.AbstractEventLoop,
        source: SimulatorServer | None = None,
    ) -> None:
        self._server = server
        self._loop = loop
        self._instrument = server.instrument
        self._source = source

    @property
    def resource(self) -> str:
        """VISA resource string, ``TCPIP0::127.0.0.1::<port>::SOCKET``."""
        return self._server.resource

    @property
    def source_resource(self) -> str:
        """VISA resource of the simulated DC current source (``running(source_port=...)``)."""
        if self._source is None:
            raise InstrumentError("no DC current source is running: pass source_port=0")
        return self._source.resource

    @property
    def bias_log(self) -> list[float]:
        """The DC current (A) flowing as each earlier connection closed, oldest first."""
        return self._call(lambda: list(self._instrument.bias.log))

    @property
    def port(self) -> int:
        """The TCP port the meter listens on."""
        return self._server.port

    @property
    def dut(self) -> DutProfile:
        """What is in the fixture now (for a production unit, its drawn values)."""
        return self._instrument.dut

    @property
    def fixture(self) -> FixtureProfile:
        """The fixture profile in use."""
        return self._instrument.fixture

    @property
    def meter(self) -> MeterProfile:
        """The meter profile (identity, noise, timing)."""
        return self._instrument.meter

    @property
    def faults(self) -> tuple[FaultSpec, ...]:
        """The faults armed now, in arming order."""
        return self._instrument.faults.armed

    @property
    def unit(self) -> int:
        """How many production units have been drawn since the DUT was inserted."""
        return self._instrument.unit

    def _call(self, fn: Callable[..., T], *args: Any) -> T:
        result: Future[T] = Future()

        def run() -> None:
            try:
                result.set_result(fn(*args))
            except Exception as exc:  # noqa: BLE001 - handed to the caller's thread
                result.set_exception(exc)

        self._loop.call_soon_threadsafe(run)
        return result.result(timeout=_START_TIMEOUT)

    def insert(self, name_or_profile: str | Path | DutProfile) -> DutProfile:
        """Put a DUT (profile name, path or object) or a standard (open, short, load) in."""
        return self._call(self._instrument.insert, name_or_profile)

    def next_unit(self) -> DutProfile:
        """Insert the next production unit, drawn (seeded) from the DUT's spread."""
        return self._call(self._instrument.next_unit)

    def set_fixture(self, name_or_profile: str | Path | FixtureProfile) -> FixtureProfile:
        """Change the fixture."""
        return self._call(self._instrument.set_fixture, name_or_profile)

    def set_noise(self, on: bool) -> None:
        """Noise on or off."""
        self._call(setattr, self._instrument, "noise", bool(on))

    def set_measure_time(self, seconds: float | None) -> None:
        """Seconds per point (0 for benchmarks), or None for the time the settings imply."""
        if seconds is not None and not 0 <= seconds <= 60:
            raise ProfileError(f"measure time must be 0 to 60 s, got {seconds!r}")
        self._call(setattr, self._instrument, "time_override", seconds)

    def reseed(self, seed: int) -> None:
        """Restart noise, spread and fault generators from ``seed``."""
        self._call(self._instrument.reseed, seed)

    def inject(self, kind: str, n: int | float | None = None, **kw: Any) -> FaultSpec:
        """Arm a fault: ``inject("drop", 3)``, ``inject("garble", rate=0.1)``,
        ``inject("error", -222)``, ``inject("overrange", 1e6)`` (see ``faults``)."""
        try:
            spec = FaultSpec.build(kind, n, **kw)
        except (TypeError, ValueError) as exc:
            raise ProfileError(f"cannot arm fault {kind!r}: {exc}") from exc
        self._call(self._instrument.arm_fault, spec)
        return spec

    def clear_faults(self) -> None:
        """Disarm every fault."""
        self._call(self._instrument.faults.clear)

    def dut_impedance(self, f: np.ndarray | float) -> np.ndarray:
        """Exact impedance of the DUT alone at ``f`` (complex ohm, no noise)."""
        return self.dut.impedance(f).reshape(np.shape(f))

    def seen_impedance(self, f: np.ndarray | float) -> np.ndarray:
        """Exact impedance the meter sees: the DUT through the fixture, no noise."""
        return self.fixture.seen(f, self.dut.impedance(f)).reshape(np.shape(f))

    def seating_offset(self, operator: str) -> SeatingOffset:
        """The true offset of ``operator``'s seatings under the present fixture and seed, without
        each seating's random part (:mod:`drivers.simulator.seating`); ``operator`` as a client
        names it (escaped as :func:`~drivers.simulator.seating.seating_message` sends it)."""
        i = self._instrument
        return self._call(lambda: operator_offset(i.seed, sent_name(operator), i.fixture))

    def part_profile(self, part: int) -> DutProfile:
        """Study part ``part`` as ``SIMulate:PART`` draws it, before any seating offset."""
        i = self._instrument
        return self._call(lambda: part_unit(i.nominal, i.seed, part))

    def load_true(self, f: np.ndarray | float) -> np.ndarray:
        """True impedance of the shipped ``load`` standard at ``f``."""
        return load_dut("load").impedance(f).reshape(np.shape(f))


@contextmanager
def running(
    dut: str | Path | DutProfile = "air-core-coil",
    fixture: str | Path | FixtureProfile = "bench-leads",
    seed: int = 0,
    measure_time: float | None = None,
    noise: bool = True,
    host: str = "127.0.0.1",
    port: int = 0,
    meter: str | Path | MeterProfile = "simulated-meter",
    source_port: int | None = None,
) -> Iterator[SimulatorHandle]:
    """Serve a simulated meter on a background thread while the block runs.

    ``source_port`` (0 picks a free one) also serves the simulated DC current source wired to
    the same DUT (:mod:`.source_commands`); None serves none.

    ``measure_time`` overrides the seconds per point (0 for fast tests); None uses the time the
    periods and averaging settings imply. Profiles are loaded before the thread starts, so a bad
    one raises :class:`~drivers.errors.ProfileError` here.
    """
    if host not in LOOPBACK:
        warnings.warn(
            f"the simulated meter listens on {host}, reachable from other machines; it has no "
            "authentication",
            stacklevel=3,
        )
    instrument = Instrument(dut, fixture, meter, seed, measure_time, noise)
    server = SimulatorServer(instrument, host, port)
    source = None if source_port is None else SimulatorServer(instrument, host, source_port, True)
    servers = [server] if source is None else [server, source]
    loop = asyncio.new_event_loop()
    started = threading.Event()
    failure: list[BaseException] = []

    def main() -> None:
        asyncio.set_event_loop(loop)
        try:
            for each in servers:
                loop.run_until_complete(each.start())
        except OSError as exc:
            failure.append(exc)
            for each in servers:
                loop.run_until_complete(each.close())
            started.set()
            loop.close()
            return
        started.set()
        try:
            loop.run_forever()
        finally:
            for each in servers:
                loop.run_until_complete(each.close())
            loop.run_until_complete(loop.shutdown_asyncgens())
            loop.close()

    thread = threading.Thread(target=main, name="simulated-meter", daemon=True)
    thread.start()
    if not started.wait(_START_TIMEOUT):
        raise InstrumentError(
            "the simulated meter did not start within 10 s; is the machine overloaded?"
        )
    if failure:
        raise failure[0]
    try:
        yield SimulatorHandle(server, loop, source)
    finally:
        loop.call_soon_threadsafe(loop.stop)
        thread.join(_START_TIMEOUT)
