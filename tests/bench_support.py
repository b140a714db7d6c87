"""Stand-ins the sweep and capture tests share: an operator that puts each standard in the
simulated fixture, and a meter that always reads one known impedance."""

from __future__ import annotations

from typing import Any

import numpy as np


class PutsEachStandardIn:
    """An operator for ``capture_references`` that puts each standard in the simulated fixture
    and never asks to measure again."""

    def __init__(self, sim: Any) -> None:
        self.sim = sim

    def tell(self, text: str) -> None:
        pass

    def ready(self, standard: str, instruction: str) -> bool:
        self.sim.insert(standard)
        return True

    def retry(self, standard: str, problems: list[str]) -> bool:
        return False


class FixedMeter:
    """A meter that reads one known impedance ``z`` at every frequency, whose dialect states
    ``accuracy`` (None: no accuracy stated) and no repeatability of its own."""

    frequency_range = (1.0, 1e8)

    def __init__(self, z: complex, accuracy: Any = None, name: str = "fixed") -> None:
        self.z = z
        self.dialect = type("Dialect", (), {"accuracy": accuracy, "name": name})()
        self.settings: dict = {}

    def sweep(self, frequencies: Any, on_points: Any = None) -> np.ndarray:
        f = np.asarray(frequencies, dtype=float)
        z = np.full(f.shape, self.z)
        if on_points is not None:
            on_points(f, z)
        return z


def keyboard_putting_in(sim: Any, standards: tuple[str, ...] = ("open", "short")) -> Any:
    """A stand-in for ``input`` at `acquire reference capture`'s prompts: on each "measure the
    <standard>" prompt it puts that standard in the simulated fixture, then presses Enter."""

    def answer(prompt: str) -> str:
        for standard in standards:
            if f"measure the {standard}" in prompt:
                sim.insert(standard)
        return ""

    return answer


def example_plan_references(sim: Any, points: int = 21, repeats: int = 1) -> Any:
    """Open, short and load captured on the simulated meter ``sim`` over 100 Hz to 1 MHz, for
    the example plan's fixture, with the demo coil put back in afterwards: what a station test
    needs before its first unit."""
    from acquire.capture import capture_references
    from acquire.plan import log_plan
    from acquire.production.plan_file import example_plan_path, load_plan
    from drivers.meter import ImpedanceMeter

    plan = load_plan(example_plan_path())
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        identity = meter.identify()
        refs = capture_references(
            meter, log_plan("100Hz", "1MHz", points), PutsEachStandardIn(sim),
            load_true=sim.load_true, fixture=plan.fixture, meter_name=str(identity),
            repeats=repeats,
        )  # fmt: skip
    sim.insert("demo-coil")
    return refs
