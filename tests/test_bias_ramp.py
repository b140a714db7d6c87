"""A bias is held inside `energised`: refused above its maximum, and back at zero and off
whatever ends the block. Run against the simulated meter over a real socket; the simulator's own
reading of the current flowing is the check (drivers/simulator/bias.py)."""

from __future__ import annotations

import time

import pytest

from acquire.bias.ramp import energised, largest_allowed
from acquire.errors import BiasError
from drivers.errors import MeterTimeout
from drivers.meter import ImpedanceMeter
from drivers.simulator import running


@pytest.fixture
def sim():
    with running(dut="powder-choke", fixture="direct", noise=False, measure_time=0) as handle:
        yield handle


def flowing(meter) -> float:
    return float(meter.session.query("BIAS:MEAS?"))


def closed_with(sim, entries: int) -> list[float]:
    """The simulator's log of the current flowing as each connection closed."""
    for _ in range(300):
        if len(sim.bias_log) >= entries:
            break
        time.sleep(0.01)
    return sim.bias_log


@pytest.mark.parametrize("fault", [KeyboardInterrupt, RuntimeError, MeterTimeout])
def test_any_way_out_ramps_to_zero_and_off(sim, fault):
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        supply = meter.bias()
        with pytest.raises(fault), energised(supply, maximum=5.0, step=1.0) as held:
            assert held.go(4.0) == pytest.approx(4.0)
            assert flowing(meter) == pytest.approx(4.0)
            raise fault("stopped mid-measurement")
        assert flowing(meter) == 0.0
        assert meter.session.query("BIAS:STAT?").strip() == "0"


def test_a_bias_above_the_maximum_sends_nothing(sim):
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        supply = meter.bias()
        with energised(supply, maximum=2.0, step=1.0) as held:
            with pytest.raises(BiasError, match="outside 0 to 2 A"):
                held.go(2.5)
            assert float(meter.session.query("BIAS:CURR?")) == 0.0
        too_high = pytest.raises(BiasError, match="above the supply's limit of 8 A")
        with too_high, energised(supply, maximum=9.0, step=1.0):
            pass


def test_the_bias_is_zero_before_the_connection_closes(sim):
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:  # noqa: SIM117
        with energised(meter.bias(), maximum=6.0, step=0.5) as held:
            held.go(6.0)
            held.before_part_change()
            assert flowing(meter) == 0.0
            held.go(3.0)
    assert closed_with(sim, 1) == [0.0]


def test_largest_allowed_is_the_smaller_of_the_two():
    assert largest_allowed(None, 8.0) == 8.0
    assert largest_allowed(6.0, 8.0) == 6.0
    assert largest_allowed(10.0, 8.0) == 8.0
    with pytest.raises(BiasError):
        largest_allowed(float("nan"), 8.0)
