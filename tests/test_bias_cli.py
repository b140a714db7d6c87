"""`acquire bias-sweep` and `acquire temperature-rise` as a user runs them, on the simulator.

Outside references: the simulated chokes' closed forms (drivers/simulator/saturation.py: the
powder choke's 10 % drop at 10·(1/9)^(1/2) = 3.333 A, its 30 % drop at 6.547 A, above a 0-6 A
sweep; computed) and the winding's steady rise by the resistance method (IEC 60076-2, copper
234.5 °C; from memory), drivers/simulator/thermal.py.
"""

from __future__ import annotations

import json
import os
import signal
import subprocess
import sys
import time
from pathlib import Path

import pytest

from acquire.cli import main
from drivers.meter import ImpedanceMeter
from drivers.simulator import running, thermal

ROOT = Path(__file__).resolve().parents[1]


@pytest.fixture(autouse=True)
def _no_bench_environment(monkeypatch):
    for name in list(os.environ):
        if name.startswith("ACQUIRE_"):
            monkeypatch.delenv(name)


def closed_with(sim, entries: int) -> list[float]:
    for _ in range(300):
        if len(sim.bias_log) >= entries:
            break
        time.sleep(0.01)
    return sim.bias_log


def test_bias_sweep_prints_each_drop_current(tmp_path, capsys):
    with running(dut="powder-choke", fixture="direct", noise=False, measure_time=0) as sim:
        code = main(["bias-sweep", "--resource", sim.resource, "--store",
                     f"sqlite:///{tmp_path / 'b.db'}", "--stop", "6A", "--points", "25",
                     "--frequency", "10kHz", "--dwell", "0s", "--no-live"])  # fmt: skip
        out = capsys.readouterr().out
        assert code == 0
        assert closed_with(sim, 1) == [0.0]
    assert "point 25/25  set 6 A  applied 6 A" in out
    assert "saturation current at 10 % drop: 3.33 A" in out
    assert "saturation current at 20 % drop: 5 A" in out
    assert "saturation current at 30 % drop: above 6 A" in out
    assert "interpolated linearly" in out and "status: complete" in out


def test_a_bias_sweep_is_stored_and_found_again(tmp_path, capsys):
    store = f"sqlite:///{tmp_path / 'b.db'}"
    csv_now, png_now = tmp_path / "now.csv", tmp_path / "now.png"
    with running(dut="ferrite-power-choke", fixture="direct", noise=False, measure_time=0) as sim:
        code = main(["bias-sweep", "--resource", sim.resource, "--store", store, "--stop", "6A",
                     "--points", "13", "--frequency", "10kHz", "--dwell", "0s", "--no-live",
                     "--dut", "[bold]choke 7", "--csv", str(csv_now), "--picture",
                     str(png_now)])  # fmt: skip
    assert code == 0
    out = capsys.readouterr().out
    assert "stored as bias sweep 1" in out
    assert main(["bias-sweep", "list", "--store", store]) == 0
    listed = capsys.readouterr().out
    assert "[bold]choke 7" in listed and "complete" in listed
    assert main(["bias-sweep", "show", "1", "--store", store]) == 0
    assert "[bold]choke 7" in capsys.readouterr().out
    later = tmp_path / "later.csv"
    assert main(["bias-sweep", "export", "1", "--csv", str(later), "--store", store]) == 0
    import pandas as pd

    at_end = pd.read_csv(csv_now, comment="#")
    again = pd.read_csv(later, comment="#")
    pd.testing.assert_frame_equal(at_end, again)
    assert len(again) == 13 and "Ls [H]" in again.columns
    assert png_now.read_bytes()[:8] == b"\x89PNG\r\n\x1a\n"
    # the store's own file is never an output, and nothing was measured when refused
    code = main(["bias-sweep", "--resource", "TCPIP0::127.0.0.1::9::SOCKET", "--store", store,
                 "--stop", "6A", "--csv", str(tmp_path / "b.db")])  # fmt: skip
    assert code == 2
    assert "store" in capsys.readouterr().err


def test_measuring_needs_a_resource_or_an_action(capsys):
    assert main(["bias-sweep", "--stop", "6A"]) == 2
    assert "action first: acquire bias-sweep list" in capsys.readouterr().err
    assert main(["temperature-rise", "--resource", "TCPIP0::127.0.0.1::9::SOCKET"]) == 2
    assert "measuring needs --current" in capsys.readouterr().err


def test_sigterm_mid_sweep_ramps_the_bias_to_zero_and_keeps_the_points(tmp_path):
    with running(dut="ferrite-power-choke", fixture="direct", noise=False, measure_time=0) as sim:
        env = {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}
        proc = subprocess.Popen(
            [sys.executable, "-m", "acquire", "bias-sweep", "--resource", sim.resource,
             "--store", f"sqlite:///{tmp_path / 'b.db'}", "--stop", "6A", "--points", "25",
             "--frequency", "10kHz", "--step", "0.25A", "--dwell", "0.1s"],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT, env=env,
        )  # fmt: skip
        seen = []
        for line in proc.stdout:
            seen.append(line)
            if line.startswith("point 9/25"):
                proc.send_signal(signal.SIGTERM)
                break
        rest, err = proc.communicate(timeout=60)
        assert proc.returncode == 130, err
        assert "stopped by SIGTERM" in err and "ramped to zero and switched off" in err
        assert "status: interrupted (stopped by SIGTERM)" in rest
        # the command's one connection closed with no current flowing
        assert closed_with(sim, 1) == [0.0]
        with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
            assert meter.session.query("BIAS:STAT?;BIAS:MEAS?").strip() == "0;+0E+00"


def test_temperature_rise_search_finds_the_current_for_the_rise(tmp_path, capsys):
    with running(dut="powder-choke", fixture="direct", noise=False, measure_time=0) as sim:
        with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
            meter.session.query("SIM:WARP 2000;*OPC?")  # 90 s time constant: 45 ms wall time
        code = main(["temperature-rise", "--resource", sim.resource, "--store",
                     f"sqlite:///{tmp_path / 'b.db'}", "--current", "3A", "--ambient", "23",
                     "--rise", "30K", "--interval", "0.02s", "--settle-window", "0.3s",
                     "--settle-tolerance", "0.01K", "--time-limit", "20s", "--json"])  # fmt: skip
        captured = capsys.readouterr()
        assert code == 0, captured.err
        assert closed_with(sim, 2)[-1] == 0.0
        assert all(v == 0.0 for v in sim.bias_log)
    document = json.loads(captured.out)
    assert document["status"] == "complete" and document["settled"]
    found = document["rise_current_a"]
    assert abs(document["final_rise_k"] - 30.0) <= 1.0
    truth = thermal.steady_state_rise(found, 0.030, 20.0, 23.0, 45.0)
    assert abs(truth - 30.0) <= 1.02
    assert "stored energy" in captured.err  # with --json the notes go to stderr


def test_temperature_rise_says_when_the_maximum_cannot_reach_the_rise(tmp_path, capsys):
    with running(dut="powder-choke", fixture="direct", noise=False, measure_time=0) as sim:
        with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
            meter.session.query("SIM:WARP 2000;*OPC?")
        code = main(["temperature-rise", "--resource", sim.resource, "--store",
                     f"sqlite:///{tmp_path / 'b.db'}", "--current", "3A", "--ambient", "23",
                     "--rise", "40K", "--max-bias", "4A", "--interval", "0.02s",
                     "--settle-window", "0.3s", "--settle-tolerance", "0.01K",
                     "--time-limit", "20s"])  # fmt: skip
        out = capsys.readouterr().out
    assert code == 1
    # steady rise at 4 A: g = 16·45·0.030/254.5 = 0.08487, 0.08487·257.5/0.91513 = 23.9 K
    # (computed from drivers/simulator/thermal.py's closed form)
    assert "40 K not reached at the largest allowed 4 A: rise 23.9 K" in out


def test_live_view_draws_the_curve_the_drop_levels_and_the_present_point():
    import io

    import numpy as np
    from rich.console import Console

    from acquire.bias.live import LEVEL_MARK, BiasProgress, render
    from acquire.bias.sweep_run import BiasPoint

    view = BiasProgress("bias sweep", (0.1, 0.2, 0.3), 25, 6.0, "choke [bold]7")
    for i, amps in enumerate(np.linspace(0, 6, 25)[:18]):
        ls = 47e-6 / (1 + (amps / 10) ** 2)  # the powder choke's curve (saturation.py)
        view.add(BiasPoint(i, 25, amps, amps, 0j, None, ls, 0.03, 40.0))
    console = Console(file=io.StringIO(), width=90, height=24, color_system=None)
    console.print(render(view, 90, 24))
    text = console.file.getvalue()
    assert "choke [bold]7" in text  # a name is text, never markup
    assert sum(LEVEL_MARK * 10 in row for row in text.splitlines()) == 3  # one per drop
    # ½ · 39.81 µH · (4.25 A)² = 359.5 µJ (computed)
    assert "point 18/25  set 4.25 A  applied 4.25 A  Ls 39.81 µH" in text
    assert "stores 359.5" in text
