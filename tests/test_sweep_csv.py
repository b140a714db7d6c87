"""CSV output of a sweep: the header names columns and units, numbers read back exactly."""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
import pytest

from acquire.csvout import header, write_rows, write_sweep_csv
from acquire.errors import InputError


def _sweep():
    f = np.array([100.0, 1e3, 1e4, 1e5])
    w = 2 * np.pi * f
    corrected = 4.8 + 1j * w * 340e-6
    raw = corrected + 0.05 + 1j * w * 1.5e-6
    raw[2] = complex(np.inf, np.inf)
    return f, raw, corrected


def test_header_names_every_column_with_its_unit():
    assert header(True, ["Ls", "Rs", "Q", "theta"]) == [
        "frequency [Hz]",
        "raw R [ohm]",
        "raw X [ohm]",
        "corrected R [ohm]",
        "corrected X [ohm]",
        "Ls [H]",
        "Rs [ohm]",
        "Q [1]",
        "theta [deg]",
    ]
    assert header(False, ["Cp"]) == ["frequency [Hz]", "raw R [ohm]", "raw X [ohm]", "Cp [F]"]
    with pytest.raises(InputError, match="unknown quantity"):
        header(True, ["L"])


def test_written_file_reads_back_exactly_with_pandas(tmp_path):
    f, raw, corrected = _sweep()
    path = write_sweep_csv(tmp_path / "sweep.csv", f, raw, corrected)
    table = pd.read_csv(path)
    assert list(table.columns) == header(True, ["Ls", "Rs", "Q"])
    assert np.array_equal(table["frequency [Hz]"].to_numpy(), f)
    assert np.array_equal(table["corrected X [ohm]"].to_numpy(), corrected.imag)
    assert np.isinf(table["raw R [ohm]"][2])
    # Ls = X / (2 pi f) and Q = X / R for a series R-L (textbook definitions).
    w = 2 * np.pi * f
    assert np.allclose(table["Ls [H]"], corrected.imag / w, rtol=1e-15)
    assert np.allclose(table["Q [1]"], corrected.imag / corrected.real, rtol=1e-15)
    assert np.allclose(table["Ls [H]"], 340e-6, rtol=1e-12)


def test_raw_only_sweep_has_no_corrected_columns():
    f, raw, _ = _sweep()
    out = io.StringIO()
    assert write_rows(out, f, raw, None, ["Ls"]) == 4
    lines = out.getvalue().splitlines()
    assert lines[0] == "frequency [Hz],raw R [ohm],raw X [ohm],Ls [H]"
    assert len(lines) == 5
    assert lines[1].split(",")[0] == "100"


def test_mismatched_arrays_and_missing_folder_are_refused(tmp_path):
    f, raw, corrected = _sweep()
    with pytest.raises(InputError, match="same length"):
        write_rows(io.StringIO(), f, raw[:2], corrected)
    with pytest.raises(InputError, match="does not exist"):
        write_sweep_csv(tmp_path / "no" / "x.csv", f, raw, corrected)


def test_comment_lines_name_the_sweep_and_pandas_skips_them(tmp_path):
    f, raw, corrected = _sweep()
    about = {
        "dut": "coil 7",
        "meter": "Example Works, model 1, serial 9, firmware 2",
        "fixture": "bench clips",
        "reference set": "#3 on bench clips (open-short-load, 31 points)",
        "time": "2031-05-04T12:00:00+00:00",
        "status": "complete",
        "reference override": "open re-taken\nafter lunch",  # a line break stays on one line
    }
    path = write_sweep_csv(tmp_path / "named.csv", f, raw, corrected, ("Ls", "Q"), about)
    lines = path.read_text(encoding="utf-8").splitlines()
    assert lines[:7] == [
        "# dut: coil 7",
        "# meter: Example Works, model 1, serial 9, firmware 2",
        "# fixture: bench clips",
        "# reference set: #3 on bench clips (open-short-load, 31 points)",
        "# time: 2031-05-04T12:00:00+00:00",
        "# status: complete",
        "# reference override: open re-taken after lunch",
    ]
    table = pd.read_csv(path, comment="#")
    assert list(table.columns) == [
        "frequency [Hz]", "raw R [ohm]", "raw X [ohm]", "corrected R [ohm]", "corrected X [ohm]",
        "Ls [H]", "Q [1]",
    ]  # fmt: skip
    assert len(table) == 4
    assert np.array_equal(table["frequency [Hz]"].to_numpy(), f)
    # The corrected coil is 340 uH in series with 4.8 ohm (as made in _sweep): Ls = 340 uH and
    # Q = wL/R at 1 kHz = 2 pi 1e3 340e-6 / 4.8 = 0.44506 (computed by hand).
    assert np.allclose(table["Ls [H]"], 340e-6, rtol=1e-12)
    assert table["Q [1]"][1] == pytest.approx(0.44506, rel=1e-4)
