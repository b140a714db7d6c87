"""The sweep and reference commands as a user runs them, and their one-line errors."""

from __future__ import annotations

import os
import signal
import subprocess
import sys
import time
from datetime import UTC, datetime
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from bench_support import PutsEachStandardIn

from acquire.cli import main
from acquire.store import open_store
from drivers.simulator import running

ROOT = Path(__file__).resolve().parents[1]


def acquire(*args: str, timeout: float = 60, **kw) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}
    return subprocess.run(
        [sys.executable, "-m", "acquire", *args],
        capture_output=True,
        text=True,
        timeout=timeout,
        cwd=ROOT,
        env=env,
        **kw,
    )


@pytest.fixture(autouse=True)
def _no_bench_environment(monkeypatch):
    for name in list(os.environ):
        if name.startswith("ACQUIRE_"):
            monkeypatch.delenv(name)


def test_capture_then_sweep_with_the_stored_reference_and_csv(tmp_path, monkeypatch, capsys):
    url = f"sqlite:///{tmp_path / 'bench.db'}"
    csv_path = tmp_path / "coil.csv"
    with running(dut="open", fixture="long-leads", seed=21, measure_time=0) as sim:
        prompts: list[str] = []

        def operator_at_the_keyboard(prompt: str) -> str:
            prompts.append(prompt)
            for standard in ("open", "short", "load"):
                if f"measure the {standard}" in prompt:
                    sim.insert(standard)
            return ""

        monkeypatch.setattr("builtins.input", operator_at_the_keyboard)
        common = ["--resource", sim.resource, "--store", url]
        plan = ["--start", "1kHz", "--stop", "1MHz", "--points", "31"]
        code = main(
            ["reference", "capture", *common, *plan, "--fixture", "long-leads",
             "--load-value", "100ohm", "--name", "leads A"]
        )  # fmt: skip
        out = capsys.readouterr().out
        assert code == 0
        assert len(prompts) == 3  # --load-value alone adds the load to open and short
        assert "discharged" in out and "licensed practice" in out  # the safety caution
        assert "saved reference set 1 ('leads A', open-short-load, 31 points)" in out

        sim.insert("air-core-coil")
        code = main(
            ["sweep", *common, "--start", "1kHz", "--stop", "100kHz", "--points", "11",
             "--reference", "leads A", "--fixture", "long-leads", "--dut", "coil 7",
             "--no-live", "--csv", str(csv_path)]
        )  # fmt: skip
        captured = capsys.readouterr()
        assert code == 0, captured.err
    out = captured.out
    assert "sweep: 11 points, log, 1.000 kHz to 100.0 kHz" in out
    assert "raw vs corrected" in out
    # A 10 uH coil at 1 kHz is about 0.08 ohm, as small as the long leads' short residual.
    assert "warning: the DUT's |Z| is within 10x of the short residual" in " ".join(out.split())
    assert f"sweep complete: 11 points saved as sweep 1 in {url}" in " ".join(out.split())
    table = pd.read_csv(csv_path, comment="#")
    assert list(table.columns)[:5] == [
        "frequency [Hz]",
        "raw R [ohm]",
        "raw X [ohm]",
        "corrected R [ohm]",
        "corrected X [ohm]",
    ]
    # 10 uH coil (the profile's value) after correction; within 1 % at every point.
    assert np.allclose(table["Ls [H]"], 10e-6, rtol=0.01)
    with open_store(url) as store:
        info = store.sweep_info(1)
        assert info.status == "complete" and info.points == 11
        assert info.reference_set_id == 1 and info.dut == "coil 7"

    assert main(["reference", "list", "--store", url]) == 0
    listed = capsys.readouterr().out
    assert "leads A" in listed and "long-leads" in listed
    assert main(["reference", "show", "latest", "--store", url]) == 0
    shown = capsys.readouterr().out
    assert "reference set 1: open-short-load on fixture long-leads, 31 points" in shown
    assert main(["reference", "check", "1", "--store", url]) == 0


def test_sweep_without_reference_stores_raw_readings(tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'raw.db'}"
    with running(dut="demo-coil", fixture="bench-leads", seed=22, measure_time=0) as sim:
        code = main(
            ["sweep", "--resource", sim.resource, "--store", url, "--list", "1k, 10k, 100k",
             "--no-live", "--show", "ls,Q,theta"]
        )  # fmt: skip
    out = capsys.readouterr().out
    assert code == 0
    assert "selected points (raw)" in out and "theta" in out
    with open_store(url) as store:
        points = store.sweep_points(1)
    assert points["frequency"].tolist() == [1e3, 1e4, 1e5]
    assert points["corrected_r"].isna().all()


def test_a_plan_outside_the_meter_range_is_refused_before_anything_is_recorded(tmp_path, capsys):
    url = f"sqlite:///{tmp_path / 'range.db'}"
    with running(dut="demo-coil", fixture="bench-leads", seed=24, measure_time=0) as sim:
        code = main(
            ["sweep", "--resource", sim.resource, "--store", url, "--start", "5Hz",
             "--stop", "1MHz", "--no-live"]
        )  # fmt: skip
    captured = capsys.readouterr()
    assert code == 2
    assert "narrow the plan" in captured.err
    assert "points" not in captured.out  # no progress was shown: nothing was measured
    with open_store(url) as store:
        assert store.list_sweeps() == []  # and no empty sweep was left in the store


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["sweep", "--resource", "TCPIP0::127.0.0.1::9::SOCKET"], "127.0.0.1::9::SOCKET"),
        (["sweep", "--resource", "X", "--start", "10MHz", "--stop", "1kHz"], "must be above"),
        (["sweep", "--resource", "X", "--show", "Lx"], "unknown quantity 'Lx'"),
        (["sweep", "--resource", "X", "--list", "1k", "--points", "5"], "--points goes with"),
        (["sweep", "--resource", "X", "--csv", "/no/such/folder/a.csv"], "does not exist"),
        (["reference", "show", "42"], "no reference set 42"),
        (["reference", "check", "latest"], "no reference sets"),
        (["reference", "capture", "--resource", "X", "--fixture", "A", "--standards", "load"],
         "--load-value"),
    ],
)  # fmt: skip
def test_errors_end_in_one_line_without_a_traceback(tmp_path, args, fragment):
    url = f"sqlite:///{tmp_path / 'e.db'}"
    with open_store(url):
        pass  # an empty store: the reference commands read it and find nothing
    result = acquire(*args, "--store", url)
    assert result.returncode == 2
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1, result.stderr
    assert "Traceback" not in result.stderr
    assert lines[0].startswith(f"acquire {args[0]}: error: ")
    assert fragment in lines[0]


def test_ctrl_c_during_a_sweep_saves_the_points_and_says_where(tmp_path):
    url = f"sqlite:///{tmp_path / 'stop.db'}"
    with running(dut="demo-coil", fixture="bench-leads", seed=23, measure_time=0.005) as sim:
        env = {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}
        proc = subprocess.Popen(
            [sys.executable, "-m", "acquire", "sweep", "--resource", sim.resource, "--store", url,
             "--points", "401", "--no-live"],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT, env=env,
        )  # fmt: skip
        first = proc.stdout.readline()  # "sweep: 401 points, ..." once the sweep has begun
        assert first.startswith("sweep: 401 points"), first + proc.stderr.read()
        time.sleep(0.6)
        proc.send_signal(signal.SIGINT)
        out, err = proc.communicate(timeout=30)
    assert proc.returncode == 130, err
    lines = err.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in err
    assert lines[0].startswith("acquire sweep: sweep interrupted (stopped with Ctrl-C): ")
    assert f"of 401 points saved as sweep 1 in {url}, marked interrupted" in lines[0]
    n = int(lines[0].split("): ")[1].split(" of ")[0])
    assert 0 < n < 401
    with open_store(url) as store:
        info = store.sweep_info(1)
        assert info.status == "interrupted" and info.points == n
        assert len(store.sweep_points(1)) == n
    assert "Sweep interrupted" in out


def test_help_explains_trade_terms_and_safety():
    top = acquire("--help")
    assert top.returncode == 0
    for name in ("demo", "sweep", "reference"):
        assert name in top.stdout
    sweep = acquire("sweep", "--help").stdout
    assert "Q = X/R" in sweep and "self-resonance" in sweep and "licensed practice" in sweep
    ref = acquire("reference", "--help").stdout
    assert "OPEN" in ref and "SHORT" in ref and "LOAD" in ref and "DC bias" in ref
    capture = acquire("reference", "capture", "--help").stdout
    assert "DC bias" in capture and "licensed practice" in capture


def test_a_bad_reference_age_in_the_environment_is_one_line_naming_it(monkeypatch, capsys):
    # A bench set-up error in an environment variable must not break every command (even
    # --help) with a traceback; the sweep that uses it says which variable to fix.
    monkeypatch.setenv("ACQUIRE_MAX_REFERENCE_AGE", "8h")
    with pytest.raises(SystemExit) as done:
        main(["--help"])
    assert done.value.code == 0
    capsys.readouterr()
    with pytest.raises(SystemExit) as done:
        main(["sweep", "--resource", "TCPIP0::127.0.0.1::1::SOCKET"])
    assert done.value.code == 2
    err = capsys.readouterr().err
    assert "ACQUIRE_MAX_REFERENCE_AGE" in err and "Traceback" not in err


PLAN = ["--start", "1kHz", "--stop", "1MHz", "--points", "31"]


@pytest.fixture
def bench(tmp_path):
    """A simulated bench-leads fixture, empty, and a store holding a good reference set
    ("good") and the same set with the open's reading kept as the short's too ("bad": the short
    reads the same as the open, which no fixture with a working short does)."""
    import dataclasses

    from acquire.capture import capture_references
    from acquire.plan import log_plan
    from drivers.meter import ImpedanceMeter

    url = f"sqlite:///{tmp_path / 'bench.db'}"
    with running(dut="open", fixture="bench-leads", seed=31, measure_time=0) as sim:
        with ImpedanceMeter.open(sim.resource, dialect="simulated") as meter:
            identity = str(meter.identify())
            refs = capture_references(
                meter,
                log_plan("1kHz", "1MHz", 31),
                PutsEachStandardIn(sim),
                load_true=sim.load_true,
                fixture="bench-leads",
                meter_name=identity,
            )
        bad = dataclasses.replace(refs, short=refs.open, short_u=refs.open_u)
        with open_store(url) as store:
            store.save_reference_set(refs, name="good")
            store.save_reference_set(bad, name="bad")
        sim.insert("open")
        yield sim, url, identity


def test_a_reference_set_that_fails_its_check_is_refused(bench):
    sim, url, _ = bench
    result = acquire(
        "sweep", "--resource", sim.resource, "--store", url, *PLAN, "--reference", "bad",
        "--no-live",
    )  # fmt: skip
    assert result.returncode == 2, result.stdout + result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in result.stderr
    assert lines[0].startswith("acquire sweep: error: reference set 2 fails its check: ")
    assert "--use-despite-problems REASON" in lines[0]
    assert "points" not in result.stdout  # nothing was measured
    with open_store(url) as store:
        assert store.list_sweeps() == []


def test_a_failing_reference_set_is_used_with_a_reason_kept_with_the_sweep(bench, tmp_path):
    sim, url, identity = bench
    sim.insert("demo-coil")
    csv_path = tmp_path / "override.csv"
    reason = "short replaced by the open on purpose to test the refusal"
    before = datetime.now(UTC).replace(microsecond=0)
    result = acquire(
        "sweep", "--resource", sim.resource, "--store", url, *PLAN, "--reference", "bad",
        "--use-despite-problems", reason, "--dut", "coil 12", "--fixture", "bench-leads",
        "--no-live", "--csv", str(csv_path),
    )  # fmt: skip
    after = datetime.now(UTC)
    assert result.returncode == 0, result.stderr
    out = " ".join(result.stdout.split())
    assert f"reference set used despite failing its check; reason given: {reason}" in out
    with open_store(url) as store:
        info = store.sweep_info(1)
        assert info.settings["reference_override"] == reason
        assert info.reference_set_id == 2
    # The CSV names the sweep in "# key: value" lines above the header, which pandas skips.
    head = {}
    for line in csv_path.read_text(encoding="utf-8").splitlines():
        if not line.startswith("#"):
            break
        key, value = line[2:].split(": ", 1)
        head[key] = value
    assert head["dut"] == "coil 12"
    assert head["meter"] == identity
    assert head["fixture"] == "bench-leads"
    assert head["reference set"].startswith("#2 ")
    assert head["status"] == "complete"
    assert head["reference override"] == reason
    assert before <= datetime.fromisoformat(head["time"]) <= after
    table = pd.read_csv(csv_path, comment="#")
    assert list(table.columns)[:5] == [
        "frequency [Hz]", "raw R [ohm]", "raw X [ohm]", "corrected R [ohm]", "corrected X [ohm]",
    ]  # fmt: skip
    # 31 points, log-spaced from 1 kHz to 1 MHz: 1 kHz * 10^(3 k / 30) (computed).
    assert np.allclose(table["frequency [Hz]"], 1e3 * 10 ** (np.arange(31) / 10), rtol=1e-12)


@pytest.mark.parametrize("with_reference", [False, True])
def test_an_empty_fixture_is_called_open_at_the_end(bench, capsys, with_reference):
    sim, url, _ = bench
    refs = ["--reference", "good"] if with_reference else []
    code = main(["sweep", "--resource", sim.resource, "--store", url, *PLAN, *refs, "--no-live"])
    out = " ".join(capsys.readouterr().out.split())
    assert code == 0
    assert "Sweep complete: 31 of 31 points (the readings look like an open fixture)" in out
    assert "warning: the readings look like an open fixture (nothing connected)" in out
    assert out.endswith("; but the readings look like an open fixture (nothing connected)")


@pytest.mark.parametrize("with_reference", [False, True])
def test_a_coil_in_the_fixture_is_not_called_open(bench, capsys, with_reference):
    sim, url, _ = bench
    sim.insert("demo-coil")
    refs = ["--reference", "good"] if with_reference else []
    code = main(["sweep", "--resource", sim.resource, "--store", url, *PLAN, *refs, "--no-live"])
    out = capsys.readouterr().out
    assert code == 0
    assert "open fixture" not in out
    assert "Sweep complete: 31 of 31 points" in " ".join(out.split())


def test_an_averaging_of_zero_is_refused_not_ignored(tmp_path, capsys):
    """`--averaging 0` used to be dropped silently (0 is false) while the sweep's stored
    settings said 0; it is now given to the meter, which refuses it before anything is measured."""
    url = f"sqlite:///{tmp_path / 'a.db'}"
    with running(dut="demo-coil", measure_time=0) as sim:
        code = main(
            ["sweep", "--resource", sim.resource, "--store", url, "--points", "5",
             "--averaging", "0", "--no-live"]
        )  # fmt: skip
    assert code == 2
    assert "averaging" in capsys.readouterr().err
    with open_store(url) as store:
        assert store.list_sweeps() == []


def test_an_override_on_a_set_that_passes_is_named_and_not_recorded(bench):
    """Asking to use a set "despite problems" when it has none is said, not silently ignored,
    and no override is stored with the sweep."""
    sim, url, _ = bench
    sim.insert("demo-coil")
    result = acquire(
        "sweep", "--resource", sim.resource, "--store", url, *PLAN, "--reference", "good",
        "--use-despite-problems", "just in case", "--no-live",
    )  # fmt: skip
    assert result.returncode == 0, result.stderr
    assert "--use-despite-problems is not needed" in " ".join(result.stdout.split())
    with open_store(url) as store:
        assert "reference_override" not in (store.sweep_info(1).settings or {})
