"""Group comparisons for each measure: omnibus tests, pairwise tests with effect sizes and
intervals, equivalence, letters and plain-language findings (results.json key
``comparisons``).

How the leading test is chosen (the other tests stay on the page as a sensitivity check):

1. Kruskal–Wallis (ranks) when the values are strongly skewed beyond sampling noise and the
   smallest group has fewer than 30 values, so means are not yet steadied by averaging. The
   evidence is the pooled within-group residuals (each value minus its group's mean): their
   skewness must exceed ±1 (common practice) and D'Agostino's skewness test must reject
   symmetry at the 1% level. The skewness of one small group alone is mostly noise (the
   sample skewness of 15 normal values has an SD of about 0.58), so it does not decide.
2. Otherwise Welch's ANOVA when the spread differs (Brown–Forsythe p < alpha, or the largest
   SD is more than twice the smallest, common practice) or group sizes are unbalanced
   (largest n over 1.5 × the smallest): the equal-variance ANOVA is unreliable then.
3. Otherwise the one-way ANOVA: spread and sizes are similar, and it is the most powerful.

Whether the spreads differ is decided by the spread check alone, whichever test leads, and
is carried in the results (``lead_basis.unequal_spread``): tests that assume equal spread
(one-way ANOVA, Tukey's HSD) are then not counted as disagreeing.

Pairwise, the leading test follows: Mann–Whitney U with the Hodges–Lehmann shift and Cliff's
delta after Kruskal–Wallis; Welch's t with the difference in means and Hedges' g otherwise.
Its p-values are adjusted within the measure's family by the site's ``adjust`` method.
Tukey's HSD and Games–Howell (all pairs) or Dunnett (each group against the reference) are
shown beside them; those control the family-wise error themselves.

Pairs are compared only when at most ``MAX_PAIRWISE_GROUPS`` groups can be compared (435
pairs); with more groups each group is compared with all other rows pooled, so the page
stays bounded, and the results say so.
"""

from __future__ import annotations

import math
from collections.abc import Sequence

import numpy as np
from scipy import stats

from ..stats import findings as findings_mod
from ..stats.distributions import norm_sf
from ..stats.from_moments import brown_forsythe_from_stats, moment_sample
from ..stats.letters import compact_letters
from ..stats.multiplicity import METHOD_NAMES, adjust_pvalues
from ..stats.omnibus import (
    GroupMoments,
    kruskal_wallis,
    moments_of,
    one_way_anova,
    spread_test,
    welch_anova,
)
from ..stats.pairwise import (
    EXACT_MAX_N,
    Dominance,
    Sample,
    SharedRanks,
    cliffs_delta,
    detectable_difference,
    distinct_values,
    dominance_counts,
    dunnett,
    games_howell,
    hedges_g,
    hodges_lehmann,
    mann_whitney_u,
    permutation_test,
    pooled_ranks,
    size_label,
    tost_welch,
    tukey_hsd,
    welch_t,
)
from . import DataTable, map_measures, sampled_caption

MAX_PAIRWISE_GROUPS = 30
MAX_DUNNETT_GROUPS = 30
# A permutation test is run for a pair only when permutations × (n_a + n_b) stays below this
# many value draws, so an enabled permutation check cannot stall a build.
PERMUTATION_BUDGET = 50_000_000
# The Hodges–Lehmann search costs O(n log n) per round per pair; above this many values per
# group it runs on a seeded random sample of this size. The interval stays valid (it is the
# distribution-free interval of that sample), only wider than one from every value.
HL_SAMPLE_LIMIT = 2_000  # values per group for the Hodges–Lehmann shift (the other tests use all)
SKEW_LIMIT = 1.0
# Level of D'Agostino's skewness test on the pooled within-group residuals that must also
# reject symmetry before the rank test leads: strict, so normal data rarely switch (common
# practice; the rate is checked by simulation in tests/test_comparisons_section.py).
SKEW_TEST_ALPHA = 0.01
# A single group is called strongly skewed only when |G1| > SKEW_LIMIT and also exceeds this
# many standard errors of G1 under normality (about 0.58 for 15 values), so noise is not
# reported as shape.
SKEW_SE_MULTIPLE = 3.0
SD_RATIO_LIMIT = 2.0
SIZE_RATIO_LIMIT = 1.5
SMALL_GROUP = 30
# Skewness of fewer values is mostly noise (G1 of 3 values cannot pass ±1.15 by much), so such
# a group cannot switch a whole measure to rank tests (common practice).
SKEW_MIN_N = 10
FEW_ROWS = 10
# Values beyond this magnitude (or below its inverse) cannot be raised to the fourth power
# (Welch degrees of freedom square the variances) safely in float64.
SCALE_LIMIT = 1e75

TEST_ANOVA = "one-way ANOVA"
TEST_WELCH = "Welch's ANOVA"
TEST_KW = "Kruskal–Wallis"
PAIR_WELCH = "Welch's t-test"
PAIR_MW = "Mann–Whitney U"


def _num(value) -> float | None:
    """A finite float, or None (results.json never holds NaN or Infinity)."""
    if value is None:
        return None
    value = float(value)
    return value if math.isfinite(value) else None


def _skewness(sample: Sample) -> float | None:
    if sample.n < 3 or not sample.variance > 0:
        return None
    return _num(stats.skew(sample.sorted, bias=False))


def skewness_se(n: int) -> float:
    """Return the standard error of the adjusted sample skewness G1 of n normal values.

    Notes
    -----
    SE(G1) = sqrt(6 n (n − 1) / ((n − 2)(n + 1)(n + 3))) for n ≥ 3.

    References
    ----------
    Joanes, D. N. & Gill, C. A. (1998). Comparing measures of sample skewness and kurtosis.
    The Statistician 47(1), 183–189.

    Examples
    --------
    >>> round(skewness_se(15), 3)
    0.58
    """
    return math.sqrt(6.0 * n * (n - 1) / ((n - 2) * (n + 1) * (n + 3))) if n >= 3 else math.inf


def _strongly_skewed(n: int, skewness: float | None) -> bool:
    """|G1| beyond the common-practice limit and beyond SKEW_SE_MULTIPLE standard errors."""
    if skewness is None or n < SKEW_MIN_N:
        return False
    return abs(skewness) > max(SKEW_LIMIT, SKEW_SE_MULTIPLE * skewness_se(n))


GROUP_ROW_KEYS = ("group", "n", "mean", "sd", "median", "min", "max", "skewness")


def _group_row(summary_row: dict) -> dict:
    """One group row of a comparison entry, taken from the summaries section's row."""
    row = {key: summary_row[key] for key in GROUP_ROW_KEYS}
    if row["n"] < 2:
        row["sd"] = None
    row["strongly_skewed"] = _strongly_skewed(row["n"], row["skewness"])
    return row


def _summary_group_rows(groups: Sequence[str], summaries: Sequence) -> list[dict]:
    """The group rows from exact summaries (streamed data: every row, not the sample)."""
    return [
        {
            "group": g,
            "n": s.n,
            "mean": _num(s.mean),
            "sd": _num(s.sd) if s.n > 1 else None,
            "median": _num(s.median),
            "min": _num(s.min),
            "max": _num(s.max),
            "skewness": _num(s.skewness),
            "strongly_skewed": _strongly_skewed(s.n, _num(s.skewness)),
        }
        for g, s in zip(groups, summaries, strict=True)
    ]


def _group_rows(groups: Sequence[str], samples: Sequence[Sample]) -> list[dict]:
    rows = []
    for g, s in zip(groups, samples, strict=True):
        skew = _skewness(s)
        rows.append(
            {
                "group": g,
                "n": s.n,
                "mean": _num(s.mean),
                "sd": _num(s.sd) if s.n > 1 else None,
                "median": _num(np.median(s.sorted)) if s.n else None,
                "min": _num(s.sorted[0]) if s.n else None,
                "max": _num(s.sorted[-1]) if s.n else None,
                "skewness": skew,
                "strongly_skewed": _strongly_skewed(s.n, skew),
            }
        )
    return rows


def residual_skew_check(samples: Sequence[Sample]) -> dict:
    """Return the skewness of the pooled within-group residuals and D'Agostino's test of it.

    Notes
    -----
    Residuals e_ij = x_ij − mean_i pool the groups' shapes without their differences in
    centre; G1 is their adjusted sample skewness and the test is scipy.stats.skewtest
    (D'Agostino's Z for skewness, needs at least 8 values). With k groups the residuals have
    N − k degrees of freedom, not N; the test ignores that small loss (common practice).

    References
    ----------
    D'Agostino, R. B., Belanger, A. & D'Agostino, R. B. Jr. (1990). A suggestion for using
    powerful and informative tests of normality. The American Statistician 44(4), 316–321.

    Examples
    --------
    >>> rng = np.random.default_rng(0)
    >>> check = residual_skew_check([Sample.of(rng.lognormal(0, 1, 15)) for _ in range(5)])
    >>> check["skewed"]
    True
    """
    out = {"residual_skewness": None, "skew_test_p": None, "skewed": False}
    present = [s for s in samples if s.n]
    n = sum(s.n for s in present)
    if n < 8:
        return out
    low = min(float(s.sorted[0]) - s.mean for s in present)
    high = max(float(s.sorted[-1]) - s.mean for s in present)
    if not high - low > 0:
        return out
    with np.errstate(all="ignore"):  # cubes of values near 1e75 overflow: then None below
        g1 = _pooled_residual_skew(present, n)
        skew = _num(g1 * math.sqrt(n * (n - 1.0)) / (n - 2.0))  # adjusted G1
        p = _num(_skew_test_p(g1, n))
    out.update(residual_skewness=skew, skew_test_p=p)
    out["skewed"] = bool(
        skew is not None and abs(skew) > SKEW_LIMIT and p is not None and p < SKEW_TEST_ALPHA
    )
    return out


def _pooled_residual_skew(samples: Sequence[Sample], n: int) -> float:
    """Return g1 = m3 / m2^1.5 of the residuals x − mean of every group pooled, computed group
    by group (no pooled copy): as scipy.stats.skew(residuals) on the concatenated residuals,
    central moments about the residuals' own mean (zero up to rounding)."""
    centre = sum(float(np.sum(s.sorted - s.mean)) for s in samples) / n
    m2 = m3 = 0.0
    for s in samples:
        d = s.sorted - (s.mean + centre)
        square = d * d
        m2 += float(np.sum(square))
        m3 += float(np.dot(square, d))
    m2, m3 = m2 / n, m3 / n
    return m3 / m2**1.5 if m2 > 0 else math.nan


def _skew_test_p(g1: float, n: int) -> float:
    """Two-sided p of D'Agostino's skewness test from the sample skewness g1 of n ≥ 8 values
    (the transformation scipy.stats.skewtest uses)."""
    y = g1 * math.sqrt(((n + 1) * (n + 3)) / (6.0 * (n - 2)))
    beta2 = (3.0 * (n * n + 27 * n - 70) * (n + 1) * (n + 3)) / (
        (n - 2.0) * (n + 5) * (n + 7) * (n + 9)
    )
    w2 = -1 + math.sqrt(2 * (beta2 - 1))
    delta = 1 / math.sqrt(0.5 * math.log(w2))
    alpha = math.sqrt(2.0 / (w2 - 1))
    y = 1.0 if y == 0 else y
    z = delta * math.log(y / alpha + math.sqrt((y / alpha) ** 2 + 1))
    return 2 * norm_sf(abs(z))


def _omnibus(
    samples: list[Sample],
    shared: SharedRanks,
    moments: list[GroupMoments] | None = None,
    spread_moments=None,
) -> tuple[list[dict], dict]:
    """The overall tests. Both ANOVAs from ``moments`` and Brown–Forsythe from
    ``spread_moments`` (n, mean, variance of |x − median| per group) when given (streamed
    data: every row); otherwise, and for Kruskal–Wallis always, from the values in
    ``samples`` (the bounded sample on streamed data)."""
    arrays = [s.sorted for s in samples]
    # Both ANOVAs from one set of moments (each pass over a million values costs ~10 ms).
    groups = moments if moments is not None else moments_of(arrays)
    anova = one_way_anova(groups)
    welch = welch_anova(groups)
    kw = kruskal_wallis(arrays, ranks=shared.ranks, runs=shared.runs)
    if spread_moments is None:
        spread = spread_test(arrays, center="median")
    else:
        spread = brown_forsythe_from_stats(*zip(*spread_moments, strict=True))
    rows = [
        {
            "test": TEST_ANOVA,
            "statistic": _num(anova.statistic),
            "df1": _num(anova.df1),
            "df2": _num(anova.df2),
            "p": _num(anova.pvalue),
            "effect_name": "omega²",
            "effect": _num(anova.omega_squared),
            "effect_label": size_label("omega²", anova.omega_squared),
            "eta_squared": _num(anova.eta_squared),
        },
        {
            "test": TEST_WELCH,
            "statistic": _num(welch.statistic),
            "df1": _num(welch.df1),
            "df2": _num(welch.df2),
            "p": _num(welch.pvalue),
            "effect_name": "omega² (from Welch's F)",
            "effect": _num(welch.omega_squared),
            "effect_label": size_label("omega²", welch.omega_squared),
        },
        {
            "test": TEST_KW,
            "statistic": _num(kw.statistic),
            "df1": _num(kw.df),
            "df2": None,
            "p": _num(kw.pvalue),
            "effect_name": "epsilon²",
            "effect": _num(kw.epsilon_squared),
            "effect_label": size_label("epsilon²", kw.epsilon_squared),
        },
    ]
    spread_row = {
        "test": "Brown–Forsythe",
        "statistic": _num(spread.statistic),
        "df1": _num(spread.df1),
        "df2": _num(spread.df2),
        "p": _num(spread.pvalue),
    }
    return rows, spread_row


def _choose_lead(
    group_rows: list[dict], spread_row: dict, skew: dict, alpha: float
) -> tuple[str, str, dict]:
    """Return the lead test, the sentence saying why, and the decisions as data (lead_basis).

    ``skew`` is :func:`residual_skew_check` of the compared groups.
    """
    ns = [r["n"] for r in group_rows]
    sds = [r["sd"] for r in group_rows]
    ratio = max(sds) / min(sds) if min(sds) > 0 else math.inf
    spread_p = spread_row["p"]
    unequal_p = spread_p is not None and spread_p < alpha
    unequal_ratio = ratio > SD_RATIO_LIMIT
    size_ratio = max(ns) / min(ns)
    basis = {
        "unequal_spread": bool(unequal_p or unequal_ratio),
        "sd_ratio": _num(ratio),
        "unbalanced_sizes": bool(size_ratio > SIZE_RATIO_LIMIT),
        "skewed": bool(skew["skewed"] and min(ns) < SMALL_GROUP),
        "residual_skewness": skew["residual_skewness"],
        "skew_test_p": skew["skew_test_p"],
        "skew_test_alpha": SKEW_TEST_ALPHA,
    }
    if basis["skewed"]:
        return (
            TEST_KW,
            (
                "Kruskal–Wallis leads because the values are strongly skewed within the groups "
                f"(skewness of the values around their group means "
                f"{skew['residual_skewness']:.2f}, beyond ±{SKEW_LIMIT:g} by common practice; "
                f"D'Agostino's skewness test {findings_mod.p_phrase(skew['skew_test_p'])}) and "
                f"the smallest group has only {min(ns)} values, so averages are not yet "
                "reliable; a rank test does not depend on the shape."
            ),
            basis,
        )
    reasons = []
    if unequal_p:
        reasons.append(
            f"the Brown–Forsythe test finds unequal spread ({findings_mod.p_phrase(spread_p)})"
        )
    if unequal_ratio:
        reasons.append(
            f"the largest standard deviation is {ratio:.1f} times the smallest "
            f"(more than {SD_RATIO_LIMIT:g} by common practice)"
        )
    if basis["unbalanced_sizes"]:
        reasons.append(f"group sizes are unbalanced ({min(ns)} to {max(ns)} values)")
    if reasons:
        return (
            TEST_WELCH,
            "Welch's ANOVA leads because "
            + "; ".join(reasons)
            + ". It does not assume equal spread.",
            basis,
        )
    return (
        TEST_ANOVA,
        "The one-way ANOVA leads: the groups have similar spread (Brown–Forsythe "
        f"{findings_mod.p_phrase(spread_p)}, largest to smallest SD {ratio:.1f}), similar "
        "sizes and no strong skew, so the classic test's assumptions look reasonable.",
        basis,
    )


def _subsample(sample: Sample, rng: np.random.Generator) -> Sample:
    """Return a seeded random subsample of at most HL_SAMPLE_LIMIT values (still sorted)."""
    if sample.n <= HL_SAMPLE_LIMIT:
        return sample
    picks = np.sort(rng.choice(sample.n, size=HL_SAMPLE_LIMIT, replace=False))
    return Sample.of(sample.sorted[picks])


def _pair_record(
    a: str,
    b: str,
    sa: Sample,
    sb: Sample,
    tie: float,
    settings,
    margin: float | None,
    rank_lead: bool,
    rng: np.random.Generator,
    perm: tuple[int, np.random.Generator] | None,
    summary_mode: bool,
    dominance: Dominance | None = None,
    rest=None,
    moments: tuple[Sample, Sample] | None = None,
) -> dict:
    """One pair's record. Welch's t, Hedges' g, TOST and the detectable difference use
    ``moments`` (exact on every engine; the samples themselves when not given); the rank
    statistics and the permutation test use the values of ``sa`` and ``sb``."""
    conf = settings.confidence
    reasons: dict[str, str] = {}
    ma, mb = moments if moments is not None else (sa, sb)
    wt = welch_t(ma, mb, conf)
    dom = dominance if dominance is not None else dominance_counts(sa, sb)
    mw = mann_whitney_u(sa, sb, tie_term=tie, dominance=dom)
    g = hedges_g(ma, mb, conf)
    if summary_mode:
        # Against all other rows pooled: the interval searches are skipped to keep the cost
        # linear in the number of groups; the point estimate of Cliff's delta comes from U.
        hl = None
        delta_est = _num(2 * mw.statistic / (sa.n * sb.n) - 1)
        delta = (delta_est, None, None)
        reasons["hl_shift"] = "not computed when each group is compared with all other rows"
        reasons["cliffs_delta_ci"] = reasons["hl_shift"]
    else:
        if max(sa.n, sb.n) > HL_SAMPLE_LIMIT:
            ha, hb = _subsample(sa, rng), _subsample(sb, rng)
            hl = hodges_lehmann(ha, hb, conf, rng=rng)
            reasons["hl_sample"] = (
                f"Hodges–Lehmann shift and interval from a seeded random sample of "
                f"{ha.n:,} and {hb.n:,} values (of {sa.n:,} and {sb.n:,}); the interval is "
                "valid but wider than one from every value"
            )
        else:
            hl = hodges_lehmann(sa, sb, conf, rng=rng, tie_term=tie)
        cd = cliffs_delta(sa, sb, conf, dominance=dom)
        delta = (_num(cd.estimate), _num(cd.ci_low), _num(cd.ci_high))
        if cd.reason:
            reasons["cliffs_delta_ci"] = cd.reason
            if cd.ci_low is None:  # e.g. complete separation: the reason names both ends
                reasons["cliffs_delta_ci_low"] = reasons["cliffs_delta_ci_high"] = cd.reason
        if hl.reason:
            reasons["hl_ci"] = hl.reason
    detect = detectable_difference(ma, mb, alpha=settings.alpha, power=0.8)
    rec: dict = {
        "a": a,
        "b": b,
        "n_a": ma.n,
        "n_b": mb.n,
        "welch_t": _num(wt.statistic),
        "welch_df": _num(wt.df),
        "welch_p": _num(wt.pvalue),
        "mean_difference": _num(wt.difference),
        "mean_ci_low": _num(wt.ci_low),
        "mean_ci_high": _num(wt.ci_high),
        "hedges_g": _num(g.estimate),
        "hedges_g_ci_low": _num(g.ci_low),
        "hedges_g_ci_high": _num(g.ci_high),
        "mw_u": _num(mw.statistic),
        "mw_method": mw.method,
        "mw_p": _num(mw.pvalue),
        "hl_shift": _num(hl.estimate) if hl else None,
        "hl_ci_low": _num(hl.ci_low) if hl else None,
        "hl_ci_high": _num(hl.ci_high) if hl else None,
        "cliffs_delta": delta[0],
        "cliffs_delta_ci_low": delta[1],
        "cliffs_delta_ci_high": delta[2],
        "detectable_difference": _num(detect),
        "margin": margin,
        "tost_p": None,
        "permutation_p": None,
    }
    if g.reason:
        reasons["hedges_g"] = g.reason
    if margin is not None:
        eq = tost_welch(ma, mb, margin, alpha=settings.alpha)
        rec["tost_p"] = _num(eq.pvalue)
    else:
        reasons["equivalent"] = "no equivalence margin is set for this measure"
    if perm is None:
        reasons["permutation_p"] = "no permutation test requested (permutations = 0)"
    else:
        count, gen = perm
        if count * (sa.n + sb.n) <= PERMUTATION_BUDGET:
            other = rest() if rest is not None else sb  # the pooled rest, built only when used
            rec["permutation_p"] = _num(permutation_test(sa, other, count, gen).pvalue)
        else:
            reasons["permutation_p"] = (
                f"groups too large for {count} permutations within the time budget; "
                "the large-sample tests are reliable at this size"
            )
    if rank_lead:
        rec.update(
            test=PAIR_MW,
            statistic=rec["mw_u"],
            df=None,
            p=rec["mw_p"],
            estimate_name="Hodges–Lehmann shift",
            estimate=rec["hl_shift"],
            ci_low=rec["hl_ci_low"],
            ci_high=rec["hl_ci_high"],
            effect_name="Cliff's delta",
            effect=delta[0],
            effect_ci_low=delta[1],
            effect_ci_high=delta[2],
        )
        reasons.setdefault("df", "a rank test has no degrees of freedom")
        if hl is None:
            # Without the shift, the summary falls back to the difference in means.
            rec.update(
                estimate_name="difference in means",
                estimate=rec["mean_difference"],
                ci_low=rec["mean_ci_low"],
                ci_high=rec["mean_ci_high"],
            )
    else:
        rec.update(
            test=PAIR_WELCH,
            statistic=rec["welch_t"],
            df=rec["welch_df"],
            p=rec["welch_p"],
            estimate_name="difference in means",
            estimate=rec["mean_difference"],
            ci_low=rec["mean_ci_low"],
            ci_high=rec["mean_ci_high"],
            effect_name="Hedges' g",
            effect=rec["hedges_g"],
            effect_ci_low=rec["hedges_g_ci_low"],
            effect_ci_high=rec["hedges_g_ci_high"],
        )
    rec["effect_label"] = size_label(rec["effect_name"], rec["effect"])
    rec["null_reasons"] = reasons
    return rec


def _empty_entry(measure: str, reason: str, excluded: list[dict], group_rows: list[dict]) -> dict:
    return {
        "measure": measure,
        "lead_test": None,
        "lead_reason": reason,
        "lead_basis": None,
        "omnibus": [],
        "spread_test": None,
        "pairs": [],
        "letters": {},
        "letters_reason": reason,
        "findings": [],
        "groups": group_rows,
        "not_comparable": excluded,
        "mode": "none",
        "family": None,
        "permutation": None,
        "reason": reason,
    }


def _measure_entry(
    table,
    measure: str,
    settings,
    rng: np.random.Generator,
    perm_seed: int | None,
    balance: dict | None = None,
    pieces=None,
    summaries: dict | None = None,
) -> dict:
    """Return one measure's comparison entry.

    ``pieces`` (streamed data only) are the measure's exact summaries; then group rows and
    every moment-based statistic use all rows, and the rank statistics the bounded sample
    held in ``table`` (listed under ``from_sample``). ``summaries`` maps (measure, group) to
    the summaries section's row, whose numbers the group rows then repeat."""
    spec = table.spec
    groups = list(table.groups)
    excluded: list[dict] = []
    keep: list[int] = []
    # (The groups' values in one array are let go once each group has its sorted copy.)
    samples_all = [Sample.of(v) for v in table.by_group(measure)]
    exact = getattr(table, "exact", None)
    if exact is None:
        moments_all = samples_all
        lows = [float(s.sorted[0]) if s.n else None for s in samples_all]
        biggest = max(
            (max(-float(s.sorted[0]), float(s.sorted[-1])) for s in samples_all if s.n),
            default=0.0,
        )
    else:
        moments_all = [moment_sample(*m) for m in exact.group_moments(measure)]
        every = exact.moments[measure]
        lows = [float(v) if n else None for n, v in zip(every.n, every.low, strict=True)]
        seen = every.n > 0
        biggest = float(
            np.max(np.abs(np.concatenate([every.low[seen], every.high[seen]])), initial=0.0)
        )

    def rows_of(index: list[int]) -> list[dict]:
        names = [groups[i] for i in index]
        if summaries is not None:
            # The summaries section's own numbers: one summary core for every engine.
            return [_group_row(summaries[(measure, name)]) for name in names]
        if pieces is None:
            return _group_rows(names, [samples_all[i] for i in index])
        return _summary_group_rows(names, [pieces.summaries[i] for i in index])

    if biggest > SCALE_LIMIT or 0 < biggest < 1 / SCALE_LIMIT:
        # Squares of such values overflow or vanish in double precision, so variances and
        # every test built on them would be meaningless; say so rather than print nonsense.
        reason = (
            f"the values of '{measure}' are too {'large' if biggest > 1 else 'small'} "
            f"(largest magnitude {biggest:.3g}) for sums of squares in double precision; "
            "express the measure in other units to compare groups"
        )
        entry = _empty_entry(measure, reason, [], rows_of(list(range(len(groups)))))
        entry["findings"] = findings_mod.measure_findings(entry, settings)
        return entry
    # Groups under the manifest's min_group_size are shown in the summaries but left out of
    # every test and headline: a few values give intervals too wide to say anything.
    smallest = max(2, getattr(spec, "min_group_size", 2))
    for i, s in enumerate(moments_all):
        if s.n < 2:
            excluded.append(
                {"group": groups[i], "n": s.n, "reason": f"fewer than 2 values (n = {s.n})"}
            )
        elif not s.variance > 0:
            excluded.append(
                {
                    "group": groups[i],
                    "n": s.n,
                    "reason": f"no variation: all {s.n} values are {lows[i]:g}",
                    "value": _num(lows[i]),
                }
            )
        elif s.n < smallest:
            excluded.append(
                {
                    "group": groups[i],
                    "n": s.n,
                    "reason": (
                        f"only {s.n} values, fewer than min_group_size = {smallest}; the group is "
                        "shown in the summaries but not tested"
                    ),
                }
            )
        else:
            keep.append(i)
    names = [groups[i] for i in keep]
    samples = [samples_all[i] for i in keep]
    moments = [moments_all[i] for i in keep]
    group_rows = rows_of(keep)
    if len(keep) < 2:
        reason = (
            f"fewer than two groups have at least {smallest} values with some variation "
            "(min_group_size), so groups cannot be compared for this measure"
        )
        entry = _empty_entry(measure, reason, excluded, group_rows)
        entry["findings"] = findings_mod.measure_findings(entry, settings)
        return entry

    # One pooled sort per measure gives the mid-ranks (Kruskal–Wallis reuses them), and every
    # pair's dominance counts and tie term as lookups (Mann–Whitney, Cliff's delta, the shift).
    shared = SharedRanks.of(samples)
    spread_moments = anova_moments = None
    if pieces is not None and pieces.spread is not None:
        dev = pieces.spread
        spread_moments = [
            (int(dev.n[i]), float(dev.means[i]), float(dev.m2[i]) / (int(dev.n[i]) - 1))
            for i in keep
        ]
    if exact is not None:
        # Means relative to the column's pivot (as merged), so a large offset costs no digits.
        every = exact.moments[measure]
        anova_moments = [
            GroupMoments(int(every.n[i]), float(every.mean[i]), float(every.m2[i])) for i in keep
        ]
    omnibus, spread_row = _omnibus(samples, shared, anova_moments, spread_moments)
    lead, lead_reason, lead_basis = _choose_lead(
        group_rows, spread_row, residual_skew_check(samples), settings.alpha
    )
    rank_lead = lead == TEST_KW

    margin = spec.equivalence_margin.get(measure)
    reference = spec.reference
    k = len(samples)
    perm = None
    if spec.permutations > 0 and perm_seed is not None:
        perm = (spec.permutations, np.random.default_rng([perm_seed, spec.measures.index(measure)]))

    ref_index = names.index(reference) if reference in names else None
    pairs_idx: list[tuple[int, int]]
    summary_mode = False
    notes: list[str] = []
    if reference is not None and ref_index is None:
        why = next((e["reason"] for e in excluded if e["group"] == reference), None)
        notes.append(
            f"The reference group '{reference}' "
            + (f"was left out ({why})" if why else "does not occur in this measure's data")
            + "; all pairs are compared instead."
        )
    if ref_index is not None:
        mode = "reference"
        pairs_idx = [(i, ref_index) for i in range(k) if i != ref_index]
        family_text = f"each of {k - 1} groups against the reference group '{reference}'"
    elif k <= MAX_PAIRWISE_GROUPS:
        mode = "all pairs"
        pairs_idx = [(i, j) for i in range(k) for j in range(i + 1, k)]
        family_text = "the 2 groups" if k == 2 else f"all {len(pairs_idx)} pairs of {k} groups"
    else:
        mode = "each group vs the rest"
        summary_mode = True
        pairs_idx = []
        family_text = (
            f"each of {k} groups against all other rows pooled (more than "
            f"{MAX_PAIRWISE_GROUPS} groups: {k * (k - 1) // 2} pairs would be too many to show)"
        )

    records: list[dict] = []
    if summary_mode:
        # One sort of every value serves all groups: each group's "rest" is everything else,
        # so its dominance counts are global counts minus the group's own, its moments come
        # from the totals, and the pooled ties are the same for every group. Cost O(N log N)
        # instead of one sort of N values per group.
        everything = np.sort(np.concatenate([smp.sorted for smp in samples]))
        _, tie_counts = np.unique(everything, return_counts=True)
        tie_counts = tie_counts[tie_counts > 1].astype(float)
        tie_all = float(np.sum(tie_counts**3 - tie_counts))
        rank_totals = _totals(samples)
        moment_totals = rank_totals if moments is samples else _totals(moments)
        for i in range(k):
            rest_s = _rest_sample(i, *rank_totals)
            rest_m = rest_s if moments is samples else _rest_sample(i, *moment_totals)
            own = samples[i].sorted
            values, count = distinct_values(own)
            dom = Dominance(  # the group against the rest: only U is needed here
                count,
                np.searchsorted(everything, values, side="left")
                - np.searchsorted(own, values, side="left"),
                np.searchsorted(everything, values, side="right")
                - np.searchsorted(own, values, side="right"),
            )
            records.append(
                _pair_record(
                    names[i],
                    "all other rows",
                    samples[i],
                    rest_s,
                    tie_all,
                    settings,
                    margin,
                    rank_lead,
                    rng,
                    perm,
                    True,
                    dominance=dom,
                    rest=lambda i=i: Sample.of(
                        np.concatenate([samples[j].sorted for j in range(k) if j != i])
                    ),
                    moments=(moments[i], rest_m),
                )
            )
    else:
        for i, j in pairs_idx:
            records.append(
                _pair_record(
                    names[i],
                    names[j],
                    samples[i],
                    samples[j],
                    shared.tie_term(i, j),
                    settings,
                    margin,
                    rank_lead,
                    rng,
                    perm,
                    False,
                    dominance=shared.dominance(i, j),
                    moments=(moments[i], moments[j]),
                )
            )

    # Family tests that control the error rate themselves, beside the adjusted lead test.
    family_p: dict[tuple[int, int], dict[str, float | None]] = {}
    if mode == "all pairs":
        for fp in tukey_hsd(moments):
            family_p.setdefault((fp.a, fp.b), {})["tukey_p"] = _num(fp.pvalue)
        for fp in games_howell(moments):
            family_p.setdefault((fp.a, fp.b), {})["games_howell_p"] = _num(fp.pvalue)
    dunnett_reason = None
    if mode == "reference":
        if k <= MAX_DUNNETT_GROUPS:
            for fp in dunnett(samples, ref_index, rng):
                family_p.setdefault((fp.a, fp.b), {})["dunnett_p"] = _num(fp.pvalue)
        else:
            dunnett_reason = f"Dunnett's test is computed for at most {MAX_DUNNETT_GROUPS} groups"
    for rec, key in zip(records, pairs_idx or [None] * len(records), strict=True):
        got = family_p.get(key, {}) if key is not None else {}
        for name in ("tukey_p", "games_howell_p", "dunnett_p"):
            rec[name] = got.get(name)
            if rec[name] is None:
                if name == "dunnett_p" and mode == "reference" and dunnett_reason:
                    why = dunnett_reason
                elif name == "dunnett_p":
                    why = "Dunnett's test applies only when a reference group is set"
                else:
                    why = "computed only when all pairs are compared"
                rec["null_reasons"][name] = why

    method = settings.adjust
    for key, out in (
        ("p", "p_adjusted"),
        ("welch_p", "welch_p_adjusted"),
        ("mw_p", "mw_p_adjusted"),
        ("tost_p", "tost_p_adjusted"),
        ("permutation_p", "permutation_p_adjusted"),
    ):
        adjusted = adjust_pvalues([r[key] for r in records], method)
        for r, q in zip(records, adjusted, strict=True):
            r[out] = _num(q)
            if r[out] is None and r[key] is None:
                # Every null number carries its reason: that of the unadjusted p, if known.
                why = r["null_reasons"].get(key) or _NULL_P_REASONS.get(key, "not computed")
                r["null_reasons"].setdefault(key, why)
                r["null_reasons"].setdefault(out, why)
    alpha = settings.alpha
    for r in records:
        r["significant"] = bool(r["p_adjusted"] is not None and r["p_adjusted"] < alpha)
        if margin is None:
            r["equivalent"] = None
            r["null_reasons"].setdefault("margin", _NULL_P_REASONS["tost_p"])
        else:
            r["equivalent"] = bool(
                r["tost_p_adjusted"] is not None and r["tost_p_adjusted"] < alpha
            )
        r["conclusion"], r["conclusion_reason"] = _conclusion(r, margin, alpha)
        _sensitivity_disagreement(r, rank_lead, mode, alpha)

    centre_key = "median" if rank_lead else "mean"
    by_centre = sorted(group_rows, key=lambda row: -(row[centre_key] or 0.0))
    if mode == "all pairs":
        different = [(r["a"], r["b"]) for r in records if r["significant"]]
        letters = compact_letters([row["group"] for row in by_centre], different)
        letters_reason = None
    else:
        letters = {}
        letters_reason = "letters need every pair compared; " + (
            "this measure compares each group with the reference"
            if mode == "reference"
            else "there are too many groups to compare every pair"
        )

    entry = {
        "measure": measure,
        "lead_test": lead,
        "lead_reason": lead_reason,
        "lead_basis": lead_basis,
        "omnibus": omnibus,
        "spread_test": spread_row,
        "pairs": records,
        "letters": letters,
        "letters_reason": letters_reason,
        "findings": [],
        "groups": group_rows,
        "centre": centre_key,
        "not_comparable": excluded,
        "mode": mode,
        "pair_test": PAIR_MW if rank_lead else PAIR_WELCH,
        "family": {
            "description": family_text,
            "size": len(records),
            "adjust": method,
            "adjust_name": METHOD_NAMES[method],
        },
        "margin": margin,
        "better": spec.better.get(measure),  # which way is good, from the manifest (or None)
        "reference": names[ref_index] if ref_index is not None else None,
        "permutation": (
            {"seed": perm_seed, "manifest_seed": settings.seed, "count": spec.permutations}
            if perm is not None
            else None
        ),
        "notes": notes,
        "alpha": alpha,
        "confidence": settings.confidence,
        "exact_max_n": EXACT_MAX_N,
        "reason": None,
    }
    if balance is not None:
        entry["x_balance"] = balance  # the findings warn when the groups differ in x
    entry["findings"] = findings_mod.measure_findings(entry, settings)
    if exact is not None:
        _mark_sampled(entry, rank_lead)
    return entry


# What the bounded row sample feeds on streamed data (everything else, Brown–Forsythe and so
# the lead test included, uses every row): the rank statistics, Dunnett's test (from the
# values), the permutation test and what is decided from them.
SAMPLED_PAIR_KEYS = (
    "mw_u", "mw_method", "mw_p", "mw_p_adjusted", "hl_shift", "hl_ci_low", "hl_ci_high",
    "cliffs_delta", "cliffs_delta_ci_low", "cliffs_delta_ci_high", "dunnett_p",
    "permutation_p", "permutation_p_adjusted", "disagree", "null_reasons",
)  # fmt: skip
# ...and, when a rank test leads, the lead columns of each pair.
SAMPLED_LEAD_KEYS = (
    "statistic", "df", "p", "p_adjusted", "estimate", "ci_low", "ci_high", "effect",
    "effect_ci_low", "effect_ci_high", "effect_label", "significant", "conclusion",
    "conclusion_reason",
)  # fmt: skip


def _mark_sampled(entry: dict, rank_lead: bool) -> None:
    """List, in ``from_sample`` of each dict, the keys whose values came from the sample."""
    entry["from_sample"] = ["findings"] + (["letters"] if rank_lead else [])
    if entry.get("lead_basis"):
        # The residual skew check reads the values (pooled residuals), so it uses the sample.
        entry["lead_basis"]["from_sample"] = ["residual_skewness", "skew_test_p", "skewed"]
    for row in entry["omnibus"]:
        if row["test"] == TEST_KW:
            row["from_sample"] = sorted(k for k in row if k != "test")
    keys = sorted(SAMPLED_PAIR_KEYS + (SAMPLED_LEAD_KEYS if rank_lead else ()))
    for rec in entry["pairs"]:
        rec["from_sample"] = keys


def _totals(samples: Sequence[Sample]) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Return the sizes, means and sums of squared deviations of the groups, as arrays."""
    ns = np.array([smp.n for smp in samples], dtype=float)
    means = np.array([smp.mean for smp in samples], dtype=float)
    ss = np.array([smp.variance * (smp.n - 1) if smp.n > 1 else 0.0 for smp in samples])
    return ns, means, ss


def _rest_sample(i: int, ns: np.ndarray, means: np.ndarray, ss: np.ndarray) -> Sample:
    """Return the moments of every group but ``i`` pooled, without listing those values.

    Notes: mean_r = Σ_{j≠i} n_j mean_j / n_r and, by the pooled-moments identity of Chan,
    Golub & LeVeque (1979), SS_r = Σ_{j≠i} [SS_j + n_j (mean_j − mean_r)²] (centred, so no
    cancellation). The sorted values are left empty: the each-vs-rest path never needs them
    (dominance counts come from the global sort; the permutation test builds the rest itself).
    """
    keep = np.ones(ns.size, dtype=bool)
    keep[i] = False
    n_rest = int(ns[keep].sum())
    if n_rest <= 0:
        return Sample(np.zeros(0), 0, math.nan, math.nan)
    mean_rest = float(np.dot(ns[keep], means[keep]) / n_rest)
    spread = float(ss[keep].sum() + np.dot(ns[keep], (means[keep] - mean_rest) ** 2))
    return Sample(np.zeros(0), n_rest, mean_rest, spread / (n_rest - 1) if n_rest > 1 else math.nan)


def _conclusion(r: dict, margin: float | None, alpha: float) -> tuple[str, str]:
    """differs / equivalent / inconclusive / no clear difference, with a short reason."""
    if r["significant"]:
        return "differs", "adjusted p below alpha"
    if r["equivalent"]:
        return "equivalent", f"two one-sided tests show the difference lies within ±{margin:g}"
    few = min(r["n_a"], r["n_b"]) < FEW_ROWS
    detect = r["detectable_difference"]
    if margin is not None:
        why = "too few rows" if few else "too much spread for the number of rows"
        return "inconclusive", (
            f"neither a difference nor equivalence within ±{margin:g} could be shown ({why})"
        )
    if few:
        return "inconclusive", "too few rows to detect anything but a large difference"
    return "no clear difference", (
        f"not significant; only differences of about {detect:.3g} or more would reliably be "
        "detected"
        if detect is not None
        else "not significant"
    )


def _sensitivity_disagreement(r: dict, rank_lead: bool, mode: str, alpha: float) -> None:
    """Record which sensitivity tests reach the other verdict at alpha than the lead test."""
    other = "welch_p_adjusted" if rank_lead else "mw_p_adjusted"
    checks = {other: r.get(other)}
    for name in ("tukey_p", "games_howell_p", "dunnett_p", "permutation_p_adjusted"):
        if r.get(name) is not None:
            checks[name] = r[name]
    r["disagree"] = sorted(
        name for name, p in checks.items() if p is not None and (p < alpha) != r["significant"]
    )


def compute(table, settings, rng: np.random.Generator, partial: dict | None = None) -> dict:
    """Return ``{"comparisons": [...]}``: one entry per measure, in the manifest's order.

    ``partial`` (results already computed for this dataset): when it holds the summaries
    section's rows, the group rows (n, mean, SD, median, extremes, skewness) repeat them, so
    a number is computed once; without them this section computes its own.
    """
    summaries = None
    if partial and partial.get("summaries"):
        summaries = {
            (row["measure"], row["group"]): row
            for row in partial["summaries"]
            if row["group"] is not None
        }
    spec = table.spec
    perm_seed = int(rng.integers(0, 2**31 - 1)) if spec.permutations > 0 else None
    # One child generator per measure: results do not depend on the order measures are run,
    # so large tables can run them on two threads (the work is numpy, which releases the GIL).
    children = rng.spawn(len(spec.measures))
    jobs = list(zip(spec.measures, children, strict=True))
    balance = _x_balance(table, settings)
    exact = getattr(table, "exact", None)
    # Streamed data: the exact summaries (the summaries section asked for the same ones, so
    # this reads no more rows), fetched here before any thread starts.
    pieces = exact.measures(spec.measures, settings.confidence) if exact is not None else {}

    def entry_for(job) -> dict:
        return _measure_entry(
            table, job[0], settings, job[1], perm_seed, balance, pieces.get(job[0]), summaries
        )

    entries = map_measures(entry_for, jobs, table.n_rows)
    if balance is not None:
        for entry in entries:
            entry["x_balance"] = balance  # also on measures that could not be compared
    return {"comparisons": entries}


_NULL_P_REASONS = {
    "tost_p": "no equivalence margin is set for this measure",
    "permutation_p": "no permutation test requested (permutations = 0)",
}


def _x_balance(table, settings) -> dict | None:
    """Return whether the groups differ in the explanatory column ``x`` (Kruskal–Wallis).

    When they do, a difference in a measure may come partly from ``x`` (a confounder): the
    night shift picks bigger orders, the late sowings got warmer weather. None without ``x``.
    """
    x = table.spec.x
    if not x or x in table.spec.measures:
        return None
    arrays = [a[~np.isnan(a)] for a in table.by_group(x)]
    usable = [(g, a) for g, a in zip(table.groups, arrays, strict=True) if a.size >= 2]
    if len(usable) < 2 or np.ptp(np.concatenate([a for _, a in usable])) == 0:
        return None
    # Mid-ranks from one merge of the groups' sorted values (at 10M rows a pooled rank
    # computation from scratch costs seconds).
    samples = [Sample.of(a) for _, a in usable]
    ranks, runs = pooled_ranks(samples)
    kw = kruskal_wallis([s.sorted for s in samples], ranks=ranks, runs=runs)
    means = {g: float(np.mean(a)) for g, a in usable}
    exact = getattr(table, "exact", None)
    if exact is not None and x in exact.moments:
        every = dict(zip(table.groups, exact.group_moments(x), strict=True))
        means = {g: every[g][1] for g, _ in usable}
    low, high = min(means, key=means.get), max(means, key=means.get)
    return {
        "x": x,
        "test": TEST_KW,
        "statistic": _num(kw.statistic),
        "df": _num(kw.df),
        "p": _num(kw.pvalue),
        "differs": bool(kw.pvalue is not None and kw.pvalue < settings.alpha),
        "lowest": {"group": low, "mean": means[low]},
        "highest": {"group": high, "mean": means[high]},
        **({"from_sample": ["df", "differs", "p", "statistic"]} if exact is not None else {}),
    }


def charts(dataset: dict, settings) -> list:
    """Return the forest and p-value matrix charts of every measure (ids cmp-{mi}-...)."""
    from ..charts import comparisons as chart_mod

    out = []
    for mi, entry in enumerate(dataset.get("comparisons", [])):
        out.extend(chart_mod.measure_charts(entry, mi, settings))
    return out


def tables(dataset: dict, settings) -> list[DataTable]:
    """Return the omnibus, pairs, letters and not-comparable tables (ids cmp-{mi}-...)."""
    out: list[DataTable] = []
    for mi, entry in enumerate(dataset.get("comparisons", [])):
        out.extend(measure_tables(entry, mi, dataset))
    return out


OMNIBUS_COLUMNS = (
    ("test", "Test"),
    ("statistic", "Statistic"),
    ("df1", "df 1"),
    ("df2", "df 2"),
    ("p", "p"),
    ("effect_name", "Effect size"),
    ("effect", "Value"),
    ("effect_label", "Size (rule of thumb)"),
)
PAIR_COLUMNS = (
    ("a", "Group"),
    ("b", "Compared with"),
    ("n_a", "n"),
    ("n_b", "n (compared)"),
    ("test", "Test"),
    ("estimate_name", "Estimate"),
    ("estimate", "Value"),
    ("ci_low", "CI low"),
    ("ci_high", "CI high"),
    ("p", "p"),
    ("p_adjusted", "Adjusted p"),
    ("effect_name", "Effect size"),
    ("effect", "Effect"),
    ("effect_ci_low", "Effect CI low"),
    ("effect_ci_high", "Effect CI high"),
    ("effect_label", "Size (rule of thumb)"),
    ("detectable_difference", "Detectable difference (80% power)"),
    ("tost_p_adjusted", "Equivalence adjusted p"),
    ("equivalent", "Equivalent"),
    ("conclusion", "Verdict"),
    ("welch_p_adjusted", "Welch adjusted p"),
    ("mw_p_adjusted", "Mann–Whitney adjusted p"),
    ("tukey_p", "Tukey HSD p"),
    ("games_howell_p", "Games–Howell p"),
    ("dunnett_p", "Dunnett p"),
    ("permutation_p", "Permutation p"),
    ("permutation_p_adjusted", "Permutation adjusted p"),
)


def _cell(value):
    """Table cells: yes/no for booleans (so they are not shown as numbers), others as they are."""
    if isinstance(value, bool):
        return "yes" if value else "no"
    return value


def measure_tables(entry: dict, mi: int, dataset: dict | None = None) -> list[DataTable]:
    """Return the tables of one measure's comparison entry (``dataset`` says whether some
    numbers came from the row sample)."""
    dataset = dataset or {}
    measure = entry["measure"]
    out = []
    if entry.get("omnibus"):
        rows = [dict(r) for r in entry["omnibus"]]
        spread = entry.get("spread_test")
        if spread:
            rows.append({**spread, "effect_name": None, "effect": None, "effect_label": None})
        out.append(
            DataTable(
                id=f"cmp-{mi}-omnibus",
                title=f"Overall tests for {measure}",
                columns=OMNIBUS_COLUMNS,
                rows=tuple(rows),
                caption="The lead test is named above; the others are a sensitivity check. "
                "Brown–Forsythe tests equal spread, not equal centres."
                + sampled_caption(dataset, "the Kruskal–Wallis test"),
            )
        )
    if entry.get("pairs"):
        family = entry.get("family") or {}
        out.append(
            DataTable(
                id=f"cmp-{mi}-pairs",
                title=f"Pairwise comparisons for {measure}",
                columns=PAIR_COLUMNS,
                rows=tuple(
                    {key: _cell(r.get(key)) for key, _ in PAIR_COLUMNS} for r in entry["pairs"]
                ),
                caption=f"Family: {family.get('description', '')}; adjusted by "
                f"{family.get('adjust_name', '')}. Tukey, Games–Howell and Dunnett p-values "
                "control the family-wise error themselves."
                + sampled_caption(
                    dataset,
                    "the Mann–Whitney, Hodges–Lehmann, Cliff's delta, Dunnett and permutation results",
                ),
            )
        )
    if entry.get("letters"):
        centre = entry.get("centre", "mean")
        rows = tuple(
            {
                "group": g["group"],
                "n": g["n"],
                "centre": g[centre],
                "letters": entry["letters"].get(g["group"], ""),
            }
            for g in sorted(entry["groups"], key=lambda g: -(g[centre] or 0.0))
        )
        out.append(
            DataTable(
                id=f"cmp-{mi}-letters",
                title=f"Groups that do not differ in {measure}",
                columns=(
                    ("group", "Group"),
                    ("n", "n"),
                    ("centre", centre.capitalize()),
                    ("letters", "Letters"),
                ),
                rows=rows,
                caption="Groups sharing a letter were not shown to differ after adjustment "
                "(compact letter display, Piepho 2004).",
            )
        )
    if entry.get("not_comparable"):
        out.append(
            DataTable(
                id=f"cmp-{mi}-excluded",
                title=f"Groups left out of the comparisons of {measure}",
                columns=(("group", "Group"), ("n", "n"), ("reason", "Reason")),
                rows=tuple(dict(r) for r in entry["not_comparable"]),
            )
        )
    return out
