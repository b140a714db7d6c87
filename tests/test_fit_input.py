"""CSV input to the fit with units in bracketed headers, and `acquire fit --json`.

Check values are computed by hand here: 1 kHz = 1000 Hz, 500 mΩ = 0.5 Ω, 2 kΩ = 2000 Ω,
10 µH at 1 kHz is 2π·1000·1e-5 = 0.0628319 Ω of reactance, and |Z| = 2 Ω at 30° is
R = 2·cos 30° = 1.7320508 Ω, X = 2·sin 30° = 1 Ω (SI prefixes: BIPM, The International System
of Units, 9th ed., 2019, table 7).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from acquire.cli import main
from acquire.coil.sweepfile import read_csv_sweep
from acquire.errors import InputError


def write(tmp_path, text):
    path = tmp_path / "sweep.csv"
    path.write_text(text, encoding="utf-8")
    return path


def test_prefixed_units_are_honoured(tmp_path):
    src = read_csv_sweep(write(tmp_path, "frequency [kHz],R [mohm],X [kΩ]\n1,500,2\n2.5,250,0.5\n"))
    assert src.frequency.tolist() == [1000.0, 2500.0]
    assert src.impedance.real.tolist() == pytest.approx([0.5, 0.25])
    assert src.impedance.imag.tolist() == pytest.approx([2000.0, 500.0])


def test_inductance_and_polar_columns(tmp_path):
    src = read_csv_sweep(write(tmp_path, "f [Hz],Rs [ohm],Ls [uH]\n1000,0.1,10\n"))
    assert src.impedance[0] == pytest.approx(0.1 + 0.0628319j, rel=1e-6)
    src = read_csv_sweep(write(tmp_path, "frequency [MHz],Z [ohm],theta [deg]\n1,2,30\n"))
    assert src.frequency[0] == 1e6
    assert src.impedance[0] == pytest.approx(1.7320508 + 1j, rel=1e-7)
    src = read_csv_sweep(write(tmp_path, "frequency,Z,theta [rad]\n1,2,0.5235988\n"))
    assert src.impedance[0] == pytest.approx(1.7320508 + 1j, rel=1e-6)


def test_headers_without_units_are_si(tmp_path):
    src = read_csv_sweep(write(tmp_path, "frequency,R,X\n100,1,2\n"))
    assert src.frequency[0] == 100.0 and src.impedance[0] == 1 + 2j


@pytest.mark.parametrize(
    ("header", "column"),
    [
        ("frequency [furlong],R,X", "frequency [furlong]"),
        ("frequency [Hz],R [V],X", "R [V]"),
        ("frequency [Hz],R,X [kHz]", "X [kHz]"),
        ("frequency,Rs,Ls [ohm]", "Ls [ohm]"),
    ],
)
def test_a_unit_that_does_not_fit_refuses_the_file(tmp_path, header, column):
    with pytest.raises(InputError, match=f"column '{column.replace('[', '.').replace(']', '.')}'"):
        read_csv_sweep(write(tmp_path, header + "\n1,1,1\n"))


def _coil_csv(tmp_path):
    # L = 100 uH, R = 1 ohm, C = 10 pF (demo data): the parallel circuit, computed here.
    f = np.geomspace(1e3, 10e6, 60)
    w = 2 * math.pi * f
    z = 1 / (1 / (1 + 1j * w * 100e-6) + 1j * w * 10e-12)
    rng = np.random.default_rng(3)
    z = z * (1 + 1e-4 * (rng.standard_normal(f.size) + 1j * rng.standard_normal(f.size)))
    lines = ["frequency [kHz],R [mohm],X [mohm]"]
    lines += [
        f"{a / 1e3:.12g},{b.real * 1e3:.12g},{b.imag * 1e3:.12g}" for a, b in zip(f, z, strict=True)
    ]
    return write(tmp_path, "\n".join(lines) + "\n")


def test_fit_json_has_the_shared_format(tmp_path, capsys):
    assert main(["fit", str(_coil_csv(tmp_path)), "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["command"] == "fit"
    keys = {"name", "label", "value", "unit", "relative_accuracy", "lower_bound", "method"}
    by_name = {q["name"]: q for q in doc["quantities"]}
    for q in doc["quantities"]:
        assert set(q) == keys | {"standard_uncertainty"}
        if q["value"] is not None and q["standard_uncertainty"] is not None:
            assert q["relative_accuracy"] == pytest.approx(
                q["standard_uncertainty"] / abs(q["value"])
            )
    assert by_name["L"]["value"] == pytest.approx(100e-6, rel=1e-3)
    assert by_name["L"]["unit"] == "H"
    assert by_name["Cp"]["value"] == pytest.approx(10e-12, rel=1e-2)
    assert by_name["Rdc"]["value"] == pytest.approx(1.0, rel=2e-2)


def test_a_self_resonance_above_the_sweep_is_given_as_a_lower_bound(capsys, tmp_path):
    # L = 100 uH, C = 10 pF resonate near 5.03 MHz (1/(2 pi sqrt(LC)), computed); a sweep that
    # stops at 1 MHz shows only that the resonance lies above its top frequency.
    f = np.geomspace(1e3, 1e6, 60)
    w = 2 * math.pi * f
    z = 1 / (1 / (1 + 1j * w * 100e-6) + 1j * w * 10e-12)
    rows = ["frequency [Hz],R [ohm],X [ohm]"]
    rows += [f"{a:.12g},{b.real:.12g},{b.imag:.12g}" for a, b in zip(f, z, strict=True)]
    assert main(["fit", str(write(tmp_path, "\n".join(rows) + "\n")), "--json"]) == 0
    srf = {q["name"]: q for q in json.loads(capsys.readouterr().out)["quantities"]}["SRF"]
    assert srf["value"] is None and srf["relative_accuracy"] is None
    assert srf["lower_bound"] == pytest.approx(1e6)
