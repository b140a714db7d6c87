"""What a new user trips over on a bench day with the simulator, each through `acquire.cli.main`.

Check values here are the user's own input, expected back verbatim (the names an engineer
typed), or a terminal size (80 x 24, the classic VT100 screen: from memory).
"""

from __future__ import annotations

import os

import pytest
from bench_support import keyboard_putting_in

from acquire.cli import main
from drivers.simulator import running

#: Names an engineer may well type: brackets of a lot or revision, and colons.
FIXTURE = "bench[red]clips[/]"
SET_NAME = "set [b]A[/b] :thumbs_up:"
DUT = "proto[bold]7[/] rev:x:"


@pytest.fixture(autouse=True)
def _no_bench_environment(monkeypatch):
    for name in list(os.environ):
        if name.startswith("ACQUIRE_"):
            monkeypatch.delenv(name)
    monkeypatch.setenv("COLUMNS", "200")


def test_names_with_brackets_and_colons_are_printed_as_typed(tmp_path, monkeypatch, capsys):
    url = f"sqlite:///{tmp_path / 'bench.db'}"
    with running(dut="open", fixture="bench-leads", seed=4, measure_time=0) as sim:
        monkeypatch.setattr("builtins.input", keyboard_putting_in(sim))
        common = ["--resource", sim.resource, "--store", url]
        plan = ["--start", "1kHz", "--stop", "100kHz", "--points", "9"]
        code = main(["reference", "capture", *common, *plan, "--fixture", FIXTURE,
                     "--name", SET_NAME, "--repeats", "1"])  # fmt: skip
        out = capsys.readouterr().out
        assert code == 0
        assert f"on fixture {FIXTURE} over 9 points" in out
        assert f"saved reference set 1 ({SET_NAME!r}" in out
        assert out.rstrip().endswith("each standard read once")  # not "1 time(s)"

        for action in ("list", "show", "check"):
            args = ["reference", action, "--store", url] + ([] if action == "list" else ["1"])
            assert main(args) == 0
            out = capsys.readouterr().out
            assert FIXTURE in out if action != "check" else "no problems found" in out
            if action == "list":
                assert SET_NAME in out

        sim.insert("air-core-coil")
        csv_path = tmp_path / "a[1].csv"
        code = main(["sweep", *common, *plan, "--reference", "1", "--dut", DUT,
                     "--fixture", FIXTURE, "--no-live", "--csv", str(csv_path)])  # fmt: skip
        out = capsys.readouterr().out
        assert code == 0
        assert f"CSV written to {csv_path}" in out
        # the air-core coil resonates far above 100 kHz: said for the span measured
        none = "none between 1.000 kHz and 100.0 kHz"
        assert f"self-resonance: raw {none}, corrected {none}" in out

        assert main(["fit", "1", "--store", url]) == 0
        assert f"sweep 1 of {DUT} in" in capsys.readouterr().out


def test_demo_prints_a_store_path_with_brackets_as_typed(tmp_path, monkeypatch, capsys):
    monkeypatch.chdir(tmp_path)
    url = "sqlite:///lot [b]7 :x:.db"
    assert main(["demo", "--no-live", "--points", "21", "--store", url]) == 0
    out = capsys.readouterr().out
    assert f"Results go to {url}" in out
    assert f"look again with: acquire reference list --store {url}" in out
    assert (tmp_path / "lot [b]7 :x:.db").is_file()


def _screen_lines(text: str) -> list[str]:
    """The lines a terminal shows, with the escape sequences (colour, cursor moves) removed."""
    import re

    plain = re.sub(r"\x1b\[[0-9;?]*[A-Za-z]", "\n", text.replace("\r", "\n"))
    return plain.split("\n")


@pytest.mark.parametrize("size", [(80, 24), (120, 40)])
def test_the_live_view_fits_the_terminal_with_uncertainty_shown(size, monkeypatch, capsys):
    columns, lines = size
    monkeypatch.setenv("COLUMNS", str(columns))
    monkeypatch.setenv("LINES", str(lines))
    monkeypatch.setenv("TTY_COMPATIBLE", "1")  # rich: treat the captured output as a terminal
    monkeypatch.setenv("FORCE_COLOR", "1")
    with running(dut="demo-coil", fixture="bench-leads", seed=2, measure_time=0.02) as sim:
        code = main(["sweep", "--resource", sim.resource, "--store", "sqlite://",
                     "--points", "21", "--uncertainty", "--dut", "proto-7"])  # fmt: skip
    out = capsys.readouterr().out
    assert code == 0
    shown = _screen_lines(out)
    assert any(line.startswith("Sweep of proto-7") for line in shown)  # the live view was drawn
    # rich marks a view taller than the terminal by cutting it with a line "..."
    assert not [line for line in shown if line.strip() == "..."]
    # the progress line is one line: its end is not wrapped onto a line of its own
    assert not [line for line in shown if line.strip() in ("left", "s left")]


@pytest.mark.parametrize(
    "command", [["reference", "list"], ["reference", "check", "latest"], ["fit", "1"]]
)
def test_reading_from_a_store_that_is_not_there_says_so_and_makes_none(command, tmp_path, capsys):
    typo = tmp_path / "acquier.db"
    assert main([*command, "--store", f"sqlite:///{typo}"]) == 2
    err = capsys.readouterr().err
    assert f"there is no results store at {typo}" in err
    assert not typo.exists()
