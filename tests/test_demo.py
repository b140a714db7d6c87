"""`acquire demo`: the whole job on the built-in simulator, as a script and with the live view."""

from __future__ import annotations

import io

import numpy as np
from rich.console import Console

from acquire.cli import main
from acquire.demo import STEPS, SWEEP_STEPS, run_demo
from acquire.impedance import quantities
from acquire.store import open_store
from drivers.simulator.profiles import load_dut


def test_demo_no_live_exits_0_and_leaves_a_complete_sweep(tmp_path, capsys):
    db = tmp_path / "demo.db"
    url = f"sqlite:///{db}"
    assert main(["demo", "--no-live", "--store", url]) == 0
    out = capsys.readouterr().out
    assert f"store: {db}" in out
    assert "saved reference set 1 (open-short-load)" in out
    assert "raw vs corrected" in out
    assert "against the simulated coil's true value" in out
    with open_store(url) as store:
        sweeps = store.list_sweeps()
        assert [s.status for s in sweeps] == ["complete"]
        info = sweeps[0]
        assert info.points == 201 and info.reference_set_id == 1 and info.dut == "demo-coil"
        points = store.sweep_points(info.id)
        assert store.list_reference_sets()[0].standards == ("open", "short", "load")
    f = points["frequency"].to_numpy()
    assert f[0] == 100.0 and f[-1] == 10e6
    corrected = points["corrected_r"].to_numpy() + 1j * points["corrected_x"].to_numpy()
    band = (f >= 1e3) & (f <= 1e5)
    ls = quantities(f[band], corrected[band])["Ls"]
    nominal = load_dut("demo-coil").values["inductance"]  # the profile's own value
    assert np.allclose(ls, nominal, rtol=0.01)
    # the production lot: every serial stored, the faulty one as "error" and then retested
    with open_store(url) as store:
        units = store.lot_units("DEMO-LOT-1")
        y = store.lot_yield("DEMO-LOT-1")
    assert (y.serials, y.attempts) == (30, 31)
    assert list(units.outcome).count("error") == 1
    again = units[units.serial == units.serial[units.outcome == "error"].iloc[0]]
    assert sorted(again.attempt) == [1, 2]
    assert set(units.outcome) <= {"pass", "fail", "error"} and "pass" in set(units.outcome)
    assert "first-pass yield" in out and "bins " in out


def test_demo_live_view_draws_plots_and_the_resonance(tmp_path):
    buffer = io.StringIO()
    console = Console(file=buffer, record=True, force_terminal=True, width=150, height=50)
    run = run_demo(
        f"sqlite:///{tmp_path / 'live.db'}",
        console=console,
        points=101,
        measure_time=0,
        steps=SWEEP_STEPS,
    )
    assert run.outcome is not None and run.outcome.status == "complete"
    text = console.export_text()
    assert "Ls (corrected)" in text and "Q (corrected)" in text
    assert "latest point" in text
    assert "self-resonance: raw" in text
    assert "DC bias" in text  # the safety caution is shown


def test_demo_steps_are_one_list_to_extend():
    names = [step.__name__ for step in STEPS]
    assert names[0] == "introduce" and names[-1] == "finish"
    assert names.index("capture") < names.index("sweep") < names.index("compare_with_truth")


def test_the_demos_fit_uses_the_sweeps_own_uncertainty(tmp_path):
    """The demo fits with the per-point uncertainty split into noise and the meter's correlated
    calibration error (so the fit does not estimate its noise from the scatter), and the true
    values of the simulated coil (its profile's own, `true_values`) lie within 3 sigma."""
    from acquire.coil import fit_sweep
    from acquire.demo import _fit_uncertainty

    run = run_demo(
        f"sqlite:///{tmp_path / 'd.db'}",
        live=False,
        console=Console(file=io.StringIO()),
        steps=SWEEP_STEPS,
    )
    inputs = _fit_uncertainty(run, run.outcome)
    n = run.outcome.frequency.size
    assert inputs["sigma"].shape == (n, 2) and inputs["systematic"].shape == (2 * n, 2 * n)
    fit = fit_sweep(run.outcome.frequency, run.outcome.corrected, **inputs)
    assert not any("scatter" in note for note in fit.notes)
    truth = load_dut("demo-coil").true_values()
    for value in fit.values:
        if value.key in ("L", "Rdc", "Cp", "SRF") and value.determined:
            assert abs(value.value - truth[value.key]) <= 3 * value.sigma, value
