"""An independent checker's attacks on the numbers the tool reads and writes.

Check values: SI prefixes milli = 1e-3 and mega = 1e6 (BIPM, The International System of Units,
9th ed., 2019, table 7; the symbol's case is part of it: m is milli, M is mega). The coil of the
round trip (L = 100 µH, R = 1 Ω, C = 10 pF, our own demo values) is computed here as
1/(1/(R + jωL) + jωC).
"""

from __future__ import annotations

import json
import math
import subprocess
import sys

import numpy as np
import pytest
from bench_support import FixedMeter

from acquire.coil.sweepfile import read_csv_sweep, unit_scale
from acquire.csvout import write_sweep_csv
from acquire.errors import InputError
from acquire.uncertainty import BEYOND_ACCURACY, point_flags
from acquire.units import parse_list, parse_quantity


@pytest.mark.parametrize("text", ["1mhz", "1MHZ", "1Mhz", "2.5 mhz"])
def test_a_frequency_whose_case_cannot_be_trusted_is_refused(text):
    # "mhz" was read as 1 mHz (millihertz) where MHz was almost surely meant: 1e12 apart.
    with pytest.raises(InputError, match="MHz for megahertz"):
        parse_quantity(text, "Hz")
    with pytest.raises(InputError, match="MHz for megahertz"):
        parse_quantity(text)
    with pytest.raises(InputError, match="MHz for megahertz"):
        parse_list(f"1k, {text.replace(' ', '')}", "Hz")


def test_si_cased_frequencies_keep_their_meaning():
    assert parse_quantity("1mHz", "Hz") == pytest.approx(1e-3)  # SI table 7: milli
    assert parse_quantity("1MHz", "Hz") == 1e6  # SI table 7: mega
    assert parse_quantity("1khz", "Hz") == 1e3  # no m/M, no doubt
    assert parse_quantity("1mohm", "ohm") == pytest.approx(1e-3)
    assert parse_quantity("1Mohm", "ohm") == 1e6


@pytest.mark.parametrize(("unit", "scale"), [("mHz", 1e-3), ("MHz", 1e6), ("Mohm", 1e6)])
def test_csv_headers_honour_the_case_of_the_prefix(unit, scale):
    base = "Hz" if unit.endswith("Hz") else "ohm"
    assert unit_scale(f"x [{unit}]", base) == pytest.approx(scale)


@pytest.mark.parametrize("unit", ["mhz", "Mhz", "MHZ"])
def test_csv_headers_whose_case_cannot_be_trusted_are_refused(unit):
    with pytest.raises(InputError, match="MHz"):
        unit_scale(f"frequency [{unit}]", "Hz")


def _coil():
    f = np.geomspace(1e3, 20e6, 60)
    w = 2 * math.pi * f
    z = 1 / (1 / (1.0 + 1j * w * 100e-6) + 1j * w * 10e-12)
    return f, z


def test_a_sweep_csv_with_flagged_points_reads_back_through_acquire_fit(tmp_path):
    """The CSV `acquire sweep` writes leaves a flagged quantity's cell empty but keeps the
    corrected R and X beside their U; `acquire fit FILE` (its own process) reads every point, so
    the self-resonance found from X is not lost. A file whose R or X cells are empty (edited by
    hand, say) is read too: those points are left out and the description says so."""
    f, z = _coil()
    u = 1e-4 * np.abs(z)
    rng = np.random.default_rng(11)
    z = z + u * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size))
    cov = np.zeros(f.shape + (2, 2))
    cov[:, 0, 0] = cov[:, 1, 1] = u**2
    cov[5:8, 0, 0] = (10.0 * np.abs(z[5:8].real)) ** 2  # R unknown there: flagged
    flags = point_flags(f, z, cov)
    assert list(flags[5:8]) == [BEYOND_ACCURACY] * 3
    path = write_sweep_csv(tmp_path / "s.csv", f, z * 1.01, z, about={"dut": "demo"}, cov=cov,
                           flags=flags)  # fmt: skip
    text = path.read_text(encoding="utf-8")
    assert ",," in text  # the flagged quantities' cells are empty
    src = read_csv_sweep(path)
    assert np.all(np.isfinite(src.impedance)) and src.impedance.size == f.size
    lines = text.splitlines()
    comments = [line for line in lines if line.startswith("#")]
    head, *rows = [line for line in lines if not line.startswith("#")]
    columns = head.split(",")
    r_col = columns.index("corrected R [ohm]")
    edited = tmp_path / "edited.csv"
    blanked = []
    for row in rows:
        cells = row.split(",")
        if cells[-1] != BEYOND_ACCURACY:
            blanked.append(row)
            continue
        cells[r_col] = ""
        blanked.append(",".join(cells))
    edited.write_text("\n".join([*comments, head, *blanked]) + "\n", encoding="utf-8")
    flagged = int(np.count_nonzero(flags == BEYOND_ACCURACY))  # 3, and R above the resonance
    src = read_csv_sweep(edited)
    assert np.count_nonzero(~np.isfinite(src.impedance)) == flagged
    assert f"{flagged} with an empty cell" in src.description
    done = subprocess.run(
        [sys.executable, "-m", "acquire", "fit", str(path), "--json"],
        capture_output=True,
        text=True,
        timeout=120,
    )
    assert done.returncode == 0, done.stderr
    by_name = {q["name"]: q for q in json.loads(done.stdout)["quantities"]}
    assert by_name["L"]["value"] == pytest.approx(100e-6, rel=2e-3)
    assert by_name["Cp"]["value"] == pytest.approx(10e-12, rel=2e-2)


def test_without_a_stated_accuracy_a_reading_without_type_a_leaves_u_unknown():
    """No stated accuracy, the standards read 3 times, the DUT once: the DUT's own scatter is
    not known, so U is not known either (it was the standards' scatter alone, 50x too small
    here, computed: 2·0.001 Ω against a DUT whose readings could be off by anything)."""
    from acquire.compensation import ReferenceSet
    from acquire.plan import list_plan
    from acquire.sweep import run_sweep

    grid = np.array([1e3, 1e5])
    refs = ReferenceSet(
        frequency=grid,
        open=np.array([-1e7j, -1e5j]),
        short=np.array([0.05 + 0.01j, 0.05 + 1j]),
        open_u=np.full(2, 1.0),
        short_u=np.full(2, 0.001),
        repeats=3,
    )
    plan = list_plan("1kHz, 10kHz")
    once = run_sweep(FixedMeter(2 + 200j, None, name="bare"), plan, refs)
    assert np.isnan(once.uncertainty).all()
    # the DUT read three times (its scatter is zero here): every reading has a Type A now
    thrice = run_sweep(FixedMeter(2 + 200j, None, name="bare"), plan, refs, repeats=3)
    assert np.all(np.isfinite(thrice.uncertainty))
    # the DUT read three times but the standards once: the standards' scatter is not known
    bare = ReferenceSet(frequency=grid, open=refs.open, short=refs.short)
    assert np.isnan(
        run_sweep(FixedMeter(2 + 200j, None, name="bare"), plan, bare, repeats=3).uncertainty
    ).all()


def _through(abcd, zx):
    """What a meter reads through a two-port with chain parameters ``abcd`` (computed)."""
    a, b, c, d = abcd
    with np.errstate(all="ignore"):
        return (a * zx + b) / (c * zx + d)


@pytest.mark.parametrize("layout", ["cable", "stray first", "stray last"])
def test_open_short_states_its_model_error_for_any_reciprocal_fixture(layout):
    """Open-short is exact only when the fixture's stray sits after its series part. Through a
    1 m, 50 Ω cable (velocity factor 0.66; lossless line: A = D = cos βl, B = jZ0·sin βl,
    C = j·sin βl/Z0, from memory of the telegrapher's solution) or leads whose stray capacitance
    sits before their inductance, it was off by up to 10 % at 10 MHz with U = 0 (no meter error
    here at all); the stated U must cover that model error."""
    from acquire.uncertainty import correct_with_uncertainty

    f = np.geomspace(1e3, 10e6, 25)
    w = 2 * math.pi * f
    if layout == "cable":
        bl = w * 1.0 / (0.66 * 299792458.0)
        abcd = (np.cos(bl), 1j * 50 * np.sin(bl), 1j * np.sin(bl) / 50, np.cos(bl))
    else:
        z, y = 0.02 + 1j * w * 0.3e-6, 1j * w * 8e-12
        one = np.ones_like(f)
        first = (one, z, y, 1 + y * z)  # [[1, 0], [Y, 1]]·[[1, Z], [0, 1]]
        last = (1 + z * y, z, y, one)  # [[1, Z], [0, 1]]·[[1, 0], [Y, 1]]
        abcd = first if layout == "stray first" else last
    zx = 1.0 + 1j * w * 10e-6  # a 10 µH coil with 1 Ω (demo values)
    refs = type("Refs", (), {})()
    refs.frequency, refs.repeats = f, 1
    refs.open, refs.short = abcd[0] / abcd[2], _through(abcd, 0 * f)  # Zo = A/C
    refs.load, refs.load_true = None, None
    refs.at = lambda grid: refs
    pts = correct_with_uncertainty(f, _through(abcd, zx), None, refs, None)
    err = pts.z - zx
    if layout == "stray last":
        assert np.allclose(err, 0, atol=1e-9 * np.abs(zx))
    else:
        assert np.max(np.abs(err) / np.abs(zx)) > 1e-3  # a real model error, not rounding
    assert np.all(np.abs(err.real) <= pts.expanded[:, 0] + 1e-12)
    assert np.all(np.abs(err.imag) <= pts.expanded[:, 1] + 1e-12)
