"""Analysis of covariance from moments, checked against statsmodels OLS on the same data.

References: statsmodels ``ols("y ~ C(g) + x")`` (common slope), ``anova_lm`` (type II group
F; the interaction row of ``y ~ C(g) * x``), on pingouin's bundled ``ancova`` dataset
(Scores by Method, covariate Income) and on a seeded confounded dataset.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pingouin
import pytest
import statsmodels.formula.api as sm_formula
import statsmodels.stats.anova as sm_anova

from sitebuild.stats.ancova import XYMoments, ancova, slope_check
from sitebuild.streaming.pieces import CoMoments

REL = 1e-6


def _pingouin_ancova() -> pd.DataFrame:
    data = pingouin.read_dataset("ancova")  # bundled with pingouin, read offline
    return pd.DataFrame({"g": data["Method"], "x": data["Income"], "y": data["Scores"]})


def _confounded(seed: int = 20261201) -> pd.DataFrame:
    """Three groups whose x differs a lot; y depends on x, so raw gaps mislead."""
    rng = np.random.default_rng(seed)
    frames = []
    for name, x_centre, shift, n in (
        ("a", 3.0, 0.0, 60),
        ("b", 5.0, 2.0, 45),
        ("c", 4.0, -1.0, 80),
    ):
        x = rng.normal(x_centre, 1.0, n) + 1000.0  # a large offset, as dates in day numbers
        y = 20.0 + 7.5 * (x - 1000.0) + shift + rng.normal(0, 2.0, n)
        frames.append(pd.DataFrame({"g": name, "x": x, "y": y}))
    return pd.concat(frames, ignore_index=True)


def _moments(df: pd.DataFrame) -> tuple[list[str], list[XYMoments]]:
    names = sorted(df["g"].unique())
    return names, [
        XYMoments.of(df.loc[df.g == n, "x"].to_numpy(float), df.loc[df.g == n, "y"].to_numpy(float))
        for n in names
    ]


def _check_against_statsmodels(df: pd.DataFrame) -> None:
    names, groups = _moments(df)
    result = ancova(groups, confidence=0.95)
    fit = sm_formula.ols("y ~ C(g) + x", data=df).fit()
    # Common slope, its standard error and interval; residual SD and df.
    assert result.slope == pytest.approx(fit.params["x"], rel=REL)
    assert result.slope_se == pytest.approx(fit.bse["x"], rel=REL)
    low, high = fit.conf_int(0.05).loc["x"]
    assert (result.slope_low, result.slope_high) == pytest.approx((low, high), rel=REL)
    assert result.df == int(fit.df_resid)
    assert result.residual_sd == pytest.approx(np.sqrt(fit.mse_resid), rel=REL)
    # Adjusted means: the model's prediction for each group at the overall mean of x.
    x_mean = df["x"].mean()
    assert result.x_mean == pytest.approx(x_mean, rel=REL)
    grid = pd.DataFrame({"g": names, "x": x_mean})
    pred = fit.get_prediction(grid).summary_frame(alpha=0.05)
    for i, g in enumerate(result.groups):
        assert g.adjusted == pytest.approx(pred["mean"][i], rel=REL)
        assert g.se == pytest.approx(pred["mean_se"][i], rel=REL)
        assert g.ci_low == pytest.approx(pred["mean_ci_lower"][i], rel=REL)
        assert g.ci_high == pytest.approx(pred["mean_ci_upper"][i], rel=REL)
    # Pairwise differences of adjusted means: contrasts of the group coefficients.
    params = list(fit.params.index)
    for pair in result.pairs:
        contrast = np.zeros(len(params))
        for index, sign in ((pair.a, 1.0), (pair.b, -1.0)):
            if index > 0:  # the first group is the baseline
                contrast[params.index(f"C(g)[T.{names[index]}]")] += sign
        test = fit.t_test(contrast)
        assert pair.difference == pytest.approx(float(test.effect[0]), rel=REL)
        assert pair.se == pytest.approx(float(test.sd[0, 0]), rel=REL)
        assert pair.pvalue == pytest.approx(float(test.pvalue), rel=REL)
        ci = test.conf_int(alpha=0.05)[0]
        assert (pair.ci_low, pair.ci_high) == pytest.approx(tuple(ci), rel=REL)
    # Group F at equal x: anova_lm type II row for C(g).
    table = sm_anova.anova_lm(fit, typ=2)
    assert result.group_f == pytest.approx(table.loc["C(g)", "F"], rel=REL)
    assert result.group_p == pytest.approx(table.loc["C(g)", "PR(>F)"], rel=REL)
    # Homogeneity of slopes: the interaction row of y ~ C(g) * x.
    full = sm_formula.ols("y ~ C(g) * x", data=df).fit()
    inter = sm_anova.anova_lm(full, typ=2).loc["C(g):x"]
    check = result.slopes
    assert check.statistic == pytest.approx(inter["F"], rel=REL)
    assert check.pvalue == pytest.approx(inter["PR(>F)"], rel=REL)
    assert check.df1 == inter["df"]
    # Each group's own slope and its standard error in the separate-slopes model.
    sep = sm_formula.ols("y ~ C(g) + C(g):x - 1", data=df).fit()
    for i, name in enumerate(names):
        key = f"C(g)[{name}]:x"
        assert check.slopes[i] == pytest.approx(sep.params[key], rel=REL)
        assert check.slope_se[i] == pytest.approx(sep.bse[key], rel=REL)


def test_ancova_matches_statsmodels_on_pingouin_example():
    # Source: statsmodels OLS on pingouin.read_dataset("ancova") (Scores ~ Method + Income).
    _check_against_statsmodels(_pingouin_ancova())


def test_ancova_matches_statsmodels_on_seeded_confounded_data():
    # Source: statsmodels OLS on a seeded dataset where groups differ in x (offset 1000).
    _check_against_statsmodels(_confounded())


def test_curved_adjustment_matches_statsmodels_quadratic():
    # Source: statsmodels OLS ``y ~ C(g) + x + I(x**2)`` on seeded data with an inverted-U
    # response; adjusted means are predictions at the overall mean of x.
    rng = np.random.default_rng(7)
    frames = []
    for name, centre, shift in (("a", 20.0, 0.0), ("b", 24.0, 6.0), ("c", 22.0, -3.0)):
        x = rng.normal(centre, 2.5, 70)
        y = 80 - 1.0 * (x - 23.0) ** 2 + shift + rng.normal(0, 3.0, 70)
        frames.append(pd.DataFrame({"g": name, "x": x, "y": y}))
    df = pd.concat(frames, ignore_index=True)
    names = sorted(df["g"].unique())
    c = float(df["x"].mean())
    groups = [
        XYMoments.of(df.loc[df.g == n, "x"].to_numpy(), df.loc[df.g == n, "y"].to_numpy(), 2, c)
        for n in names
    ]
    result = ancova(groups, at=(c, 0.0))
    fit = sm_formula.ols("y ~ C(g) + x + I(x**2)", data=df).fit()
    assert result.df == int(fit.df_resid)
    assert result.residual_sd == pytest.approx(np.sqrt(fit.mse_resid), rel=REL)
    pred = fit.get_prediction(pd.DataFrame({"g": names, "x": c})).summary_frame(alpha=0.05)
    for i, g in enumerate(result.groups):
        assert g.adjusted == pytest.approx(pred["mean"][i], rel=REL)
        assert g.se == pytest.approx(pred["mean_se"][i], rel=REL)
    b = result.pairs[1]  # a − c
    test = fit.t_test(f"C(g)[T.{names[2]}] = 0")
    assert -b.difference == pytest.approx(float(test.effect[0]), rel=REL)
    assert b.se == pytest.approx(float(test.sd[0, 0]), rel=REL)
    table = sm_anova.anova_lm(fit, typ=2)
    assert result.group_f == pytest.approx(table.loc["C(g)", "F"], rel=REL)
    # The interaction of group with both covariate terms, as one extra-sum-of-squares test.
    full = sm_formula.ols("y ~ C(g) * (x + I(x**2))", data=df).fit()
    compare = sm_anova.anova_lm(fit, full)
    assert result.slopes.statistic == pytest.approx(compare["F"][1], rel=REL)
    assert result.slopes.pvalue == pytest.approx(compare["Pr(>F)"][1], rel=REL)


def test_confounded_raw_gap_shrinks_at_equal_x():
    # The invented data put a true shift of 2.0 between b and a, but b's x is 2 higher, so
    # its raw gap is about 2 + 7.5 × 2 = 17; at equal x the gap returns to about 2.
    names, groups = _moments(_confounded())
    result = ancova(groups)
    pair = next(p for p in result.pairs if (names[p.a], names[p.b]) == ("a", "b"))
    assert pair.raw_difference < -12
    assert pair.ci_low < -2.0 < pair.ci_high
    assert result.x_share > 0.9


def test_moments_merged_from_batches_give_the_same_answer():
    # Streamed data: per-batch co-moments merged exactly must give the in-memory result.
    df = _confounded()
    names = sorted(df["g"].unique())
    codes = df["g"].map({n: i for i, n in enumerate(names)}).to_numpy()
    x, y = df["x"].to_numpy(float), df["y"].to_numpy(float)
    pivots = (1000.0, 50.0)
    merged = CoMoments.empty(len(names))
    for part in np.array_split(np.arange(len(df)), 7):
        piece = CoMoments.of(x[part], y[part], codes[part], len(names), pivots)
        merged = merged.merge(piece)
    streamed = [
        XYMoments.line(
            int(merged.n[i]),
            pivots[0] + float(merged.mean_a[i]),
            pivots[1] + float(merged.mean_b[i]),
            float(merged.m2a[i]),
            float(merged.m2b[i]),
            float(merged.c[i]),
        )
        for i in range(len(names))
    ]
    _, memory = _moments(df)
    a, b = ancova(memory), ancova(streamed)
    assert b.slope == pytest.approx(a.slope, rel=1e-9)
    for pa, pb in zip(a.pairs, b.pairs, strict=True):
        assert pb.difference == pytest.approx(pa.difference, rel=1e-9)
        assert pb.se == pytest.approx(pa.se, rel=1e-9)


def test_x_range_overlap_and_extrapolation_are_flagged():
    a = XYMoments.of(np.array([1.0, 2, 3, 4]), np.array([1.0, 2.5, 2.9, 4.1]))
    b = XYMoments.of(np.array([10.0, 11, 12, 13]), np.array([10.0, 11.2, 11.9, 13.3]))
    result = ancova([a, b])
    assert result.overlap is False
    assert all(g.extrapolated for g in result.groups)  # x̄ = 7 lies in neither range
    c = XYMoments.of(np.array([2.0, 5, 9, 12]), np.array([2.0, 5.1, 8.7, 12.2]))
    assert ancova([a, c]).overlap is True


def test_group_without_spread_in_x_keeps_its_place_in_the_slope_check():
    a = XYMoments.of(np.array([1.0, 2, 3, 4]), np.array([1.0, 2.5, 2.9, 4.1]))
    b = XYMoments.of(np.array([2.0, 2, 2]), np.array([3.0, 3.5, 2.5]))
    c = XYMoments.of(np.array([1.0, 3, 5, 6]), np.array([2.0, 5.0, 9.5, 11.0]))
    check = slope_check([a, b, c])
    assert np.isnan(check.slopes[1])
    assert check.df1 == 1  # two groups have a slope
    assert check.df2 == 11 - 3 - 2
