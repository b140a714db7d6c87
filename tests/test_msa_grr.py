"""Gauge R&R: the ANOVA method against statsmodels, its estimators against known variance
components, the average-and-range method on a worked example, and the pictures' data."""

from __future__ import annotations

import math

import numpy as np
import pytest
from scipy import stats

from acquire.msa.anova import crossed_anova, percent_tolerance, sums_of_squares
from acquire.msa.average_range import K1, K2, K3, average_chart, average_range, range_chart
from acquire.msa.grr_report import analyse, band, to_json
from acquire.msa.records import GrrData
from acquire.report.control import D4 as MR_D4


def frame(y: np.ndarray):
    import pandas as pd

    p, o, r = y.shape
    i, j, k = np.meshgrid(range(p), range(o), range(r), indexing="ij")
    return pd.DataFrame({"part": i.ravel() + 1, "operator": [f"op{x}" for x in j.ravel()],
                         "trial": k.ravel() + 1, "value": y.ravel()})  # fmt: skip


def statsmodels_table(y: np.ndarray, interaction: bool):
    from statsmodels.formula.api import ols
    from statsmodels.stats.anova import anova_lm

    formula = "value ~ C(part)*C(operator)" if interaction else "value ~ C(part)+C(operator)"
    return anova_lm(ols(formula, data=frame(y)).fit(), typ=2)


def draw(rng, shape, s_part, s_op, s_int, s_rep):
    p, o, r = shape
    return (
        rng.normal(0, s_part, (p, 1, 1))
        + rng.normal(0, s_op, (1, o, 1))
        + rng.normal(0, s_int, (p, o, 1))
        + rng.normal(0, s_rep, (p, o, r))
    )


@pytest.mark.parametrize(
    ("seed", "shape"), [(1, (10, 3, 3)), (2, (5, 2, 2)), (3, (6, 4, 2)), (4, (8, 3, 5))]
)
def test_full_table_equals_statsmodels(seed: int, shape) -> None:
    """Sums of squares, df, and the interaction's F and p equal statsmodels' two-way ANOVA
    (anova_lm, typ=2, equal to the sequential table on a balanced design). Parts and operators
    are random effects in the AIAG manual's table, so their F is MS / MS_interaction: checked
    against statsmodels' mean squares and scipy's F distribution."""
    y = draw(np.random.default_rng(seed), shape, 1.0, 0.4, 0.3, 0.5)
    study = crossed_anova(y, pool_above=1.0)
    ref = statsmodels_table(y, interaction=True)
    names = ["C(part)", "C(operator)", "C(part):C(operator)", "Residual"]
    for row, name in zip(study.full[:4], names, strict=True):
        assert row.ss == pytest.approx(ref.loc[name, "sum_sq"], rel=1e-9)
        assert row.df == ref.loc[name, "df"]
    assert study.full[4].ss == pytest.approx(ref["sum_sq"].sum(), rel=1e-9)
    interaction = study.full[2]
    assert interaction.f == pytest.approx(ref.loc[names[2], "F"], rel=1e-9)
    assert interaction.p == pytest.approx(ref.loc[names[2], "PR(>F)"], rel=1e-7)
    ms = ref["sum_sq"] / ref["df"]
    for row, name in zip(study.full[:2], names[:2], strict=True):
        f = ms[name] / ms[names[2]]
        assert row.f == pytest.approx(f, rel=1e-9)
        assert row.p == pytest.approx(stats.f.sf(f, ref.loc[name, "df"], ref.loc[names[2], "df"]))
    c = study.components  # the expected mean squares of the random model, from statsmodels' MS
    p, o, r = shape
    assert c.repeatability_var == pytest.approx(ms["Residual"], rel=1e-9)
    assert c.interaction_var == pytest.approx(max(0, (ms[names[2]] - ms["Residual"]) / r))
    assert c.operator_var == pytest.approx(max(0, (ms[names[1]] - ms[names[2]]) / (p * r)))
    assert c.part_var == pytest.approx(max(0, (ms[names[0]] - ms[names[2]]) / (o * r)))


@pytest.mark.parametrize("seed", [5, 6, 7])
def test_pooled_table_equals_statsmodels_additive_model(seed: int) -> None:
    """With the interaction pooled, the table is statsmodels' model without the interaction:
    its residual is the pooled error, and its F and p are the pooled tests."""
    y = draw(np.random.default_rng(seed), (10, 3, 3), 1.0, 0.4, 0.0, 0.5)
    study = crossed_anova(y, pool_above=0.0)
    assert study.pooled is not None
    ref = statsmodels_table(y, interaction=False)
    for row, name in zip(study.pooled[:3], ["C(part)", "C(operator)", "Residual"], strict=True):
        assert row.ss == pytest.approx(ref.loc[name, "sum_sq"], rel=1e-9)
        assert row.df == ref.loc[name, "df"]
        if name != "Residual":
            assert row.f == pytest.approx(ref.loc[name, "F"], rel=1e-9)
            assert row.p == pytest.approx(ref.loc[name, "PR(>F)"], rel=1e-7)
    ms_e = ref.loc["Residual", "sum_sq"] / ref.loc["Residual", "df"]
    assert study.components.repeatability_var == pytest.approx(ms_e, rel=1e-9)
    assert study.components.interaction_var == 0.0


def test_pooling_rule_at_its_level() -> None:
    """Pooled exactly when the interaction's p-value is above the level (0.25 by default)."""
    y = draw(np.random.default_rng(11), (10, 3, 3), 1.0, 0.4, 0.0, 0.5)
    p = crossed_anova(y, pool_above=1.0).interaction_p
    assert crossed_anova(y, pool_above=p - 1e-9).pooled is not None
    assert crossed_anova(y, pool_above=p).pooled is None
    strong = draw(np.random.default_rng(12), (10, 3, 3), 1.0, 0.4, 1.0, 0.2)
    assert crossed_anova(strong).interaction_p < 0.25 and crossed_anova(strong).pooled is None


def test_estimates_recover_known_components() -> None:
    """400 draws of a 10 x 3 x 3 study with σ_part 1.0, σ_operator 1.0, σ_interaction 0.5,
    σ_repeat 0.4, never pooled (pooling biases the estimators). Before truncation at zero the
    ANOVA estimators are unbiased (the expected mean squares of the random model); these
    components make truncation rare: the operator estimate is negative only when MS_operator <
    MS_interaction, probability about 1.4 % (computed: MS_o ~ 30.43·χ²₂/2, E[MS_po] = 0.91), and
    the truncated part is far smaller than the mean's standard error. Bounds:
    - each mean estimate within 4 standard errors of the truth (SE = sample sd / √400; a
      false alarm has probability under 1e-4 per component by the central limit theorem);
    - repeatability: SS_error/σ² is χ² with 60 df, so its sampling variance is 2σ⁴/60 and the
      empirical variance is within ±30 % of it (the relative SE of a variance from 400 draws is
      about √(2/399 + 0.2/400) = 0.074: 4 SE); the 95 % chi-square interval
      [SS_E/χ²₀.₉₇₅, SS_E/χ²₀.₀₂₅] covers σ² in 360 to 397 of 400 draws (Binomial(400, 0.95):
      mean 380, sd 4.4, about ±4 sd)."""
    rng = np.random.default_rng(2024)
    truth = {"part_var": 1.0, "operator_var": 1.0, "interaction_var": 0.25,
             "repeatability_var": 0.16}  # fmt: skip
    estimates = {k: [] for k in truth}
    covered = 0
    low, high = stats.chi2.ppf([0.975, 0.025], 60)
    for _ in range(400):
        y = draw(rng, (10, 3, 3), 1.0, 1.0, 0.5, 0.4)
        study = crossed_anova(y, pool_above=1.0)
        for k in truth:
            estimates[k].append(getattr(study.components, k))
        ss_e = study.full[3].ss
        covered += ss_e / low <= truth["repeatability_var"] <= ss_e / high
    for k, true in truth.items():
        values = np.asarray(estimates[k])
        se = values.std(ddof=1) / math.sqrt(values.size)
        assert abs(values.mean() - true) < 4 * se, (k, values.mean(), true, se)
    repeat = np.asarray(estimates["repeatability_var"])
    assert repeat.var(ddof=1) / (2 * 0.16**2 / 60) == pytest.approx(1.0, abs=0.3)
    assert 360 <= covered <= 397


def test_study_derived_figures() -> None:
    """GRR, TV, %GRR, ndc and %tolerance from the components, as the AIAG manual defines them."""
    y = draw(np.random.default_rng(3), (10, 3, 3), 1.0, 0.3, 0.2, 0.3)
    s = crossed_anova(y, pool_above=1.0)
    c = s.components
    grr = math.sqrt(c.repeatability_var + c.operator_var + c.interaction_var)
    assert c.grr == pytest.approx(grr)
    assert c.total_variation == pytest.approx(math.sqrt(grr**2 + c.part_var))
    assert s.percent_grr_total == pytest.approx(100 * grr / c.total_variation)
    assert s.ndc == math.floor(1.41 * math.sqrt(c.part_var) / grr)
    assert percent_tolerance(grr, 10.0) == pytest.approx(100 * 6 * grr / 10.0)
    assert percent_tolerance(grr, 10.0, 5.15) == pytest.approx(100 * 5.15 * grr / 10.0)
    assert math.isnan(percent_tolerance(grr, None))


def test_bands_common_practice() -> None:
    """Under 10 % acceptable, 10 % to 30 % may be acceptable, over 30 % unacceptable
    (common practice, as the AIAG MSA manual, 4th edition, gives them; from memory)."""
    assert band(9.99) == "acceptable"
    assert band(10.0).startswith("may be") and band(30.0).startswith("may be")
    assert band(30.01) == "unacceptable"
    assert band(math.nan) is None


# A worked example, computed by hand: 3 parts, operators A and B, 2 trials.
#   A: part 1: 10, 12   part 2: 20, 21   part 3: 30, 33
#   B: part 1: 11, 11   part 2: 22, 24   part 3: 31, 32
# Average and range (AIAG MSA manual, 4th edition; K1 = 0.8862 for 2 trials, K2 = 0.7071 for 2
# operators, K3 = 0.5231 for 3 parts):
#   ranges A: 2, 1, 3 (mean 2); B: 0, 2, 1 (mean 1); R̿ = 1.5;  EV = 1.5 · 0.8862 = 1.3293
#   operator means A = 126/6 = 21.0, B = 131/6 = 21.8333; X̄_DIFF = 0.8333
#   AV² = (0.8333 · 0.7071)² − 1.3293²/(3 · 2) = 0.347216 − 0.294507 = 0.052709; AV = 0.22958
#   part means 11, 21.75, 31.5; R_p = 20.5; PV = 20.5 · 0.5231 = 10.72355
#   GRR = √(1.3293² + 0.22958²) = 1.34898
# Sums of squares (grand mean 257/12 = 21.41667):
#   SS_part = 2·2·[(11 − ȳ)² + (21.75 − ȳ)² + (31.5 − ȳ)²] = 4 · 210.29167 = 841.16667
#   SS_operator = 3·2·[(21 − ȳ)² + (21.8333 − ȳ)²] = 6 · 0.34722 = 2.08333
#   SS_error = (2 + 0.5 + 4.5) + (0 + 2 + 0.5) = 9.5 (within-cell squares about cell means)
#   SS_total = Σy² − 257²/12 = 6361 − 5504.08333 = 856.91667
#   SS_part×operator = 856.91667 − 841.16667 − 2.08333 − 9.5 = 4.16667
WORKED = np.array([[[10, 12], [11, 11]], [[20, 21], [22, 24]], [[30, 33], [31, 32]]], dtype=float)


def test_average_range_worked_example() -> None:
    ar = average_range(WORKED)
    assert ar is not None
    assert ar.mean_range == pytest.approx(1.5)
    assert ar.repeatability == pytest.approx(1.3293, rel=1e-4)
    assert ar.operator_difference == pytest.approx(0.83333, rel=1e-4)
    assert ar.reproducibility == pytest.approx(0.22958, rel=1e-3)
    assert ar.part_range == pytest.approx(20.5)
    assert ar.part_variation == pytest.approx(10.72355, rel=1e-5)
    assert ar.grr == pytest.approx(1.34898, rel=1e-4)


def test_sums_of_squares_worked_example() -> None:
    ss = sums_of_squares(WORKED)
    assert ss["part"] == pytest.approx(841.16667, rel=1e-6)
    assert ss["operator"] == pytest.approx(2.08333, rel=1e-5)
    assert ss["part x operator"] == pytest.approx(4.16667, rel=1e-5)
    assert ss["repeatability"] == pytest.approx(9.5)
    assert ss["total"] == pytest.approx(856.91667, rel=1e-6)


def test_k_constants_against_the_range_of_normal_samples() -> None:
    """K1 = 1/d2: the expected range of 2 and of 3 standard normal values is 2/√π and 3/√π
    (computed from the normal distribution); the manual's K2 for 2 operators and K3 for 2
    parts are 1/√2 (d2* = √2 for one range of two, from memory)."""
    assert K1[2] == pytest.approx(math.sqrt(math.pi) / 2, abs=1e-4)
    assert K1[3] == pytest.approx(math.sqrt(math.pi) / 3, abs=1e-4)
    assert K2[2] == pytest.approx(1 / math.sqrt(2), abs=1e-4) == K3[2]
    assert K2[3] == K3[3]
    assert list(K3.values()) == sorted(K3.values(), reverse=True)


def test_average_range_not_given_outside_its_tables() -> None:
    y = draw(np.random.default_rng(1), (12, 3, 3), 1, 0.2, 0.1, 0.2)
    assert average_range(y) is None
    a = analyse(as_data(y))
    doc = to_json(a)
    assert doc["average_range"] is None and "10 parts" in doc["average_range_not_given"]


def test_charts_limits() -> None:
    """Range chart UCL = D4·R̄ (D4 = 3.267 for ranges of two, as the moving-range chart's,
    NIST/SEMATECH e-Handbook 6.3.2); average chart X̿ ± A2·R̄ (A2 = 1.880 for two)."""
    rc = range_chart(WORKED)
    assert rc is not None and rc.center == pytest.approx(1.5)
    assert rc.upper == pytest.approx(MR_D4 * 1.5) and rc.lower == 0.0
    ac = average_chart(WORKED)
    assert ac is not None and ac.center == pytest.approx(257 / 12)
    assert ac.upper - ac.center == pytest.approx(1.880 * 1.5)
    assert ac.points[1, 1] == pytest.approx(23.0)


def as_data(y: np.ndarray, names=None) -> GrrData:
    p, o, r = y.shape
    i, j, k = np.meshgrid(range(p), range(o), range(r), indexing="ij")
    names = names or [f"op{x}" for x in range(o)]
    return GrrData(part=i.ravel() + 1, operator=np.array([names[x] for x in j.ravel()]),
                   trial=k.ravel() + 1, value=y.ravel(), quantity="Ls@10kHz", unit="H")  # fmt: skip


def test_pictures_hold_the_analysis() -> None:
    from acquire.msa import grr_pictures as gp

    y = draw(np.random.default_rng(9), (5, 3, 2), 1e-6, 2e-7, 1e-7, 1e-7) + 1e-4
    a = analyse(as_data(y), tolerance=2e-5)
    fig = gp.components_figure(a)
    ax = fig.axes[0]
    bars = {c.get_label(): [b.get_height() for b in c] for c in ax.containers}
    s = a.anova
    assert bars["% study variation"][0] == pytest.approx(s.percent_grr_total)
    assert bars["% contribution"][3] == pytest.approx(
        100 * s.components.part_var / s.components.total_var
    )
    assert bars["% tolerance"][1] == pytest.approx(100 * 6 * s.components.repeatability / 2e-5)
    ranges = np.ptp(y, axis=2)
    ax = gp.range_figure(a).axes[0]
    lines = {ln.get_gid(): ln for ln in ax.lines if ln.get_gid()}
    assert lines["control"].get_ydata()[0] == pytest.approx(3.267 * ranges.mean())
    assert np.allclose(lines["operator-2"].get_ydata(), ranges[:, 2])
    ax = gp.average_figure(a).axes[0]
    limits = sorted(ln.get_ydata()[0] for ln in ax.lines if ln.get_gid() == "control")
    assert limits[1] - y.mean() == pytest.approx(1.880 * ranges.mean())
    ax = gp.by_part_figure(a).axes[0]
    means = next(ln for ln in ax.lines if ln.get_gid() == "means")
    assert np.allclose(means.get_ydata(), y.mean(axis=(1, 2)))
    ax = gp.by_operator_figure(a).axes[0]
    values = next(ln for ln in ax.lines if ln.get_gid() == "values")
    assert np.allclose(values.get_ydata()[:10], y[:, 0, :].ravel())
    pictures = gp.grr_figures(a)
    assert [name for name, _ in pictures] == ["grr-components.png", "grr-range.png",
        "grr-average.png", "grr-by-part.png", "grr-by-operator.png"]  # fmt: skip
    assert all(png.startswith(b"\x89PNG") for _, png in pictures)
