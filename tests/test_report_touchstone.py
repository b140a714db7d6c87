"""One-port Touchstone files, read back with scikit-rf (an independent reader of the format).

Sources: the Touchstone File Format Specification (IBIS Open Forum, version 1.1; version 2.0
keeps it for files without a [Version] keyword) for the "!" comments, the "# HZ S RI R 50"
option line and the "frequency Re(S11) Im(S11)" data lines; the reflection coefficient of a
load on a real reference, S11 = (Z - Z0)/(Z + Z0), and its inverse Z = Z0 (1 + S11)/(1 - S11),
as in Pozar, Microwave Engineering (4th ed., 2012), section 2.3, and scikit-rf's z2s / s2z.
"""

from __future__ import annotations

import os
import subprocess
import sys
from pathlib import Path

import numpy as np
import pytest
import skrf

from acquire.demo import SWEEP_STEPS, run_demo
from acquire.errors import InputError
from acquire.report.touchstone import DIGITS, s1p_text, s11_from_z, write_s1p
from acquire.store import open_store

ROOT = Path(__file__).resolve().parents[1]
Z0 = 50.0


def acquire(*args: str) -> subprocess.CompletedProcess:
    env = {k: v for k, v in os.environ.items() if not k.startswith("ACQUIRE_")}
    return subprocess.run(
        [sys.executable, "-m", "acquire", *args],
        capture_output=True, text=True, timeout=120, cwd=ROOT, env=env,
    )  # fmt: skip


def printed_tolerance(s: np.ndarray) -> np.ndarray:
    """How far Z read from the file may be from Z written: each of Re and Im of S11 printed to
    DIGITS significant digits is off by at most half a unit in its last digit (5e-12 of its
    size), and dZ/dS11 = 2 Z0 / (1 - S11)^2 carries that into Z (first order; computed)."""
    ds = 0.5 * 10.0 ** (1 - DIGITS) * (np.abs(s.real) + np.abs(s.imag))
    return 1.01 * 2 * Z0 * ds / np.abs(1 - s) ** 2


def coil(f: np.ndarray) -> np.ndarray:
    """Our invented coil: 340 uH with 4.8 ohm in series, 12 pF across (self-resonance near
    2.5 MHz), so |Z| runs from ohms to near a megohm."""
    w = 2 * np.pi * f
    series = 4.8 + 1j * w * 340e-6
    return 1 / (1 / series + 1j * w * 12e-12)


def test_reflection_coefficient_matches_the_definition_and_scikit_rf():
    z = np.array([Z0, 0.0, 100.0, 25.0 + 25.0j, 1e9])
    s = s11_from_z(z)
    # (Z - Z0)/(Z + Z0): a matched load reflects nothing, a short -1, 100 ohm on 50 gives 1/3,
    # 25 + j25 gives (-25 + j25)/(75 + j25) = -0.2 + 0.4j (worked by hand).
    assert s[0] == 0 and s[1] == -1 and s[2] == pytest.approx(1 / 3, rel=1e-15)
    assert s[3] == pytest.approx(-0.2 + 0.4j, rel=1e-15)
    assert np.allclose(s, skrf.network.z2s(z.reshape(-1, 1, 1), z0=Z0)[:, 0, 0], rtol=1e-14)


def test_a_written_file_reads_back_in_scikit_rf_to_its_printed_precision(tmp_path):
    f = np.geomspace(100.0, 10e6, 61)
    z = coil(f)
    path = write_s1p(tmp_path / "coil.s1p", f, z, comment_lines=["dut: coil 7", "status: complete"])
    net = skrf.Network(str(path))
    assert net.nports == 1 and np.allclose(net.z0, Z0)
    assert np.allclose(net.f, f, rtol=1e-11, atol=0)
    back = net.z[:, 0, 0]
    assert np.all(np.abs(back - z) <= printed_tolerance(s11_from_z(z)) + 1e-13 * np.abs(z))
    # A coarser file is not close enough: the check can fail.
    coarse = np.round(s11_from_z(z), 6)
    assert np.any(np.abs(Z0 * (1 + coarse) / (1 - coarse) - z) > printed_tolerance(coarse))
    assert "dut: coil 7" in net.comments


def test_the_file_has_comments_then_one_option_line_then_a_line_per_frequency():
    text = s1p_text(
        np.array([1e3, 2e3]),
        np.array([50.0, 0.0]),
        comment_lines=["dut: spule µ-7\nsecond line"],
    )
    lines = text.splitlines()
    assert lines[0] == "! dut: spule \\xb5-7 second line"  # ASCII only, one line
    assert lines[1] == "# HZ S RI R 50"
    assert lines[2].split() == ["1.00000000000e+03", "0.00000000000e+00", "0.00000000000e+00"]
    assert lines[3].split() == ["2.00000000000e+03", "-1.00000000000e+00", "0.00000000000e+00"]
    assert text.isascii() and len(lines) == 4


@pytest.mark.parametrize(
    "f, z, fragment",
    [
        ([], [], "at least one point"),
        ([1e3, 2e3], [1.0], "2 frequencies but 1"),
        ([2e3, 1e3], [1.0, 2.0], "increasing"),
        ([0.0, 1e3], [1.0, 2.0], "increasing"),
        ([1e3, 2e3], [1.0, complex(np.nan, 0)], "finite values only"),
        ([1e3, 2e3], [1.0, complex(np.inf, 0)], "finite values only"),
    ],
)
def test_what_a_touchstone_file_cannot_hold_is_refused(f, z, fragment):
    with pytest.raises(InputError, match=fragment):
        s1p_text(np.array(f, dtype=float), np.array(z, dtype=complex))


@pytest.fixture(scope="module")
def demo_store(tmp_path_factory):
    folder = tmp_path_factory.mktemp("touchstone")
    url = f"sqlite:///{folder / 'demo.db'}"
    run_demo(url, live=False, points=101, measure_time=0, steps=SWEEP_STEPS)
    return folder, url


def test_an_exported_sweep_gives_the_stored_corrected_impedance_at_every_frequency(demo_store):
    folder, url = demo_store
    out = folder / "sweep1.s1p"
    result = acquire("sweep", "export", "1", "--touchstone", str(out), "--store", url)
    assert result.returncode == 0, result.stderr
    with open_store(url) as store:
        points = store.sweep_points(1)
    f = points["frequency"].to_numpy()
    z = points["corrected_r"].to_numpy() + 1j * points["corrected_x"].to_numpy()
    assert np.all(np.isfinite(z)) and f.size == 101
    net = skrf.Network(str(out))
    assert np.allclose(net.f, f, rtol=1e-11, atol=0)
    back = net.z[:, 0, 0]
    assert np.all(np.abs(back - z) <= printed_tolerance(s11_from_z(z)) + 1e-13 * np.abs(z))
    text = out.read_text(encoding="ascii")
    assert "! dut: demo-coil" in text and "! corrected with reference set #1" in text


def test_raw_readings_only_when_asked_and_said_so(demo_store):
    folder, url = demo_store
    out = folder / "raw.s1p"
    result = acquire("sweep", "export", "1", "--touchstone", str(out), "--raw", "--store", url)
    assert result.returncode == 0, result.stderr
    with open_store(url) as store:
        points = store.sweep_points(1)
    raw = points["raw_r"].to_numpy() + 1j * points["raw_x"].to_numpy()
    back = skrf.Network(str(out)).z[:, 0, 0]
    assert np.all(np.abs(back - raw) <= printed_tolerance(s11_from_z(raw)) + 1e-13 * np.abs(raw))
    assert "! raw readings: not corrected" in out.read_text(encoding="ascii")
