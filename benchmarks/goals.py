"""One goal per figure: printed for a person beside the figure, and as one machine line.

Every benchmark ends its report with :func:`report` for each goal it measures. The person reads
``goal: <what>: <figure> (goal <= <target>) met``; ``benchmarks/run_all.py`` reads the line
starting ``GOAL `` (a JSON object) and prints all goals of all benchmarks in one table.
Benchmarks run as scripts, so they import this module as ``goals`` (their folder is on the path).
"""

from __future__ import annotations

import json
from dataclasses import asdict, dataclass

MACHINE_PREFIX = "GOAL "


@dataclass(frozen=True)
class Goal:
    """A figure the benchmark measured and the target it is held to.

    ``what`` names the row (the same words as the goal table the benchmark's docstring carries);
    ``baseline`` says what the figure was measured against (a ratio's denominator, run in the same
    process or the same run); ``better`` is ``"lower"`` or ``"higher"``.
    """

    what: str
    figure: float
    target: float
    unit: str
    better: str = "lower"
    baseline: str = ""

    @property
    def met(self) -> bool:
        if self.better == "lower":
            return self.figure <= self.target
        return self.figure >= self.target

    def human(self) -> str:
        sign = "<=" if self.better == "lower" else ">="
        against = f" vs {self.baseline}" if self.baseline else ""
        verdict = "met" if self.met else "NOT met"
        return (
            f"goal: {self.what}: {_number(self.figure)}{self.unit}{against} "
            f"(goal {sign} {_number(self.target)}{self.unit}) {verdict}"
        )


def report(goal: Goal) -> Goal:
    """Print ``goal`` for a person and for ``run_all.py``; hand it back."""
    print(goal.human())
    print(MACHINE_PREFIX + json.dumps(asdict(goal)), flush=True)
    return goal


def parse(line: str) -> Goal | None:
    """The goal on one line of a benchmark's output, or None when the line holds none."""
    if not line.startswith(MACHINE_PREFIX):
        return None
    return Goal(**json.loads(line[len(MACHINE_PREFIX) :]))


def _number(value: float) -> str:
    if value == 0 or 0.01 <= abs(value) < 100_000:
        return f"{value:.3g}" if abs(value) < 10 else f"{value:,.0f}"
    return f"{value:.3g}"
