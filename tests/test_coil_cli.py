"""`acquire predict` and `acquire fit` from the command line: options in, readable output out."""

from __future__ import annotations

import math

import numpy as np
import pytest

from acquire.cli import main
from acquire.coil import DEMO_COIL, fit_sweep, predict
from acquire.csvout import write_sweep_csv
from acquire.store import open_store
from acquire.units import format_si

DEMO_ARGS = [
    "--turns", "150", "--diameter", "30mm", "--length", "45mm", "--awg", "30",
    "--layers", "1", "--leads", "100mm", "--temperature", "23",
]  # fmt: skip


def _sweep(points: int = 121):
    # A coil near the demo's (demo data): R + jωL with a √f rise, in parallel with C, 0.1 % noise.
    f = np.geomspace(100.0, 10e6, points)
    w = 2 * math.pi * f
    r = 4.8 * (1 + (f / 100e3) ** 2) ** 0.25
    z = 1 / (1 / (r + 1j * w * 340e-6) + 1j * w * 1.5e-12)
    rng = np.random.default_rng(0)
    return f, z * (1 + 1e-3 * rng.standard_normal(points))


def test_predict_prints_the_demo_coil_with_methods(capsys):
    assert main(["predict", *DEMO_ARGS, "--plain"]) == 0
    out = capsys.readouterr().out
    expected = predict(DEMO_COIL)
    assert format_si(expected.inductance, "H") in out
    assert format_si(expected.dc_resistance, "Ω") in out
    assert format_si(expected.capacitance, "F") in out
    assert "Nagaoka" in out and "Medhurst" in out and "Kelvin" in out
    assert "± 0.5" in out and "lower bound" in out


def test_predict_json_has_the_agreed_record_per_quantity(capsys):
    import json

    assert main(["predict", *DEMO_ARGS, "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    assert doc["command"] == "predict"
    keys = {"name", "label", "value", "unit", "relative_accuracy", "lower_bound", "method"}
    by_name = {q["name"]: q for q in doc["quantities"]}
    for q in doc["quantities"]:
        assert set(q) == keys
        assert q["method"]
        assert q["relative_accuracy"] is None or q["lower_bound"] is None
    # Long-solenoid formula µ0 N² A / l (common practice) bounds the demo coil's L from above.
    upper = 4e-7 * math.pi * 150**2 * math.pi * (0.030 + 0.2546e-3) ** 2 / 4 / 0.045
    assert by_name["L"]["unit"] == "H" and 0.7 * upper < by_name["L"]["value"] < upper
    assert by_name["L"]["relative_accuracy"] == 0.005
    assert by_name["C"]["relative_accuracy"] == 0.05  # Medhurst 1947: about 5 %
    assert by_name["SRF"]["relative_accuracy"] is None and by_name["SRF"]["lower_bound"] is None
    assert "no accuracy stated" in by_name["SRF"]["method"]
    rac = by_name["Rac@1e+06"]
    assert rac["lower_bound"] == rac["value"] and rac["relative_accuracy"] is None


@pytest.mark.parametrize("spelling", ["23", "23C", "23c", "23°C", "23 °C", "296.15K"])
def test_predict_temperature_spellings_mean_the_same(spelling, capsys):
    import json

    args = list(DEMO_ARGS)
    args[args.index("--temperature") + 1] = spelling
    assert main(["predict", *args, "--json"]) == 0
    doc = json.loads(capsys.readouterr().out)
    rdc = next(q for q in doc["quantities"] if q["name"] == "Rdc")
    assert "23 °C" in rdc["label"]
    # IEC 60028 / IACS copper at 23 °C over the helix of 150 turns plus 100 mm of leads.
    d = 0.005 * 0.0254 * 92 ** (6 / 39)
    wire = 150 * math.hypot(math.pi * (0.030 + d), 0.045 / 150) + 0.100
    expected = 1e-6 / 58 * (1 + 0.00393 * 3) * wire / (math.pi * d * d / 4)
    assert rdc["value"] == pytest.approx(expected, rel=1e-9)


@pytest.mark.parametrize(
    ("option", "value", "message"),
    [
        ("--diameter", "30", "did you mean 30 mm"),
        ("--length", "45", "did you mean 45 mm"),
        ("--diameter", "30m", "check the unit"),
        ("--temperature", "23k", "not a temperature"),
        ("--temperature", "75F", "Fahrenheit"),
        ("--leads", "100", "did you mean 100 mm"),
    ],
)
def test_predict_refuses_suspect_input_with_a_hint(option, value, message, capsys):
    args = list(DEMO_ARGS)
    args[args.index(option) + 1] = value
    assert main(["predict", *args]) == 2
    assert message in capsys.readouterr().err


def test_predict_table_and_wire_diameter_option(capsys, monkeypatch):
    monkeypatch.setenv("COLUMNS", "160")
    args = [a if a != "--awg" else "--wire" for a in DEMO_ARGS]
    args[args.index("--wire") + 1] = "0.2546mm"
    assert main(["predict", *args, "--frequency", "10k, 2MHz"]) == 0
    out = capsys.readouterr().out
    assert "accuracy" in out and "method" in out
    assert "AC resistance at 2.00 MHz" in out


def test_predict_refuses_a_winding_that_does_not_fit(capsys):
    args = list(DEMO_ARGS)
    args[args.index("--length") + 1] = "30mm"
    assert main(["predict", *args]) == 2
    err = capsys.readouterr().err
    assert "lengthen the winding or add layers" in err


def test_predict_help_explains_the_trade_terms(capsys):
    with pytest.raises(SystemExit):
        main(["predict", "--help"])
    out = capsys.readouterr().out
    for term in ("self-resonant", "skin", "Nagaoka", "Medhurst", "Pitch", "proximity"):
        assert term in out


def test_fit_reads_a_csv_written_by_the_sweep_writer(tmp_path, capsys):
    f, z = _sweep()
    path = write_sweep_csv(tmp_path / "sweep.csv", f, z * 1.01, corrected=z)
    assert main(["fit", str(path), "--plain"]) == 0
    out = capsys.readouterr().out
    fit = fit_sweep(f, z)
    assert "corrected readings" in out
    assert format_si(fit.inductance, "H") in out
    assert format_si(fit.capacitance, "F") in out


def test_fit_of_raw_only_csv_needs_the_raw_option(tmp_path, capsys):
    f, z = _sweep()
    path = write_sweep_csv(tmp_path / "raw.csv", f, z)
    assert main(["fit", str(path)]) == 2
    assert "--raw" in capsys.readouterr().err
    assert main(["fit", str(path), "--raw", "--plain"]) == 0
    assert "raw readings" in capsys.readouterr().out


def test_fit_reads_a_stored_sweep_and_compares_with_the_geometry(tmp_path, capsys):

    f, z = _sweep()
    url = f"sqlite:///{tmp_path / 'fit.db'}"
    with open_store(url) as store:
        writer = store.begin_sweep(dut="demo-coil")
        writer.add_points(f[:60], z[:60] * 1.01, z[:60])
        writer.add_points(f[60:], z[60:] * 1.01, z[60:])
        writer.finish()
        sweep_id = writer.id
    assert main(["fit", str(sweep_id), "--store", url, *DEMO_ARGS, "--plain"]) == 0
    out = capsys.readouterr().out
    assert f"sweep {sweep_id} of demo-coil" in out
    assert "Predicted from geometry beside fitted from the sweep" in out
    assert format_si(predict(DEMO_COIL).inductance, "H") in out


def test_fit_refuses_a_missing_file_and_a_missing_sweep(tmp_path, capsys):
    assert main(["fit", str(tmp_path / "none.csv")]) == 2
    assert "is not a file" in capsys.readouterr().err
    url = f"sqlite:///{tmp_path / 'empty.db'}"
    assert main(["fit", "7", "--store", url]) == 2
    assert "there is no results store" in capsys.readouterr().err
    open_store(url).close()
    assert main(["fit", "7", "--store", url]) == 2
    assert "no sweep 7" in capsys.readouterr().err


def test_fit_options_force_the_model(tmp_path, capsys):
    f, z = _sweep()
    path = write_sweep_csv(tmp_path / "sweep.csv", f, z, corrected=z)
    assert main(["fit", str(path), "--law", "constant", "--core-loss", "no", "--plain"]) == 0
    out = capsys.readouterr().out
    assert "constant R" in out and "no core-loss term" in out


def test_fit_law_wire_recovers_the_simulated_round_wire_coil(tmp_path, capsys):
    """`--law wire` (offered on the command line, not only by default) fits exact readings of
    the simulated demo coil, whose winding is a round wire with Bessel-function skin effect, and
    finds the profile's own true L, Rdc and Cp (`DutProfile.true_values`, computed)."""
    import json

    import numpy as np

    from drivers.simulator.profiles import load_dut

    dut = load_dut("demo-coil")
    f = np.geomspace(100.0, 10e6, 101)
    z = dut.impedance(f)
    path = tmp_path / "exact.csv"
    rows = ["frequency [Hz],R [ohm],X [ohm]"] + [
        f"{float(a)!r},{float(b.real)!r},{float(b.imag)!r}" for a, b in zip(f, z, strict=True)
    ]
    path.write_text("\n".join(rows) + "\n", encoding="utf-8")
    assert main(["fit", str(path), "--law", "wire", "--json"]) == 0
    got = {q["name"]: q["value"] for q in json.loads(capsys.readouterr().out)["quantities"]}
    truth = dut.true_values()
    for key in ("L", "Rdc", "Cp"):
        assert got[key] == pytest.approx(truth[key], rel=1e-4), key
