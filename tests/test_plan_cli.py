"""`acquire plan check` and `acquire plan example`, run as a user runs them: the installed
`acquire` program in a subprocess, its output, its one-line errors and its exit codes.

Expected values are computed by hand from the plans written here (SI Brochure, 9th edition,
Table 7, for the prefixes); the exit code 2 for a user's error is the command line's rule
(DEVELOPERS.md, "Conventions").
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tomllib
import zipfile
from pathlib import Path

import pytest

ROOT = Path(__file__).resolve().parents[1]
#: The console script installed beside this interpreter (pyproject's [project.scripts]).
ACQUIRE = Path(sys.executable).with_name("acquire")

PLAN = """\
[plan]
name = "[bold red]Choke[/] <b>x</b>"
version = "7"

[serial]
pattern = "[A-Z]{2}[0-9]{4}"

[[step]]
frequency = "10kHz"
[[step.check]]
quantity = "Ls"
nominal = "2.2mH"
tolerance = "10%"

[[bin]]
name = "[/]"
[[bin.check]]
quantity = "Ls"
frequency = "10kHz"
nominal = "2.2mH"
tolerance = "5%"

[bins]
otherwise = "[green]wide[/green]"
"""


def acquire(*args: str, cwd: Path = ROOT) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}
    env["COLUMNS"] = "60"  # a narrow terminal must not wrap or reflow the plain lines
    return subprocess.run(
        [str(ACQUIRE), *args], capture_output=True, text=True, timeout=60, cwd=cwd, env=env
    )


def test_the_installed_program_exists():
    assert ACQUIRE.exists(), f"install the project first (pip install -e .): {ACQUIRE}"


def test_plan_check_prints_the_steps_and_names_literally(tmp_path):
    path = tmp_path / "choke.toml"
    path.write_text(PLAN, encoding="utf-8")
    done = acquire("plan", "check", str(path))
    assert done.returncode == 0, done.stderr
    assert done.stderr == ""
    out = done.stdout
    assert "[bold red]Choke[/] <b>x</b> v7" in out  # as written, never read as markup
    assert 'bin 1 "[/]"' in out and '"[green]wide[/green]"' in out
    # 2.2 mH ± 10 % is 1.98 mH to 2.42 mH (by hand; m = 1e-3).
    assert "Ls at 10.00 kHz: 2.200 mH ± 10 % (from 1.980 mH to 2.420 mH)" in out
    assert "one list sweep of 1 frequency: 10.00 kHz" in out
    assert "[A-Z]{2}[0-9]{4}" in out
    assert "DC resistance" not in out  # no Rdc check, no DC step
    assert out.rstrip().splitlines()[-1] == "plan is valid: 1 check at 1 frequency, 1 bin"
    assert len(out.splitlines()) > 8


def test_plan_check_json_gives_the_plan_in_si_units(tmp_path):
    path = tmp_path / "choke.toml"
    path.write_text(PLAN, encoding="utf-8")
    done = acquire("plan", "check", str(path), "--json")
    assert done.returncode == 0, done.stderr
    data = json.loads(done.stdout)
    assert data["name"] == "[bold red]Choke[/] <b>x</b>"
    (check,) = data["checks"]
    assert check["key"] == "Ls@10000" and check["unit"] == "H"
    assert check["low"] == pytest.approx(1.98e-3) and check["high"] == pytest.approx(2.42e-3)
    assert data["frequencies"] == [10000.0]
    assert data["bins"][0]["name"] == "[/]" and data["otherwise_bin"] == "[green]wide[/green]"
    assert data["decision"] == {"guarded": True, "guard_factor": 1.0, "binary": True}
    assert any("list sweep" in line for line in data["steps"])


def test_the_example_plan_checks_and_prints_what_the_station_does():
    done = acquire("plan", "check", "acquire/examples/coil-plan.toml")
    assert done.returncode == 0, done.stderr
    out = done.stdout
    assert "one list sweep of 3 frequencies: 1.000 kHz, 10.00 kHz, 100.0 kHz" in out
    assert "Rdc: 4.950 Ω ± 6 %" in out and "corrected to 20 °C" in out
    assert 'bin 1 "1%"' in out and 'bin 2 "2%"' in out and '"3%"' in out
    assert "ILAC-G8" in out and "EXAMPLE-[0-9]{4}" in out


@pytest.mark.parametrize(
    ("change", "fragment"),
    [
        (('tolerance = "10%"', 'tolerance = "10ohm"'), "step[1].check[1].tolerance: '10ohm'"),
        (('nominal = "2.2mH"', "nominal = nan"), "step[1].check[1].nominal: nan is not a finite"),
        (("[serial]", "[serial]\nunknown = 1"), "serial.unknown: unknown key 'unknown'"),
        (('version = "7"', 'version = "7'), "line 3: "),
    ],
)
def test_a_malformed_plan_is_one_line_and_exit_code_2(tmp_path, change, fragment):
    path = tmp_path / "bad.toml"
    path.write_text(PLAN.replace(*change, 1), encoding="utf-8")
    done = acquire("plan", "check", str(path))
    assert done.returncode == 2
    assert done.stdout == ""
    lines = done.stderr.strip().splitlines()
    assert len(lines) == 1, done.stderr
    assert lines[0].startswith(f"acquire plan: error: {path}: ")
    assert fragment in lines[0]
    assert "Traceback" not in done.stderr


def test_a_missing_plan_file_is_one_line_and_exit_code_2(tmp_path):
    done = acquire("plan", "check", str(tmp_path / "none.toml"))
    assert done.returncode == 2 and "no such file" in done.stderr
    assert len(done.stderr.strip().splitlines()) == 1


def test_plan_example_prints_the_example_file(tmp_path):
    done = acquire("plan", "example", cwd=tmp_path)
    assert done.returncode == 0, done.stderr
    example = ROOT / "acquire" / "examples" / "coil-plan.toml"
    assert done.stdout == example.read_text(encoding="utf-8")
    assert tomllib.loads(done.stdout)["plan"]["name"]
    copy = tmp_path / "mine.toml"
    copy.write_text(done.stdout, encoding="utf-8")
    assert acquire("plan", "check", str(copy), cwd=tmp_path).returncode == 0


def test_help_lists_plan_and_explains_its_terms():
    done = acquire("--help")
    assert "plan" in done.stdout
    done = acquire("plan", "--help")
    assert done.returncode == 0
    assert "ILAC-G8:09/2019" in done.stdout and "guard band" in done.stdout


def test_the_example_plan_ships_in_a_wheel_and_is_found_from_it(tmp_path):
    # A non-editable install: build the wheel, unpack it into a folder of its own, and ask
    # that copy where its example plan is (importlib.resources, not the source tree).
    built = subprocess.run(
        [sys.executable, "-m", "pip", "wheel", "-q", "--no-deps", "-w", str(tmp_path), str(ROOT)],
        capture_output=True, text=True, timeout=300,
    )  # fmt: skip
    assert built.returncode == 0, built.stderr
    (wheel,) = tmp_path.glob("coil_acquire-*.whl")
    names = zipfile.ZipFile(wheel).namelist()
    assert {"acquire/examples/coil-plan.toml", "acquire/examples/README.md"} <= set(names)
    target = tmp_path / "installed"
    zipfile.ZipFile(wheel).extractall(target)
    probe = (
        "from acquire.production.plan_file import example_plan_path, load_plan\n"
        "p = example_plan_path(); print(p); print(len(load_plan(p).checks))\n"
    )
    env = {**os.environ, "PYTHONPATH": str(target)}
    done = subprocess.run(
        [sys.executable, "-c", probe], capture_output=True, text=True, cwd=tmp_path, env=env,
        timeout=60,
    )  # fmt: skip
    assert done.returncode == 0, done.stderr
    path, count = done.stdout.split()
    assert Path(path).is_relative_to(target)
    assert int(count) >= 8
