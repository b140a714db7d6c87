"""The demo: the tool's main job end to end on the built-in simulated meter, no hardware needed.

It starts the simulated meter on an ephemeral loopback port, captures open, short and load
references on a simulated fixture (the demo plays the operator and puts each standard in the
fixture itself), sweeps the demo coil from 100 Hz to 10 MHz with the live view, shows raw
against corrected values and how far each is from the simulated coil's true impedance, and
leaves everything in an SQLite store whose path it prints.

The run is a list of steps, :data:`STEPS`, each a function of one :class:`DemoRun` that holds
what the earlier steps produced. A later step (a coil model's predicted and fitted values, a
production lot, a report) is added by writing one more function and putting it in the list.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass, field
from typing import Any

import numpy as np
from rich.console import Console
from rich.table import Table
from rich.text import Text

from acquire.capture import SAFETY, capture_references
from acquire.dashboard import open_view
from acquire.demo_lot import production_lot
from acquire.demo_report import write_report
from acquire.errors import AcquireError
from acquire.plan import FrequencyPlan, log_plan
from acquire.sweep import SweepOutcome, run_sweep
from acquire.sweep_setup import begin, prepare_state, review_readings, uncertainty_model
from acquire.sweep_state import SweepState
from acquire.sweep_summary import summary
from acquire.units import format_si

#: What the demo measures: a coil and a fixture of our own invention (sim_profiles/).
DUT = "demo-coil"
FIXTURE = "bench-leads"
#: Seconds per point the simulated meter takes during the demo (the live view gets to show).
MEASURE_TIME = 0.01
#: Frequencies at which the demo compares raw and corrected Ls with the simulated coil's own.
CHECK_FREQUENCIES = (1e3, 1e5, 1e6, 2e6)
#: Readings of each reference standard (their mean is kept, their scatter is its Type A).
REPEATS = 3


class SimulatedOperator:
    """The demo's operator: puts each standard in the simulated fixture and says so."""

    def __init__(self, sim: Any, console: Console) -> None:
        self.sim = sim
        self.console = console

    def tell(self, text: str) -> None:
        self.console.print(text)

    def ready(self, standard: str, instruction: str) -> bool:
        self.console.print(instruction)
        self.sim.insert(standard)
        self.console.print(f"[dim](demo) the {standard} standard is in the simulated fixture[/]")
        return True

    def retry(self, standard: str, problems: list[str]) -> bool:
        for p in problems:
            self.console.print(f"refused: {p}")
        return False


@dataclass
class DemoRun:
    """What the demo's steps share: settings, the simulator, the meter, the store, results."""

    console: Console
    store_url: str
    live: bool = True
    points: int = 201
    dut: str = DUT
    fixture: str = FIXTURE
    sim: Any = None
    meter: Any = None
    store: Any = None
    identity: Any = None
    plan: FrequencyPlan | None = None
    references: Any = None
    reference_id: int | None = None
    state: SweepState | None = None
    outcome: SweepOutcome | None = None
    notes: list[str] = field(default_factory=list)
    #: (broker URL, line) to publish the production lot to (--publish), or None.
    publish: tuple[str, str] | None = None


def _plan(run: DemoRun) -> FrequencyPlan:
    """The demo's frequency plan, which the first step makes."""
    if run.plan is None:
        raise AcquireError("the demo's steps run in order: introduce() makes the plan first")
    return run.plan


def introduce(run: DemoRun) -> None:
    """Say what the demo does, with the bench safety cautions."""
    run.console.print(
        Text.assemble(
            ("Demo", "bold"),
            ": a simulated impedance meter, a simulated fixture and the demo coil "
            f"({run.dut}); no hardware is touched.\nResults go to {run.store_url}",
        )
    )
    run.console.print(SAFETY, style="dim")
    run.identity = run.meter.identify()
    run.console.print(f"meter: {run.identity} at {run.sim.resource}")
    run.plan = log_plan("100Hz", "10MHz", run.points)


def capture(run: DemoRun) -> None:
    """Capture open, short and load on the fixture and save the set in the store."""
    refs = capture_references(
        run.meter,
        _plan(run),
        SimulatedOperator(run.sim, run.console),
        load_true=run.sim.load_true,
        fixture=run.fixture,
        meter_name=str(run.identity),
        notes="captured by acquire demo",
        repeats=REPEATS,
    )
    ident = run.identity
    meter_id = run.store.record_meter(
        ident.manufacturer,
        ident.model,
        ident.serial,
        ident.firmware,
        dialect=run.meter.dialect.name,
    )
    fixture_id = run.store.record_fixture(run.fixture, notes="simulated fixture")
    run.references = refs
    run.reference_id = run.store.save_reference_set(
        refs, name=f"demo {run.fixture}", meter_id=meter_id, fixture_id=fixture_id
    )
    run.console.print(
        f"saved reference set {run.reference_id} ({refs.method}) in the store; each standard "
        f"read {REPEATS} times: the mean is kept, its scatter counts in every point's uncertainty"
    )


def sweep(run: DemoRun) -> None:
    """Put the demo coil in the fixture and sweep it with the live view."""
    run.sim.insert(run.dut)
    run.console.print(f"\n[bold]Sweeping {run.dut}[/] through the fixture, corrected live")
    state = prepare_state(
        _plan(run), run.identity, run.references, run.reference_id, run.fixture, run.dut,
        ("Ls", "Rs", "Q"),
    )  # fmt: skip
    model = uncertainty_model(run.meter, state, show=True)
    writer = begin(run.store, run.meter, run.identity, run.fixture, run.dut, run.reference_id,
                   _plan(run), state.quantities, {"uncertainty": model.describe()},
                   references=run.references)  # fmt: skip
    state.destination = f"sweep {writer.id} in {run.store.url}"
    with open_view(state, live=run.live, console=run.console) as view:
        run.outcome = run_sweep(
            run.meter, _plan(run), run.references, writer, state, view.update, uncertainty=model
        )
        review_readings(state, run.references)
    run.state = state
    run.console.print(summary(state))


def compare_with_truth(run: DemoRun) -> None:
    """How far raw and corrected Ls are from the simulated coil's own, at a few frequencies."""
    out = run.outcome
    if out is None or out.corrected is None or out.frequency.size == 0:
        return
    table = Table(
        title="what the fixture does to Ls, against the simulated coil's true value "
        "(U: expanded uncertainty, k = 2)",
        title_justify="left",
    )
    columns = ("f", "true Ls", "raw Ls", "raw error", "corrected Ls ± U(Ls)", "corrected error",
               "true Ls within ± U")  # fmt: skip
    for col in columns:
        table.add_column(col, justify="right")
    for target in CHECK_FREQUENCIES:
        table.add_row(*truth_row(run, out, target))
    run.console.print(table)


def truth_row(run: DemoRun, out: SweepOutcome, target: float) -> list[str]:
    """One row of the comparison with the simulated coil's true Ls, at the point nearest
    ``target``: a corrected value flagged beyond accuracy is not printed as a number."""
    from acquire.display import BEYOND, format_measured
    from acquire.impedance import quantities
    from acquire.uncertainty import beyond_accuracy, quantity_uncertainty

    i = int(np.argmin(np.abs(np.log(out.frequency / target))))
    f = out.frequency[i : i + 1]
    true = quantities(f, run.sim.dut_impedance(f))["Ls"][0]
    raw = quantities(f, out.raw[i : i + 1])["Ls"][0]
    if out.corrected is None:
        raise AcquireError("the demo's comparison needs the corrected sweep")
    zc = out.corrected[i : i + 1]
    cor = quantities(f, zc)["Ls"][0]
    row = [format_si(float(f[0]), "Hz"), format_si(true, "H"), format_si(raw, "H"),
           f"{(raw - true) / true:+.2%}"]  # fmt: skip
    if out.cov is None:
        return row + [format_si(cor, "H"), f"{(cor - true) / true:+.2%}", "—"]
    cov = np.nan_to_num(out.cov[i : i + 1], nan=0.0)
    u = float(quantity_uncertainty(f, zc, cov, ("Ls",))["Ls"][0])
    if out.flags is not None and out.flags[i] and beyond_accuracy(f, zc, cov, ("Ls",))["Ls"][0]:
        return row + [BEYOND, "—", "—"]
    within = "yes" if abs(cor - true) <= u else "no"
    return row + [format_measured("Ls", cor, u), f"{(cor - true) / true:+.2%}", within]


def predict_and_fit(run: DemoRun) -> None:
    """What the demo coil's geometry predicts, beside the equivalent circuit fitted to the sweep."""
    from acquire.coil import DEMO_COIL, compare, fit_sweep, predict
    from acquire.errors import ModelError

    out = run.outcome
    if out is None or out.corrected is None or out.frequency.size == 0:
        return
    g = DEMO_COIL
    run.console.print(
        f"\n[bold]Design against measurement[/]: {g.turns} turns of "
        f"{format_si(g.wire_diameter, 'm')} wire on a {format_si(g.former_diameter, 'm')} former, "
        f"{format_si(g.length, 'm')} long"
    )
    try:
        fit = fit_sweep(out.frequency, out.corrected, **_fit_uncertainty(run, out))
    except ModelError as exc:
        run.console.print(f"the equivalent circuit could not be fitted: {exc}")
        return
    run.console.print(compare(predict(g), fit))


def _fit_uncertainty(run: DemoRun, out: SweepOutcome) -> dict:
    """The fit's inputs for the sweep's uncertainty, split into the readings' noise and the
    meter's calibration error (correlated across the sweep), from the meter's stated accuracy;
    empty (the fit then estimates the noise, and says so) when the dialect states none."""
    from acquire.coil.fitcov import split_uncertainty

    accuracy = getattr(getattr(run.meter, "dialect", None), "accuracy", None)
    if accuracy is None:
        return {}
    sigma, systematic = split_uncertainty(out.frequency, out.raw, run.references, accuracy)
    return {"sigma": sigma, "systematic": systematic}


def finish(run: DemoRun) -> None:
    """Say where everything is."""
    path = getattr(run.store, "path", None)
    where = str(path.resolve()) if path else run.store.url
    run.console.print(
        f"\n{run.outcome.message(run.store.url) if run.outcome else 'no sweep was made'}\n"
        f"store: {where}\n"
        f"look again with: acquire reference list --store {run.store_url}",
        soft_wrap=True,
        markup=False,
        emoji=False,
    )


#: The demo's steps, in order; a new step is one more function of a DemoRun, put in this list.
STEPS: list[Callable[[DemoRun], None]] = [
    introduce,
    capture,
    sweep,
    compare_with_truth,
    predict_and_fit,
    production_lot,
    write_report,
    finish,
]
#: The characterisation alone (no lot, no report): what a test of the sweep needs.
SWEEP_STEPS: list[Callable[[DemoRun], None]] = [
    s for s in STEPS if s not in (production_lot, write_report)
]


def run_demo(
    store_url: str,
    live: bool = True,
    console: Console | None = None,
    points: int = 201,
    measure_time: float | None = None,
    seed: int = 0,
    steps: list[Callable[[DemoRun], None]] | None = None,
    publish: tuple[str, str] | None = None,
) -> DemoRun:
    """Run every step of ``steps`` (default :data:`STEPS`) against a simulator started for the
    occasion.

    ``measure_time`` is the simulated seconds per point; by default :data:`MEASURE_TIME` with the
    live view (so there is something to watch) and 0 without it (scripts want it quick).
    ``publish`` is (MQTT broker URL, line) to publish the production lot to.
    """
    if measure_time is None:
        measure_time = MEASURE_TIME if live else 0.0
    from acquire.store import open_store
    from drivers.meter import ImpedanceMeter
    from drivers.simulator import running

    run = DemoRun(console=console or Console(), store_url=store_url, live=live, points=points)
    run.publish = publish
    with (
        running(dut="open", fixture=run.fixture, seed=seed, measure_time=measure_time) as sim,
        ImpedanceMeter.open(sim.resource, dialect="simulated") as meter,
        open_store(store_url) as store,
    ):
        run.sim, run.meter, run.store = sim, meter, store
        for step in STEPS if steps is None else steps:
            stopped = run.outcome is not None and run.outcome.interrupted
            if not stopped or step is finish:
                step(run)
    return run
