"""Bias sweeps and temperature-rise runs as CSV files and pictures, and the stored-run actions of
``acquire bias-sweep`` / ``acquire temperature-rise``.

The files are read back by pandas (an independent CSV reader) with its default float parser,
and the pictures decoded by Pillow; the figures' data are checked on their artists, not pixels.
The chokes are our own invention (tests/bias_support.py).
"""

from __future__ import annotations

import argparse
import csv
import io
import re

import numpy as np
import pandas as pd
import pytest
from bias_support import HOSTILE, bias_result, expected_drop, rise_result
from PIL import Image

from acquire.bias.saturation import interpolation_bound
from acquire.commands.bias_store import add_actions, add_rise_actions, run_action
from acquire.commands.options import add_store
from acquire.errors import InputError
from acquire.report import bias_export, bias_pictures
from acquire.store import open_store

UNIT = re.compile(r"^[A-Za-z][A-Za-z ]* \[(A|H|ohm|1|s|K)\]$")


def _read(text: str) -> pd.DataFrame:
    return pd.read_csv(io.StringIO(text), comment="#")


def _head(text: str) -> dict[str, str]:
    lines = [line for line in text.splitlines() if line.startswith("# ")]
    return dict(line[2:].split(": ", 1) for line in lines)


def _bias_text(result) -> str:
    out = io.StringIO()
    bias_export.write_bias_rows(out, result)
    return out.getvalue()


def test_a_bias_sweep_csv_reads_back_exactly_with_units_in_every_header():
    result = bias_result()
    text = _bias_text(result)
    table = _read(text)
    assert list(table.columns) == list(bias_export.BIAS_COLUMNS)
    assert all(UNIT.match(name) for name in table.columns), list(table.columns)
    c = result.curve
    want = {
        "setpoint [A]": c.setpoint, "applied [A]": c.applied, "Ls [H]": c.ls, "Rs [ohm]": c.rs,
        "Q [1]": c.q, "raw R [ohm]": c.raw.real, "raw X [ohm]": c.raw.imag,
        "corrected R [ohm]": c.corrected.real, "corrected X [ohm]": c.corrected.imag,
    }  # fmt: skip
    for name, values in want.items():
        assert np.array_equal(table[name].to_numpy(), values), name
    head = _head(text)
    assert head["frequency"] == "100000 Hz" and head["status"] == "complete"
    assert head["confirmed"] == "unattended" and head["reference set"] == "none (raw readings)"
    assert head["drop currents"].endswith("; 70 %: above 5.988 A")
    assert head["drop currents"].startswith("10 %: ")


def test_the_drop_currents_written_are_the_curves_own_within_the_interpolation_bound():
    """The invented curve L0/(1 + (I/I1)²) has its drop at I1·√(1/(1 − d) − 1) (computed); linear
    interpolation between steps h apart is off by at most h²/8·max|r''|/min|r'| (Burden and
    Faires, Numerical Analysis, theorem 3.3), evaluated by interpolation_bound."""
    result = bias_result()
    applied = result.curve.applied
    for d in result.drops[:3]:
        k = int(np.searchsorted(applied, d.current))
        bound = interpolation_bound(lambda i: 1 / (1 + (i / 4.0) ** 2), applied[k - 1], applied[k])
        assert abs(d.current - expected_drop(d.drop)) <= bound


def test_a_sweep_without_references_has_no_corrected_columns():
    table = _read(_bias_text(bias_result(corrected=False)))
    assert list(table.columns) == list(bias_export.BIAS_COLUMNS[:7])


def test_a_hostile_dut_name_cannot_break_the_file():
    text = _bias_text(bias_result(dut=HOSTILE))
    rows = list(csv.reader(io.StringIO(text)))
    body = [r for r in rows if not r[0].startswith("#")]
    assert len(body) == 14 and all(len(r) == 9 for r in body)
    assert text.count("\n# status: ") == 1  # the forged line stayed inside the DUT's line
    assert _head(text)["dut"] == " ".join(HOSTILE.split())
    assert np.array_equal(_read(text)["Ls [H]"].to_numpy(), bias_result().curve.ls)


def test_a_temperature_rise_csv_reads_back_exactly():
    result = rise_result(dut=HOSTILE)
    out = io.StringIO()
    assert bias_export.write_rise_rows(out, result) == 12
    table = _read(out.getvalue())
    assert list(table.columns) == ["time [s]", "resistance [ohm]", "rise [K]"]
    assert all(UNIT.match(name) for name in table.columns)
    assert np.array_equal(table["time [s]"].to_numpy(), result.times)
    assert np.array_equal(table["resistance [ohm]"].to_numpy(), result.resistance)
    assert np.array_equal(table["rise [K]"].to_numpy(), result.rise)
    head = _head(out.getvalue())
    assert head["settled"] == "yes" and head["current"] == "3.1000000000000001 A"
    tried = "3 A: 37.600000000000001 K; 3.1000000000000001 A: 39.899999999999999 K"
    assert head["currents tried"] == tried


def _png_size(data: bytes) -> tuple[int, int]:
    with Image.open(io.BytesIO(data)) as image:
        image.load()
        return image.size


def test_the_bias_picture_draws_the_curve_the_levels_and_the_currents():
    result = bias_result(dut=HOSTILE)
    assert _png_size(bias_pictures.bias_png(result)) == (800, 650)  # look.TALL at 100 dpi
    fig = bias_pictures.bias_figure(result)
    lines = {line.get_gid(): line for ax in fig.axes for line in ax.get_lines()}
    c = result.curve
    assert np.array_equal(lines["Ls"].get_xdata(), c.applied)
    assert np.array_equal(lines["Ls"].get_ydata(), c.ls)
    assert np.array_equal(lines["Q"].get_ydata(), c.q)
    for d in result.drops:
        level = c.ls[0] * (1 - d.drop)
        assert np.allclose(lines[f"drop:{d.drop:g}"].get_ydata(), level, rtol=0, atol=0)
        if d.reached:
            mark = lines[f"saturation:{d.drop:g}"]
            assert (mark.get_xdata()[0], mark.get_ydata()[0]) == (d.current, level)
    texts = [t.get_text() for ax in fig.axes for t in ax.texts]
    assert "\u221210 %" in texts and "\u221270 %" in texts
    assert any("not reached: \u221270 %: above 5.99 A" in t for t in texts)
    marked = {k for k in lines if k and k.startswith("saturation:")}
    assert marked == {"saturation:0.1", "saturation:0.2", "saturation:0.3"}
    assert fig.axes[0].get_ylabel() == "Ls [µH]"


def test_the_rise_picture_draws_the_rise_and_the_settled_value():
    result = rise_result()
    assert _png_size(bias_pictures.rise_png(result)) == (800, 450)  # look.WIDE at 100 dpi
    fig = bias_pictures.rise_figure(result)
    lines = {line.get_gid(): line for line in fig.axes[0].get_lines()}
    assert np.array_equal(lines["rise"].get_xdata(), result.times)
    assert np.array_equal(lines["rise"].get_ydata(), result.rise)
    assert set(lines["final"].get_ydata()) == {result.steps[-1][1]}  # the settled rise
    assert set(lines["target"].get_ydata()) == {40.0}


@pytest.fixture
def stored(tmp_path):
    url = f"sqlite:///{tmp_path / 'store.db'}"
    with open_store(url) as store:
        result = bias_result(dut=HOSTILE)
        writer = store.begin_bias_sweep(result.settings)
        c = result.curve
        for i in range(c.ls.size):
            writer.add_point(i, c.setpoint[i], c.applied[i], c.raw[i], c.corrected[i], c.ls[i],
                             c.rs[i], c.q[i])  # fmt: skip
        writer.finish("complete", result.drops)
        store.begin_rise_run(rise_result(dut=HOSTILE).settings).finish(rise_result(dut=HOSTILE))
    return url, tmp_path


def _run(adder, *argv: str) -> int:
    parser = argparse.ArgumentParser()
    add_store(parser)
    adder(parser)
    return run_action(parser.parse_args(list(argv)))


@pytest.mark.parametrize("adder", [add_actions, add_rise_actions])
def test_list_and_show_print_a_hostile_name_as_text(stored, adder, capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "300")
    url, _ = stored
    flat = " ".join(HOSTILE.split())
    assert _run(adder, "list", "--store", url) == 0
    listed = capsys.readouterr().out
    assert "[bold red]x[/]" in listed and "complete" in listed
    assert _run(adder, "show", "1", "--store", url) == 0
    shown = capsys.readouterr().out
    assert f"dut: {flat}" in shown
    assert ("above 5.988 A" if adder is add_actions else "settled: yes") in shown


@pytest.mark.parametrize("adder", [add_actions, add_rise_actions])
def test_export_writes_the_csv_and_the_picture_but_never_over_the_store(stored, adder):
    url, folder = stored
    assert _run(adder, "export", "1", "--csv", str(folder / "run.csv"), "--store", url) == 0
    table = pd.read_csv(folder / "run.csv", comment="#")
    first = "setpoint [A]" if adder is add_actions else "time [s]"
    assert table.columns[0] == first and len(table) in (12, 13)
    assert _run(adder, "export", "1", "--picture", str(folder / "run.png"), "--store", url) == 0
    assert _png_size((folder / "run.png").read_bytes())[0] == 800
    before = (folder / "store.db").read_bytes()
    with pytest.raises(InputError, match="results store's own file"):
        _run(adder, "export", "1", "--csv", str(folder / "store.db"), "--store", url)
    assert (folder / "store.db").read_bytes() == before
    with pytest.raises(InputError, match="not a .* id"):
        _run(adder, "export", "x1", "--csv", str(folder / "other.csv"), "--store", url)


def test_the_rated_current_is_the_lower_of_the_two_stored_currents(stored, capsys):
    # The rated current is the lower of the saturation and temperature-rise currents, naming the
    # one that limits it (IEC 62024-2's framing of the rated current; from memory).
    url, _ = stored
    sweep = bias_result(dut=HOSTILE)
    by_drop = {round(d.drop, 6): d for d in sweep.drops}
    heating = rise_result().current  # 3.1 A for a 40 K rise
    for drop, word in ((0.1, "10%"), (0.7, "70%")):
        asked = ("rated", "1", "--rise-run", "1", "--drop", word, "--store", url)
        assert _run(add_actions, *asked) == 0
        out = capsys.readouterr().out
        saturation = by_drop[drop].current
        if saturation is not None and saturation < heating:
            assert f"rated current: {saturation:.3g} A, limited by saturation" in out
        else:
            assert f"rated current: {heating:.3g} A, limited by temperature rise" in out
    # one case of each: 10 % is reached below 3.1 A; 70 % not within the sweep (above 3.1 A)
    assert by_drop[0.1].current < heating and by_drop[0.7].current is None
    assert by_drop[0.7].highest > heating
    with pytest.raises(InputError, match="no saturation current at a 25 % drop"):
        _run(add_actions, "rated", "1", "--rise-run", "1", "--drop", "25%", "--store", url)
    with open_store(url) as store:
        held = store.begin_rise_run(rise_result().settings)
        held.finish(rise_result(), status="interrupted", note="stopped")
    with pytest.raises(InputError, match="did not find the current for a rise"):
        _run(add_actions, "rated", "1", "--rise-run", "2", "--store", url)
