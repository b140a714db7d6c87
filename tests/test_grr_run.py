"""`acquire grr run` on the simulated meter: a crossed study guided through piped input.

The study's design is the crossed layout of the Automotive Industry Action Group's Measurement
Systems Analysis manual (4th edition, 2010): every operator measures every part in every trial,
the parts in a random order. What is checked here is behaviour the brief states (each part ×
operator × trial once, the order reproduced by its seed, the study stored and kept when
interrupted, names kept as text) and the simulator's operator effect against its own truth.
"""

from __future__ import annotations

import argparse
import io
import itertools
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from bench_support import PutsEachStandardIn
from store_support import store_location

from acquire.capture import capture_references
from acquire.commands.grr_run import add_run_arguments, run_study
from acquire.msa.study import study_order
from acquire.plan import log_plan
from acquire.production.plan_file import example_plan_path, load_plan
from acquire.store import open_store
from drivers.meter import ImpedanceMeter
from drivers.simulator.seating import seated

NAMES = ("Ana", "Ben", "Chen")
HOSTILE = ("<b>Ana</b>", '"Ben" O\'Neil; DROP', "[red]Chen[/red] & :x:")
SEED = 20260317
CHECK = "Ls@100000"


class PipedInput(io.StringIO):
    """Standard input from a pipe; a Ctrl-C arrives when line ``stop_at`` (from 0) is read."""

    def __init__(self, text: str, stop_at: int | None = None) -> None:
        super().__init__(text)
        self.read_lines = 0
        self.stop_at = stop_at

    def isatty(self) -> bool:
        return False

    def readline(self, *args: Any) -> str:  # type: ignore[override]
        if self.stop_at is not None and self.read_lines == self.stop_at:
            raise KeyboardInterrupt
        self.read_lines += 1
        return super().readline(*args)


@pytest.fixture(scope="module")
def bench(module_simulator, tmp_path_factory) -> dict[str, Any]:
    """The demo coil on bench leads (with their seating settings), references captured once."""
    sim = module_simulator(dut="demo-coil", fixture="bench-leads", noise=True, seed=5)
    plan = load_plan(example_plan_path())
    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        identity = meter.identify()
        refs = capture_references(
            meter, log_plan("100Hz", "1MHz", 41), PutsEachStandardIn(sim),
            load_true=sim.load_true, fixture=plan.fixture, meter_name=str(identity), repeats=2,
        )  # fmt: skip
    sim.insert("demo-coil")
    return {"sim": sim, "refs": refs, "plan": plan}


@pytest.fixture(params=["sqlite", "postgresql"])
def store_url(request, tmp_path, bench):
    """A store on each engine holding the bench's references."""
    with store_location(request.param, tmp_path) as (url, schema):
        if schema is not None:
            url = f"{url}?schema={schema}"
        with open_store(url) as store:
            store.save_reference_set(bench["refs"], name="grr test")
        yield url, schema


def _args(bench, url: str, *extra: str) -> argparse.Namespace:
    parser = argparse.ArgumentParser()
    add_run_arguments(parser)
    return parser.parse_args(
        ["--resource", bench["sim"].resource, "--store", url, "--plan", str(example_plan_path()),
         "--parts", "5", "--trials", "2", "--check", CHECK, "--seed", str(SEED), *extra]
    )  # fmt: skip


def _run(monkeypatch, capsys, args, stdin: PipedInput) -> tuple[int, str]:
    monkeypatch.setattr("sys.stdin", stdin)
    code = run_study(args)
    return code, capsys.readouterr().out


def _open(url: str, schema: str | None):
    return open_store(url)


def test_order_covers_each_part_operator_trial_once_and_follows_the_seed():
    order = study_order(5, NAMES, 2, SEED)
    cells = [(t.part, t.operator, t.trial) for t in order]
    assert sorted(cells) == sorted(itertools.product(range(1, 6), NAMES, (1, 2)))
    assert [t.index for t in order] == list(range(30))
    runs = [[t.part for t in order[k : k + 5]] for k in range(0, 30, 5)]
    assert all(sorted(run) == [1, 2, 3, 4, 5] for run in runs)
    assert [(t.trial, t.operator) for t in order[::5]] == list(itertools.product((1, 2), NAMES))
    assert study_order(5, NAMES, 2, SEED) == order
    # numpy's Generator.permutation of the seed, drawn trial by trial and operator by operator
    rng = np.random.default_rng(SEED)
    assert runs == [list(rng.permutation(5) + 1) for _ in range(6)]
    assert len({tuple(r) for r in runs}) > 1  # randomised, not one order repeated
    assert [t.part for t in study_order(5, NAMES, 2, SEED + 1)] != [t.part for t in order]


def test_full_study_on_the_simulator_is_stored_and_shows_the_operators_offsets(
    bench, store_url, monkeypatch, capsys
):
    url, schema = store_url
    args = _args(bench, url, "--operator-names", ",".join(NAMES), "--tolerance", "20uH")
    code, out = _run(monkeypatch, capsys, args, PipedInput("\n" * 30))
    assert code == 0, out
    assert "Ana: seat part" in out and "acquire grr analyse" in out
    with _open(url, schema) as store:
        (info,) = store.list_grr_studies()
        loaded_info, data = store.load_grr_study(info.id)
        rows = store.grr_measurements(info.id)
    assert loaded_info == info
    assert (info.status, info.parts, info.operators, info.trials) == ("complete", 5, 3, 2)
    assert info.operator_names == NAMES and info.seed == SEED and info.quantity == CHECK
    assert info.unit == "H" and info.tolerance == pytest.approx(20e-6, rel=1e-12)
    assert f"study {info.id} complete: 30 of 30" in out
    order = study_order(5, NAMES, 2, SEED)
    assert [(t.part, t.operator, t.trial) for t in order] == list(
        zip(data.part.tolist(), data.operator.tolist(), data.trial.tolist(), strict=True)
    )
    assert [r.order_index for r in rows] == list(range(30))
    assert np.all(np.isfinite(data.value)) and all(np.isfinite(r.uncertainty) for r in rows)

    # The simulator's truth: part p seated by operator o without the per-seating random part
    # (drivers/simulator/seating.py); its series Ls at 100 kHz is X/(2 pi f) of the coil alone
    # (the open/short/load correction removes the fixture; the contact adds only resistance).
    sim, f = bench["sim"], 1e5
    truth = {
        (p, o): float(seated(sim.part_profile(p), sim.seating_offset(o)).impedance(f)[0].imag)
        / (2 * np.pi * f)
        for p in range(1, 6)
        for o in NAMES
    }
    measured = {o: data.value[data.operator == o].mean() for o in NAMES}
    expected = {o: np.mean([truth[p, o] for p in range(1, 6)]) for o in NAMES}
    ls = float(np.mean(data.value))
    # Bound (computed): one reading's random error is the seating's own part (bench-leads.toml
    # seating_repeat 0.05 %) and the meter's noise (simulated-meter.toml accuracy_class 0.05 %
    # of |Z| at its 4 reference periods, the plan's "medium" speed, times 1 + f/frequency_corner
    # = 1.01, and |Z|/X = 1.0003 at Q = 38: at most 0.06 % of Ls); the systematic error and the
    # references' are common to every reading and cancel in a difference. A difference of two
    # operators' means over 10 readings each has sigma = sqrt(2/10) * sigma_1; bound 5 sigma.
    sigma_1 = ls * np.hypot(5e-4, 6e-4)
    bound = 5 * np.sqrt(2 / 10) * sigma_1
    spreads = []
    for a, b in itertools.combinations(NAMES, 2):
        got, want = measured[a] - measured[b], expected[a] - expected[b]
        assert abs(got - want) < bound, (a, b, got, want, bound)
        spreads.append(abs(want))
    assert max(spreads) > 2 * bound  # the operators really differ: a test with teeth


def test_ctrl_c_mid_study_keeps_what_was_measured(bench, tmp_path, monkeypatch, capsys):
    url = f"sqlite:///{tmp_path / 'store.db'}"
    with open_store(url) as store:
        store.save_reference_set(bench["refs"], name="grr test")
    args = _args(bench, url, "--operators", "3")
    names = "Ana\nBen\nChen\n"
    code, out = _run(monkeypatch, capsys, args, PipedInput(names + "\n" * 30, stop_at=3 + 7))
    assert code == 130
    with open_store(url) as store:
        (info,) = store.list_grr_studies()
        _, data = store.load_grr_study(info.id)
    assert info.status == "interrupted" and "Ctrl-C" in info.note
    assert info.operator_names == NAMES
    order = study_order(5, NAMES, 2, SEED)[:7]
    assert list(zip(data.part.tolist(), data.operator.tolist(), strict=True)) == [
        (t.part, t.operator) for t in order
    ]
    assert f"study {info.id} interrupted (stopped with Ctrl-C): 7 of 30" in out


def test_hostile_operator_names_are_stored_and_printed_as_text(
    bench, tmp_path, monkeypatch, capsys
):
    url = f"sqlite:///{tmp_path / 'store.db'}"
    with open_store(url) as store:
        store.save_reference_set(bench["refs"], name="grr test")
    args = _args(bench, url, "--operators", "3")
    lines = "\n".join(HOSTILE) + "\n" + "\n" * 30
    code, out = _run(monkeypatch, capsys, args, PipedInput(lines))
    assert code == 0, out
    for name in HOSTILE:
        assert f"{name}: seat part" in out
    with open_store(url) as store:
        (info,) = store.list_grr_studies()
        _, data = store.load_grr_study(info.id)
    assert info.operator_names == HOSTILE
    assert sorted(set(data.operator.tolist())) == sorted(HOSTILE)
    # each hostile name reached the simulator as text: three different seating offsets
    offsets = {bench["sim"].seating_offset(n) for n in HOSTILE}
    assert len(offsets) == 3


def test_the_input_ending_early_leaves_an_interrupted_study(bench, tmp_path, monkeypatch, capsys):
    url = f"sqlite:///{tmp_path / 'store.db'}"
    with open_store(url) as store:
        store.save_reference_set(bench["refs"], name="grr test")
    args = _args(bench, url, "--operator-names", "Ana,Ben")
    code, out = _run(monkeypatch, capsys, args, PipedInput("\n" * 4))
    assert code == 1
    with open_store(url) as store:
        (info,) = store.list_grr_studies()
    assert (info.status, info.measurements, info.note) == ("interrupted", 4, "the input ended")


def test_names_must_match_the_operator_count(bench, tmp_path):
    from acquire.errors import InputError

    url = f"sqlite:///{tmp_path / 'store.db'}"
    args = _args(bench, url, "--operators", "2", "--operator-names", "Ana,Ben,Chen")
    with pytest.raises(InputError, match="3 operator names given for 2 operators"):
        run_study(args)
    assert not Path(tmp_path / "store.db").exists()
