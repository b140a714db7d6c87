"""The station's own time per unit, beside the meter's, on the path `acquire station` takes.

    python benchmarks/bench_station.py            # 200 units
    python benchmarks/bench_station.py --units 50
    python benchmarks/bench_station.py --quick    # 40 units

Each unit goes through ``Station.test`` exactly as the command runs it: serial admission (with
the store asked for the serial's history), the simulated meter given a new unit, one list sweep
of the plan's 10 frequencies and a DC-resistance reading, correction with a stored reference set
and the uncertainty of every value, judgement with guard bands and bins, one SQLite transaction
(WAL, synchronous FULL) through the record keeper, and the screen drawn (the interactive screen,
into a console that discards its output). The meter's time is what the calls to the meter
object take (the simulator answers at once: 0 ms a point); the station's own time is the rest.
Goal: the station's own time at most 20 ms a unit.
"""

from __future__ import annotations

import argparse
import io
import statistics
import sys
import tempfile
import time
from pathlib import Path
from typing import Any

from rich.console import Console

sys.path.insert(0, str(Path(__file__).resolve().parent.parent / "tests"))
from bench_support import PutsEachStandardIn  # noqa: E402 - the tests' stand-in operator
from goals import Goal, report  # noqa: E402

from acquire.capture import capture_references
from acquire.plan import log_plan
from acquire.production.measure import apply_settings
from acquire.production.outbox import Outbox, RecordKeeper
from acquire.production.plan_file import parse_plan
from acquire.production.screen import StationScreen
from acquire.production.station import Station, StationContext
from acquire.store import open_store
from drivers.meter import ImpedanceMeter
from drivers.simulator import running

#: A plan of 10 frequencies plus the DC resistance (demo data of our own invention).
PLAN = """
[plan]
name = "bench plan"
version = "1"
part = "BENCH-1"

[references]
fixture = "bench-leads"
max_age = "8h"

[temperature]
source = "fixed"
value = "20C"

[decision]
rule = "guarded"
guard_factor = 1.0
statements = "binary"

[serial]
pattern = "B-[0-9]+"
seen_before = "refuse"
"""
FREQUENCIES = ("1kHz", "2kHz", "5kHz", "10kHz", "20kHz", "50kHz", "100kHz", "200kHz", "500kHz",
               "1MHz")  # fmt: skip


def plan_text() -> str:
    steps = []
    for f in FREQUENCIES:
        steps.append(
            f'[[step]]\nfrequency = "{f}"\n[[step.check]]\nquantity = "Ls"\n'
            'nominal = "344uH"\ntolerance = "5%"\n'
        )
    steps.append('[[step]]\ndc = true\n[[step.check]]\nquantity = "Rdc"\nnominal = "4.95ohm"\n'
                 'tolerance = "8%"\n')  # fmt: skip
    return PLAN + "\n".join(steps)


class TimedMeter:
    """The meter, with the time spent in each of its calls added up."""

    def __init__(self, meter: Any) -> None:
        self._meter = meter
        self.seconds = 0.0

    def __getattr__(self, name: str) -> Any:
        value = getattr(self._meter, name)
        if not callable(value) or name in ("has",):
            return value

        def timed(*args: Any, **kw: Any) -> Any:
            began = time.perf_counter()
            try:
                return value(*args, **kw)
            finally:
                self.seconds += time.perf_counter() - began

        return timed


def main() -> None:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--units", type=int, default=200)
    parser.add_argument("--quick", action="store_true", help="40 units, for a fast look")
    args = parser.parse_args()
    if args.quick:
        args.units = 40
    plan = parse_plan(plan_text(), "bench plan")
    with (
        tempfile.TemporaryDirectory() as folder,
        running(dut="demo-coil", fixture="bench-leads", measure_time=0, seed=1) as sim,
        ImpedanceMeter.open(sim.resource, dialect="simulated") as meter,
        open_store(f"sqlite:///{Path(folder) / 'bench.db'}") as store,
        Outbox(Path(folder) / "outbox.db") as outbox,
    ):
        identity = meter.identify()
        refs = capture_references(
            meter, log_plan("100Hz", "2MHz", 61), PutsEachStandardIn(sim), load_true=sim.load_true,
            fixture="bench-leads", meter_name=str(identity), repeats=1,
        )  # fmt: skip
        ref_id = store.save_reference_set(refs, name="bench")
        sim.insert("demo-coil")
        apply_settings(meter, plan)
        timed = TimedMeter(meter)
        context = StationContext(
            plan=plan, lot="BENCH", operator="bench", station="bench", meter_name=str(identity),
            plan_id=store.record_plan(plan.text, plan.title), temperature=20.0,
        )  # fmt: skip
        screen = StationScreen(Console(file=io.StringIO(), width=100), interactive=True, bell=False)
        station = Station(
            timed, context, RecordKeeper(store, outbox), screen, (ref_id, refs),
            lambda: (ref_id, refs), lambda s: [u.outcome for u in store.unit_attempts(s)],
        )  # fmt: skip
        station.test("B-0")  # warm-up: imports, first statements prepared
        totals, meters = [], []
        for i in range(1, args.units + 1):
            before = timed.seconds
            began = time.perf_counter()
            station.test(f"B-{i}")
            totals.append(time.perf_counter() - began)
            meters.append(timed.seconds - before)
    own = [t - m for t, m in zip(totals, meters, strict=True)]
    med_own, med_meter = statistics.median(own), statistics.median(meters)
    p95 = sorted(own)[int(0.95 * len(own)) - 1]
    print(f"units: {args.units}, plan: 10 frequencies + DC resistance, SQLite (WAL, FULL)")
    print(f"meter time per unit (median):          {med_meter * 1e3:7.2f} ms")
    print(f"station's own time per unit (median):  {med_own * 1e3:7.2f} ms")
    print(f"station's own time, 95th percentile:   {p95 * 1e3:7.2f} ms")
    print(f"own time / meter time:                 {med_own / med_meter:7.2f}")
    report(
        Goal(
            "station's own time per unit beyond the meter's (median)", med_own * 1e3, 20.0, " ms",
            baseline="the meter calls' own time, measured in the same run",
        )
    )  # fmt: skip


if __name__ == "__main__":
    main()
