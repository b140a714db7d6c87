"""Where the fit's per-point uncertainties come from: the caller, the store, a CSV file.

The synthetic coil is ``R + jωL`` in parallel with ``C`` (the textbook parallel-resonance
circuit), computed here; its values echo the demo scenario (demo data). The checks compare the
fit's reported uncertainties under different statements of the same data's errors (computed).
"""

from __future__ import annotations

import json
import math

import numpy as np
import pytest

from acquire.cli import main
from acquire.coil import fit_sweep
from acquire.coil.fitcov import correlation, propagated_covariance

F = np.geomspace(100.0, 10e6, 61)
L, R, C = 340e-6, 4.8, 1.5e-12


def _coil(f=F):
    w = 2 * math.pi * f
    return 1 / (1 / (R + 1j * w * L) + 1j * w * C)


def _noisy(seed=3, rel=1e-3):
    z = _coil()
    rng = np.random.default_rng(seed)
    return z + rel * np.abs(z) * (rng.standard_normal(z.size) + 1j * rng.standard_normal(z.size))


def test_a_total_uncertainty_without_its_split_is_not_averaged_down():
    # Stated as independent, 61 points shrink L's uncertainty about √61-fold below the
    # per-point 0.1 %; without the split the fit must not claim that (computed).
    z, u = _noisy(), 1e-3 * np.abs(_coil())
    independent = fit_sweep(F, z, sigma=u, systematic=0, resistance_law="constant")
    total = fit_sweep(F, z, sigma=u, resistance_law="constant")
    split = fit_sweep(F, z, sigma=u / 2, systematic=u * math.sqrt(3) / 2)
    # Cp rests on the few points near the resonance, so it gains less by averaging.
    for key, factor in (("L", 2.0), ("Cp", 1.3)):
        assert total.get(key).sigma > factor * independent.get(key).sigma, key
        assert split.get(key).sigma > factor * 0.75 * independent.get(key).sigma, key
    assert any("not split" in n for n in total.notes)
    assert any("correlated across the sweep" in n for n in split.notes)


def test_a_common_error_is_counted_in_full():
    # A systematic error fully correlated across the sweep (correlation lengths made infinite
    # by a covariance given outright) of 0.1 % of R and X shifts L as a whole: L's
    # uncertainty must be at least about 0.1 % of L / √2 (the error of X alone, computed).
    z = _coil()
    s = 1e-3 * np.abs(z)
    cov = np.zeros((2 * F.size, 2 * F.size))
    cov[: F.size, : F.size] = np.outer(s, s)
    cov[F.size :, F.size :] = np.outer(s, s)
    fit = fit_sweep(F, z, sigma=1e-6 * s, systematic=cov, resistance_law="constant")
    assert fit.get("L").relative_sigma > 0.5e-3


def test_correlation_falls_with_distance_in_frequency_and_size():
    rho = correlation(np.array([1e3, 1e3, 1e4]), np.array([10, 10, 10]), np.array([1e3]), [10])
    assert rho[:, 0] == pytest.approx([1.0, 1.0, math.exp(-1 / 0.35)])
    far = correlation(np.array([1e3]), np.array([10.0]), np.array([1e3]), np.array([1000.0]))
    assert far[0, 0] == pytest.approx(math.exp(-2 / 0.35))


def test_propagated_covariance_matches_a_monte_carlo_of_the_field():
    # One reading per point, derivative g: the corrected error is g·u·e with e drawn from the
    # stated correlation (JCGM 101:2008, Monte Carlo propagation; computed).
    f = np.geomspace(1e3, 1e5, 5)
    z = 10 + 1j * f * 1e-3
    u = np.full(f.size, 0.01)
    g = np.exp(1j * np.linspace(0, 1, f.size)) * 1.3
    cov = propagated_covariance(f, [(z, u, g)])
    rho = correlation(f, z, f, z)
    rng = np.random.default_rng(1)
    chol = np.linalg.cholesky(rho)
    draws = 200_000
    e = (chol @ rng.standard_normal((f.size, draws))) + 1j * (
        chol @ rng.standard_normal((f.size, draws))
    )
    err = (g * u)[:, None] * e
    sample = np.cov(np.concatenate([err.real, err.imag]))
    assert np.allclose(cov, sample, atol=0.02 * np.max(np.abs(cov)))


def test_fit_command_uses_the_stored_uncertainty(tmp_path, capsys):
    from acquire.store import open_store

    z = _noisy(seed=5)
    u = np.column_stack([2e-3 * np.abs(z), 2e-3 * np.abs(z)])
    url = f"sqlite:///{tmp_path / 'fit.db'}"
    with open_store(url) as store:
        with_u = store.begin_sweep(dut="demo-coil")
        with_u.add_points(F, z, z, uncertainty=u)
        with_u.finish()
        without = store.begin_sweep(dut="demo-coil")
        without.add_points(F, z, z)
        without.finish()
    assert main(["fit", str(with_u.id), "--store", url, "--json"]) == 0
    given = json.loads(capsys.readouterr().out)
    assert main(["fit", str(without.id), "--store", url, "--json"]) == 0
    estimated = json.loads(capsys.readouterr().out)
    assert any("not split" in n for n in given["notes"])
    assert any("no per-point uncertainty" in n for n in estimated["notes"])
    expected = fit_sweep(F, z, sigma=u / 2)
    got = {q["name"]: q for q in given["quantities"]}
    assert got["L"]["standard_uncertainty"] == pytest.approx(
        expected.get("L").sigma, rel=1e-9, abs=0
    )
    assert set(got["L"]) == {
        "name", "label", "value", "unit", "relative_accuracy", "lower_bound", "method",
        "standard_uncertainty",
    }  # fmt: skip


def test_fit_command_reads_uncertainty_columns_of_a_csv(tmp_path, capsys):
    z = _noisy(seed=6)
    u = 2e-3 * np.abs(z)
    path = tmp_path / "sweep.csv"
    lines = ["frequency [Hz],corrected R [ohm],corrected X [ohm],U(R) [mohm],U(X) [mohm]"]
    lines += [
        f"{fi:.17g},{zi.real:.17g},{zi.imag:.17g},{ui * 1e3:.17g},{ui * 1e3:.17g}"
        for fi, zi, ui in zip(F, z, u, strict=True)
    ]
    path.write_text("\n".join(lines) + "\n")
    assert main(["fit", str(path), "--json"]) == 0
    got = {q["name"]: q for q in json.loads(capsys.readouterr().out)["quantities"]}
    expected = fit_sweep(F, z, sigma=u / 2)
    assert got["Cp"]["standard_uncertainty"] == pytest.approx(
        expected.get("Cp").sigma, rel=1e-6, abs=0
    )
