"""Shared test fixtures: the simulated meter, started once per module or made to order.

``simulator`` is a factory: ``simulator(dut=..., fixture=..., seed=..., noise=...,
measure_time=...)`` starts a simulated meter on a loopback port for the rest of the test and
returns its handle. ``sim`` is a module-scoped meter with the defaults below (air-core coil on
bench leads, seed 0, noise off, no measurement time); a test module that wants other defaults
overrides ``sim_options`` with a module-scoped fixture of its own.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from contextlib import ExitStack
from typing import Any

import pytest

from drivers.simulator import running
from drivers.simulator.handle import SimulatorHandle

#: What the module-scoped ``sim`` runs unless a module overrides ``sim_options``.
DEFAULTS: dict[str, Any] = {
    "dut": "air-core-coil",
    "fixture": "bench-leads",
    "seed": 0,
    "noise": False,
    "measure_time": 0,
}

Factory = Callable[..., SimulatorHandle]


def _factory(stack: ExitStack) -> Factory:
    def start(**options: Any) -> SimulatorHandle:
        unknown = set(options) - set(DEFAULTS)
        if unknown:
            raise TypeError(f"simulator() got unknown options {sorted(unknown)}")
        return stack.enter_context(running(**(DEFAULTS | options)))

    return start


@pytest.fixture
def simulator() -> Iterator[Factory]:
    """Start simulated meters to order; each is stopped when the test ends."""
    with ExitStack() as stack:
        yield _factory(stack)


@pytest.fixture(scope="module")
def module_simulator() -> Iterator[Factory]:
    """Like ``simulator``, but the meters live until the module's tests have run."""
    with ExitStack() as stack:
        yield _factory(stack)


@pytest.fixture(scope="module")
def sim_options() -> dict[str, Any]:
    """Options of the module's ``sim`` (override in a module to change them)."""
    return {}


@pytest.fixture(scope="module")
def sim(module_simulator: Factory, sim_options: dict[str, Any]) -> SimulatorHandle:
    """One simulated meter shared by the module's tests."""
    return module_simulator(**sim_options)
