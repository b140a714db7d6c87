"""The bias commands refuse what is unsafe before any bias is sent.

Outside reference: the energy a linear inductor stores, W = ½·L·I² (any electromagnetism
textbook; from memory). The confirmation threshold, 0.1 J, is common practice, no published
source (acquire/bias/energy.py).
"""

from __future__ import annotations

import json
import time

import pytest

from acquire.cli import main
from acquire.commands.bias_common import check_energy
from acquire.errors import BiasError
from drivers.simulator import running
from drivers.simulator.profiles import dut_from_dict

#: Our own invented large choke (1 pF: Ls at 10 kHz within 4e-5 of L): 10 mH stores
#: ½ · 0.01 · 6² = 0.18 J at 6 A (computed).
BIG_CHOKE = {
    "kind": "coil", "inductance": 10e-3, "dc_resistance": 0.2, "capacitance": 1e-12,
    "saturation_current": 20.0, "saturation_sharpness": 2.0,
}  # fmt: skip


@pytest.fixture(autouse=True)
def _no_bench_environment(monkeypatch):
    monkeypatch.delenv("ACQUIRE_RESOURCE", raising=False)
    monkeypatch.delenv("ACQUIRE_STORE", raising=False)


def never_energised(sim) -> bool:
    """No bias was ever switched on: the meter's bias is off at 0 A, and every connection that
    closed had no current flowing."""
    time.sleep(0.05)
    from drivers.meter import ImpedanceMeter

    with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
        state = meter.session.query("BIAS:STAT?;BIAS:CURR?").strip()
    return state == "0;+0E+00" and all(v == 0.0 for v in sim.bias_log)


def sweep_args(sim, tmp_path, *more: str) -> list[str]:
    return ["bias-sweep", "--resource", sim.resource, "--store",
            f"sqlite:///{tmp_path / 'b.db'}", "--frequency", "10kHz", "--points", "7",
            "--no-live", *more]  # fmt: skip


def test_a_bias_above_max_bias_is_refused_before_anything_is_sent(tmp_path, capsys):
    with running(dut="powder-choke", fixture="direct", noise=False, measure_time=0) as sim:
        code = main(sweep_args(sim, tmp_path, "--stop", "6A", "--max-bias", "4A"))
        err = capsys.readouterr().err
        assert code == 2
        assert "a bias of 6 A was asked, above --max-bias 4 A; nothing was sent" in err
        assert never_energised(sim)


def test_a_bias_above_the_meters_limit_is_refused(tmp_path, capsys):
    with running(dut="powder-choke", fixture="direct", noise=False, measure_time=0) as sim:
        # the simulated meter's bias limit is 8 A (sim_profiles/simulated-meter.toml)
        code = main(sweep_args(sim, tmp_path, "--stop", "9A", "--max-bias", "20A"))
        err = capsys.readouterr().err
        assert code == 2
        assert "above the supply's limit of 8 A; nothing was sent" in err
        assert never_energised(sim)


def test_a_large_energy_is_refused_without_a_terminal_or_unattended(tmp_path, capsys):
    big = dut_from_dict(BIG_CHOKE, "big-choke")
    with running(dut=big, fixture="direct", noise=False, measure_time=0) as sim:
        code = main(sweep_args(sim, tmp_path, "--stop", "6A"))  # pytest's stdin: no terminal
        captured = capsys.readouterr()
        assert code == 2
        assert "stored energy at 6 A: 180.0 mJ" in captured.out
        assert "above 0.1 J, and there is no terminal to confirm on" in captured.err
        assert never_energised(sim)

        code = main(sweep_args(sim, tmp_path, "--stop", "6A", "--unattended", "--json"))
        captured = capsys.readouterr()
        assert code == 0, captured.err
        document = json.loads(captured.out)
        assert document["settings"]["confirmed"] == "unattended"
        assert document["settings"]["energy_j"] == pytest.approx(0.18, rel=1e-4)
        assert len(document["points"]) == 7


def test_the_energy_prompt_asks_for_yes_on_a_terminal(capsys):
    # ½ · 10 mH · (5 A)² = 0.125 J (computed)
    energy, how = check_energy(10e-3, 5.0, False, ask=lambda prompt: "yes", terminal=True)
    assert energy == pytest.approx(0.125) and how == "operator"
    with pytest.raises(BiasError, match="not confirmed; no bias was sent"):
        check_energy(10e-3, 5.0, False, ask=lambda prompt: "y", terminal=True)
    # ½ · 47 µH · (6 A)² = 0.846 mJ (computed): below the threshold, nothing asked
    energy, how = check_energy(47e-6, 6.0, False, ask=pytest.fail, terminal=True)
    assert energy == pytest.approx(0.846e-3) and how == "below threshold"
    assert "846.0 µJ" in capsys.readouterr().out


def test_help_of_both_commands_carries_the_cautions(capsys):
    for command in ("bias-sweep", "temperature-rise"):
        with pytest.raises(SystemExit):
            main([command, "--help"])
        text = " ".join(capsys.readouterr().out.split())
        for caution in ("½·L·I²", "arc", "ramps", "Never disconnect",
                        "local codes and licensed practice"):  # fmt: skip
            assert caution in text, (command, caution)
