"""The simulated meter's shared state: what is in the fixture, settings, faults, the measurement.

One :class:`Instrument` stands for one physical meter: every client sees the same settings, DUT
and measurement, as on a bench. Each connected client has a :class:`Session` with its own error
queue and status registers. Everything here runs on the server's event loop; a measurement is an
asyncio task, so other clients are served meanwhile.

A measurement's duration is its whole time, as a real meter's measuring time is: the reading is
computed first and the task sleeps only the rest of the duration (never less than nothing), so
the simulator's own arithmetic does not add to the time a client waits. The ASCII reply is
written within that time too (a real meter's reply is ready when its measurement ends), and
the last millisecond of the wait is slept on the clock (:func:`precise_sleep`), not left to the
event loop's millisecond timer. The reading's draws are counted only when the measurement
completes, so an aborted one leaves the noise stream as it was.
"""

from __future__ import annotations

import asyncio
import time
from collections.abc import Awaitable, Callable
from pathlib import Path

import numpy as np

from drivers.simulator import measurement, streams
from drivers.simulator.bias import BiasState
from drivers.simulator.drift import Drift
from drivers.simulator.faults import Faults, FaultSpec
from drivers.simulator.measurement import Conditions, Reading
from drivers.simulator.profile_names import load_offered, operator_choice
from drivers.simulator.profiles import (
    STANDARD_KINDS,
    DutProfile,
    FixtureProfile,
    MeterProfile,
    draw_unit,
    load_dut,
    load_fixture,
    load_meter,
)
from drivers.simulator.scpi_parser import ScpiError
from drivers.simulator.seating import Seating
from drivers.simulator.state import ClientStatus, Settings

#: Seconds by which the event loop's timers may wake late on their own: the selector waits
#: whole milliseconds, rounded up. :func:`precise_sleep` sleeps the last of a wait on the clock.
TIMER_GRAIN_S = 0.001


async def precise_sleep(seconds: float) -> None:
    """Sleep ``seconds``: on the event loop (other clients are served) up to the last
    :data:`TIMER_GRAIN_S`, then the rest on the clock, so that a measurement ends when its
    duration does and not up to a millisecond later."""
    end = time.perf_counter() + seconds
    await asyncio.sleep(max(0.0, seconds - TIMER_GRAIN_S))
    left = end - time.perf_counter()
    if left > 0:
        time.sleep(left)


class Session:
    """One client's view of the meter: its own error queue and status registers."""

    def __init__(self, peer: str = "") -> None:
        self.peer = peer
        self.status = ClientStatus()

    async def wait_for(self, task: asyncio.Task) -> None:
        """Wait for ``task`` to end (without ending it if this client goes away)."""
        if not task.done():
            await asyncio.wait({task})


class Instrument:
    """The meter: profiles, settings, random generators, faults and the running measurement."""

    def __init__(
        self,
        dut: str | Path | DutProfile = "air-core-coil",
        fixture: str | Path | FixtureProfile = "bench-leads",
        meter: str | Path | MeterProfile = "simulated-meter",
        seed: int = 0,
        measure_time: float | None = None,
        noise: bool = True,
        profile_dir: Path | None = None,
    ) -> None:
        #: Where the operator keeps profiles clients may name besides the shipped ones.
        self.profile_dir = profile_dir
        self.meter = load_meter(operator_choice(meter, profile_dir))
        self.fixture = load_fixture(operator_choice(fixture, profile_dir))
        self.settings = Settings()
        self.noise = noise
        self.time_override = measure_time
        self.faults = Faults(np.random.default_rng(0))
        #: DC current through the DUT (meter bias, source) and the winding's temperature.
        self.bias = BiasState(self.meter)
        #: Who seats study parts, and the part seated now (:mod:`drivers.simulator.seating`).
        self.seating = Seating()
        #: Simulated days for a drifting standard (``SIMulate:DRIFt:DAYS``; :mod:`.drift`).
        self.drift = Drift()
        self.reseed(seed)
        self.dut = self.nominal = load_dut(operator_choice(dut, profile_dir))
        self.unit = 0
        self.last: Reading | None = None
        self.task: asyncio.Task | None = None
        self.armed = False
        #: The clock a measurement's own computing time is read from (seconds).
        self.clock: Callable[[], float] = time.perf_counter
        #: How a measurement waits out the rest of its duration.
        self.sleep: Callable[[float], Awaitable[None]] = precise_sleep
        self.insert(self.dut)

    def reseed(self, seed: int) -> None:
        """Restart the noise, production spread and fault generators from ``seed``.

        A reading's noise depends only on the seed and on how many readings were completed
        before it (:mod:`drivers.simulator.streams`), never on how they were grouped or timed.
        """
        self.seed = seed
        _, spread, fault = np.random.SeedSequence(seed).spawn(3)
        self.readings = streams.ReadingCounter(seed)
        self.systematic_key = np.random.SeedSequence([seed, streams.SYSTEMATIC])
        self.spread_rng = np.random.default_rng(spread)
        self.faults.reseed(np.random.default_rng(fault))
        self.seating.reseed()

    def insert(
        self, name_or_profile: str | Path | DutProfile, deferred: bool = False, client: bool = False
    ) -> DutProfile:
        """Put a DUT or standard in the fixture and arm its profile's faults.

        ``deferred`` (inserting by a SCPI command) starts the faults' count after that message.
        ``client`` (a SCPI command too): ``name_or_profile`` must be a name of a shipped profile
        or of one in :attr:`profile_dir`, never a path (:mod:`.profile_names`).
        """
        if client:
            dut = load_offered(load_dut, str(name_or_profile), "DUT", self.profile_dir)
        else:
            dut = load_dut(name_or_profile)
        self.dut = dut
        self.seating.clear()
        if dut.kind not in STANDARD_KINDS and dut.kind != "none":
            self.nominal = dut
            self.unit = 0
        for spec in dut.faults:
            self.faults.arm(spec, deferred)
        return dut

    def next_unit(self) -> DutProfile:
        """Put the next production unit in: the last inserted DUT's values drawn from its spread."""
        self.unit += 1
        self.seating.clear()
        self.dut = draw_unit(self.nominal, self.spread_rng)
        return self.dut

    def set_fixture(
        self, name_or_profile: str | Path | FixtureProfile, client: bool = False
    ) -> FixtureProfile:
        """Change the fixture; ``client`` as for :meth:`insert`."""
        if client:
            name = str(name_or_profile)
            self.fixture = load_offered(load_fixture, name, "fixture", self.profile_dir)
        else:
            self.fixture = load_fixture(name_or_profile)
        return self.fixture

    def arm_fault(self, spec: FaultSpec, deferred: bool = False) -> None:
        """Arm one fault (see :mod:`drivers.simulator.faults`)."""
        self.faults.arm(spec, deferred)

    def reset(self) -> None:
        """``*RST``: default settings, bias off at 0 A, measurement aborted, data cleared."""
        self.abort()
        self.settings = Settings()
        self.bias.change(self.dut, bias_on=False, bias_setpoint=0.0)

    def abort(self) -> None:
        """Stop any measurement and forget the last one."""
        if self.task is not None and not self.task.done():
            self.task.cancel()
        self.task = None
        self.armed = False
        self.last = None

    def conditions(self, frequencies: tuple[float, ...] | None = None) -> Conditions:
        """What a measurement started now would use; the present frequency or list by default."""
        s = self.settings
        if frequencies is None:
            frequencies = s.frequency_list if s.mode == "LIST" else (s.frequency,)
        return Conditions(
            frequency=frequencies,
            level=s.level,
            periods=s.periods,
            averaging=s.averaging,
            noise=self.noise,
            dut=self.bias.biased(self.drift.apply(self.dut)),
            fixture=self.seating.fixture(self.fixture),
            meter=self.meter,
            time_override=self.time_override,
        )

    @property
    def busy(self) -> bool:
        """A measurement is running."""
        return self.task is not None and not self.task.done()

    def initiate(self) -> asyncio.Task | None:
        """``INITiate``: start a measurement now, or arm it for ``*TRG`` (then returns None)."""
        if self.busy or self.armed:
            raise ScpiError(-213, "a measurement is already running or armed")
        if self.settings.mode == "LIST" and not self.settings.frequency_list:
            raise ScpiError(-221, "FREQuency:MODE LIST with an empty frequency list")
        if self.settings.trigger_source == "BUS":
            self.armed = True
            return None
        return self._start(self.conditions())

    def trigger(self) -> asyncio.Task:
        """``*TRG``: start the armed measurement."""
        if not self.armed:
            raise ScpiError(-211, "no measurement armed (TRIGger:SOURce BUS, then INITiate)")
        self.armed = False
        return self._start(self.conditions())

    def _start(self, conditions: Conditions) -> asyncio.Task:
        self.task = asyncio.get_running_loop().create_task(self._measure(conditions))
        return self.task

    async def _measure(self, conditions: Conditions) -> Reading:
        began = self.clock()
        counter, count = self.readings, len(conditions.frequency)
        forced = self.faults.overrange(np.asarray(conditions.frequency, dtype=float))
        normals = counter.peek(streams.POINTS, count)
        reading = measurement.read_impedance(conditions, normals, forced, self.systematic_key)
        s = self.settings
        if s.data_format == "ASC":
            measurement.ascii_values(reading, s.pair, s.circuit, s.angle_unit)
        await self._rest(began, measurement.duration(conditions))
        counter.count(streams.POINTS, count)
        self.last = reading
        return reading

    async def _rest(self, began: float, duration: float) -> None:
        """Sleep what is left of ``duration`` seconds since ``began`` (by :attr:`clock`)."""
        await self.sleep(measurement.remaining(duration, self.clock() - began))

    def start_dc(self) -> asyncio.Task:
        """Start a DC resistance measurement (the hardware is busy until it ends)."""
        if self.busy or self.armed:
            raise ScpiError(-213, "a measurement is already running or armed")
        self.task = asyncio.get_running_loop().create_task(self._measure_dc(self.conditions(())))
        return self.task

    async def _measure_dc(self, conditions: Conditions) -> float:
        began = self.clock()
        counter = self.readings
        normal = float(counter.peek(streams.DC, 1)[0, 0])
        value = measurement.read_dc_resistance(conditions, normal)
        await self._rest(began, measurement.dc_time(conditions))
        counter.count(streams.DC, 1)
        return value

    def point_time(self) -> float:
        """Seconds per point at the present frequency and settings."""
        return measurement.point_time(self.conditions(), self.settings.frequency)
