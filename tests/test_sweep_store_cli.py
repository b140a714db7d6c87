"""`acquire sweep list|show|export|close` as a user runs them, on a store the demo made.

External checks: the CSV file read back with pandas (comment="#") gives the stored points
exactly (17 significant digits round-trip a float64: IEEE 754-2008, clause 5.12.2) and
Ls = X / (2 pi f) (the series inductance's definition); the JSON file is read with Python's
json module (RFC 8259 allows no NaN, so non-finite numbers are strings).
"""

from __future__ import annotations

import io
import json
import os
import re
import signal
import subprocess
import sys
import time
from datetime import UTC, datetime, timedelta
from pathlib import Path

import numpy as np
import pandas as pd
import pytest
from rich.console import Console
from sqlalchemy import update

from acquire.demo import run_demo
from acquire.store import open_store
from acquire.store.schema import TABLES
from drivers.simulator import running

ROOT = Path(__file__).resolve().parents[1]


def acquire(*args: str, timeout: float = 120) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}
    env["COLUMNS"] = "200"
    return subprocess.run(
        [sys.executable, "-m", "acquire", *args],
        capture_output=True, text=True, timeout=timeout, cwd=ROOT, env=env,
    )  # fmt: skip


def one_line_error(result: subprocess.CompletedProcess, fragment: str) -> None:
    assert result.returncode == 2, result.stdout + result.stderr
    lines = result.stderr.strip().splitlines()
    assert len(lines) == 1 and "Traceback" not in result.stderr, result.stderr
    assert lines[0].startswith("acquire sweep: error: ") and fragment in lines[0], lines[0]


@pytest.fixture(scope="module")
def demo(tmp_path_factory):
    folder = tmp_path_factory.mktemp("sweeps")
    url = f"sqlite:///{folder / 'demo.db'}"
    screen = io.StringIO()
    run_demo(url, live=False, points=101, measure_time=0, console=Console(file=screen, width=200))
    return folder, url, screen.getvalue()


def test_list_shows_the_demo_sweep(demo):
    folder, url, _ = demo
    result = acquire("sweep", "list", "--store", url)
    assert result.returncode == 0, result.stderr
    row = next(line for line in result.stdout.splitlines() if "demo-coil" in line)
    cells = re.split(r"\s{2,}", row.strip())
    assert cells[0] == "1" and cells[2:] == [
        "demo-coil",
        "bench-leads",
        "#1 OSL",
        "101",
        "complete",
    ]
    assert "no sweeps" in acquire("sweep", "list", "--dut", "other", "--store", url).stdout
    assert "no sweeps" in acquire("sweep", "list", "--status", "running", "--store", url).stdout
    assert "no sweeps" in acquire("sweep", "list", "--since", "2999-01-01", "--store", url).stdout
    assert "demo-coil" in acquire("sweep", "--store", url, "list", "--dut", "DEMO").stdout


def test_show_prints_the_table_the_sweep_printed_at_its_end(demo):
    _, url, screen = demo
    result = acquire("sweep", "show", "1", "--uncertainty", "--store", url)
    assert result.returncode == 0, result.stderr
    shown = result.stdout.splitlines()
    printed = screen.splitlines()
    start = printed.index(next(x for x in printed if x.startswith("Sweep complete")))
    end = start + next(i for i, x in enumerate(printed[start:]) if x.startswith("self-resonance"))
    assert shown[1 : 1 + end - start + 1] == printed[start : end + 1]


def test_csv_export_has_the_head_and_the_stored_points(demo):
    folder, url, _ = demo
    out = folder / "s.csv"
    assert acquire("sweep", "export", "1", "--csv", str(out), "--store", url).returncode == 0
    head = [x for x in out.read_text(encoding="utf-8").splitlines() if x.startswith("# ")]
    keys = [x[2:].split(":")[0] for x in head]
    assert keys[:6] == ["dut", "meter", "fixture", "reference set", "time", "status"]
    assert head[0] == "# dut: demo-coil" and head[2] == "# fixture: bench-leads"
    assert head[5] == "# status: complete"
    table = pd.read_csv(out, comment="#")
    with open_store(url) as store:
        points = store.sweep_points(1)
        started = store.sweep_info(1).started_at
    assert head[4] == f"# time: {started.isoformat(timespec='seconds')}"
    assert np.array_equal(table["frequency [Hz]"], points["frequency"])
    assert np.array_equal(table["corrected X [ohm]"], points["corrected_x"])
    assert np.array_equal(table["U(X) [ohm]"], points["u_x"])
    w = 2 * np.pi * points["frequency"].to_numpy()
    ls = table["Ls [H]"].to_numpy()
    shown = np.isfinite(ls)
    assert shown.sum() > 50
    assert np.allclose(ls[shown], points["corrected_x"].to_numpy()[shown] / w[shown], rtol=1e-14)


def test_json_export_has_the_same_head_and_the_points(demo):
    folder, url, _ = demo
    out = folder / "s.json"
    assert acquire("sweep", "export", "1", "--json", str(out), "--store", url).returncode == 0
    data = json.loads(out.read_text(encoding="utf-8"))
    assert data["about"]["dut"] == "demo-coil" and data["about"]["status"] == "complete"
    with open_store(url) as store:
        points = store.sweep_points(1)
    assert np.array_equal(data["points"]["frequency_hz"], points["frequency"])
    assert np.array_equal(data["points"]["corrected_r_ohm"], points["corrected_r"])
    assert data["points"]["flags"] == list(points["flags"])


@pytest.mark.parametrize(
    "args, fragment",
    [
        (["show", "abc"], "'abc' is not a sweep id"),
        (["show", "0"], "'0' is not a sweep id"),
        (["show", "-- 1e3"], "is not a sweep id"),
        (["show", "9" * 40], "is not a sweep id"),
        (["show", "99"], "there is no sweep 99"),
        (["export", "1", "--csv", "{store}"], "the results store's own file"),
        (["export", "1", "--json", "{store}-wal"], "the results store's own file"),
        (["export", "1", "--csv", "/no/such/folder/a.csv"], "does not exist"),
        (["export", "1", "--csv", "x.csv", "--raw"], "--raw goes with --touchstone"),
        (["close", "1"], "sweep 1 is complete, not abandoned"),
        (["list", "--since", "last week"], "is not an ISO 8601 time"),
        ([], "measuring needs --resource"),
    ],
)
def test_hostile_input_is_refused_in_one_line(demo, args, fragment):
    folder, url, _ = demo
    store_file = str(folder / "demo.db")
    result = acquire("sweep", *(a.replace("{store}", store_file) for a in args), "--store", url)
    one_line_error(result, fragment)
    assert (folder / "demo.db").stat().st_size > 0


def test_a_sweep_without_corrected_points_exports_raw_only_when_asked(tmp_path):
    url = f"sqlite:///{tmp_path / 'raw.db'}"
    with open_store(url) as store, store.begin_sweep(dut="bare coil") as writer:
        writer.add_points(np.array([1e3, 1e4]), np.array([5 + 2j, 5 + 20j]))
    out = tmp_path / "raw.s1p"
    one_line_error(acquire("sweep", "export", "1", "--touchstone", str(out), "--store", url),
                   "no corrected points")  # fmt: skip
    assert not out.exists()
    assert (
        acquire(
            "sweep", "export", "1", "--touchstone", str(out), "--raw", "--store", url
        ).returncode
        == 0
    )
    assert "! raw readings" in out.read_text(encoding="ascii")


def _list_row(url: str, sweep: int) -> str:
    out = acquire("sweep", "list", "--store", url).stdout
    return next(x for x in out.splitlines() if x.strip("│ ").startswith(f"{sweep} "))


def test_a_writer_killed_mid_sweep_is_listed_interrupted_and_closed(tmp_path):
    url = f"sqlite:///{tmp_path / 'killed.db'}"
    with running(dut="demo-coil", fixture="bench-leads", seed=5, measure_time=0.005) as sim:
        env = {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}
        proc = subprocess.Popen(
            [sys.executable, "-m", "acquire", "sweep", "--resource", sim.resource, "--store", url,
             "--points", "401", "--no-live"],
            stdout=subprocess.PIPE, stderr=subprocess.PIPE, text=True, cwd=ROOT, env=env,
        )  # fmt: skip
        first = proc.stdout.readline()
        assert first.startswith("sweep: 401 points"), first + proc.stderr.read()
        time.sleep(0.8)
        proc.send_signal(signal.SIGKILL)
        proc.communicate(timeout=30)
    assert proc.returncode == -signal.SIGKILL
    with open_store(url) as store:  # opening marks a sweep of a dead process on this host
        after = store.sweep_info(1)
        assert len(store.sweep_points(1)) == after.points
    assert after.recorded_status == "interrupted" and 0 < after.points < 401
    assert "abandoned" not in _list_row(url, 1) and "interrupted" in _list_row(url, 1)
    assert "abandoned" not in acquire("sweep", "list", "--status", "running", "--store", url).stdout
    assert "no abandoned sweeps" in acquire("sweep", "close", "--store", url).stdout


def test_a_running_row_whose_writer_is_gone_is_interrupted_and_one_alive_is_left(tmp_path):
    url = f"sqlite:///{tmp_path / 'rows.db'}"
    silent = datetime.now(UTC) - timedelta(hours=2)
    with open_store(url) as store:
        gone = store.begin_sweep(dut="left behind")
        gone.add_points(np.array([1e3]), np.array([5 + 2j]))
        alive = store.begin_sweep(dut="still measuring")  # this test process is its writer
        with store.engine.begin() as conn:  # a writer on another host, silent for two hours
            sweeps = TABLES["sweeps"]
            conn.execute(update(sweeps).where(sweeps.c.id == gone.id)
                         .values(writer_host="another-host", last_write_at=silent))  # fmt: skip
        assert "interrupted (abandoned" in _list_row(url, gone.id)
        assert _list_row(url, alive.id).rstrip(" │").endswith("running")
        one_line_error(acquire("sweep", "close", str(alive.id), "--store", url), "still running")
        result = acquire("sweep", "close", "--store", url)
        assert result.returncode == 0 and f"closed sweep {gone.id} as" in result.stdout
        assert store.sweep_info(gone.id).recorded_status == "interrupted"
        assert store.sweep_info(alive.id).recorded_status == "running"
        alive.finish("complete")
