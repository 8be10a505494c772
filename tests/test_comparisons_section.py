"""The comparisons section: JSON-ready output, schema, lead-test choice, adjustment, letters,
charts, layout escaping, bounded output, error-rate simulation and speed."""

from __future__ import annotations

import json
import math
from pathlib import Path

import numpy as np
import pytest

from sitebuild.ingest import IngestReport, Table
from sitebuild.manifest import DatasetSpec, SiteSettings
from sitebuild.sections import comparisons as sec

EVIL = '<script>alert("x")</script>'


def make_table(arrays, names=None, measures=("m",), reference=None, margin=None, permutations=0):
    names = names or [f"G{i}" for i in range(len(arrays))]
    codes = np.concatenate([np.full(len(v), i, np.int32) for i, v in enumerate(arrays)])
    base = np.concatenate([np.asarray(v, float) for v in arrays])
    columns = {m: base * (1 + j) for j, m in enumerate(measures)}
    spec = DatasetSpec(
        name="d",
        file="d.csv",
        path=Path("d.csv"),
        group="g",
        measures=tuple(measures),
        reference=reference,
        equivalence_margin=margin or {},
        permutations=permutations,
    )
    report = IngestReport(
        file="d.csv", sha256="", rows_read=len(codes), rows_used=len(codes), rows_dropped=0,
        drop_reasons={}, missing={}, unparsed={}, encoding="utf-8", delimiter=",",
    )  # fmt: skip
    return Table(spec=spec, groups=tuple(names), codes=codes, columns=columns, report=report)


def _walk_numbers(value):
    if isinstance(value, dict):
        for v in value.values():
            yield from _walk_numbers(v)
    elif isinstance(value, list):
        for v in value:
            yield from _walk_numbers(v)
    elif isinstance(value, float):
        yield value


def _validate(result):
    import jsonschema

    fragment = json.loads(
        (Path(sec.__file__).parents[1] / "schema" / "sections" / "comparisons.json").read_text()
    )
    schema = {
        "$schema": "https://json-schema.org/draft/2020-12/schema",
        "type": "object",
        **fragment,
    }
    jsonschema.Draft202012Validator(schema).validate(result)


@pytest.fixture(scope="module")
def mixed():
    rng = np.random.default_rng(1)
    arrays = [
        rng.normal(10.0, 1.0, 40),
        rng.normal(10.05, 1.0, 40),  # equivalent to the first within ±0.8
        rng.normal(12.0, 1.0, 40),  # clearly higher
        rng.normal(10.5, 3.0, 6),  # few rows and wide: inconclusive
        np.array([4.0]),  # not comparable: one value
        np.array([7.0, 7.0, 7.0]),  # not comparable: no variation
    ]
    names = ["North", "South", EVIL, "East & co", "Solo", "Flat"]
    table = make_table(arrays, names=names, margin={"m": 0.8}, permutations=199)
    return sec.compute(table, SiteSettings(), np.random.default_rng(5))


def test_output_is_json_ready_and_matches_schema(mixed):
    text = json.dumps(mixed, allow_nan=False)
    assert "NaN" not in text and "Infinity" not in text
    assert all(math.isfinite(v) for v in _walk_numbers(mixed))
    _validate(mixed)


def test_contract_keys_are_present(mixed):
    entry = mixed["comparisons"][0]
    for key in ("measure", "lead_test", "lead_reason", "omnibus", "pairs", "letters", "findings"):
        assert key in entry
    for o in entry["omnibus"]:
        assert set(o) >= {"test", "statistic", "df1", "df2", "p", "effect_name", "effect"}
    for p in entry["pairs"]:
        assert set(p) >= {
            "a", "b", "test", "statistic", "df", "p", "p_adjusted", "estimate_name", "estimate",
            "ci_low", "ci_high", "effect_name", "effect", "effect_ci_low", "effect_ci_high",
            "detectable_difference", "equivalent",
        }  # fmt: skip


def test_null_numbers_carry_a_reason(mixed):
    for p in mixed["comparisons"][0]["pairs"]:
        for key in ("tukey_p", "games_howell_p", "dunnett_p", "permutation_p", "df"):
            if p.get(key) is None:
                assert key in p["null_reasons"], key


def test_groups_without_two_varying_values_are_listed_with_reasons(mixed):
    entry = mixed["comparisons"][0]
    reasons = {e["group"]: e["reason"] for e in entry["not_comparable"]}
    assert "fewer than 2 values" in reasons["Solo"]
    assert "no variation" in reasons["Flat"]
    compared = {p["a"] for p in entry["pairs"]} | {p["b"] for p in entry["pairs"]}
    assert not compared & {"Solo", "Flat"}


def test_adjusted_p_matches_statsmodels_multipletests(mixed):
    # Reference: statsmodels.stats.multitest.multipletests(method="holm").
    from statsmodels.stats.multitest import multipletests

    pairs = mixed["comparisons"][0]["pairs"]
    raw = [p["p"] for p in pairs]
    ref = multipletests(raw, method="holm")[1]
    assert [p["p_adjusted"] for p in pairs] == pytest.approx(list(ref), rel=1e-12)


def test_verdicts_cover_differs_equivalent_and_inconclusive(mixed):
    pairs = {(p["a"], p["b"]): p for p in mixed["comparisons"][0]["pairs"]}
    assert pairs[("North", EVIL)]["conclusion"] == "differs"
    assert pairs[("North", "South")]["equivalent"] is True
    assert pairs[("North", "East & co")]["conclusion"] == "inconclusive"
    findings = " ".join(mixed["comparisons"][0]["findings"])
    assert "equivalent within ±0.8" in findings
    assert "inconclusive" in findings
    assert "association, not" in findings and "decision stays" in findings


def test_letters_agree_with_significant_pairs(mixed):
    entry = mixed["comparisons"][0]
    letters = entry["letters"]
    for p in entry["pairs"]:
        shares = bool(set(letters[p["a"]]) & set(letters[p["b"]]))
        assert shares == (not p["significant"])


def test_permutation_seed_and_count_are_recorded(mixed):
    perm = mixed["comparisons"][0]["permutation"]
    assert perm["count"] == 199 and isinstance(perm["seed"], int)
    again = sec.compute(
        make_table([np.arange(5.0), np.arange(5.0) + 2], margin=None, permutations=199),
        SiteSettings(),
        np.random.default_rng(5),
    )
    same = sec.compute(
        make_table([np.arange(5.0), np.arange(5.0) + 2], permutations=199),
        SiteSettings(),
        np.random.default_rng(5),
    )
    assert again == same


def test_lead_test_follows_the_documented_checks():
    rng = np.random.default_rng(2)
    similar = [rng.normal(0, 1, 40) for _ in range(3)]
    spread = [rng.normal(0, s, 40) for s in (1, 1, 4)]
    skewed = [rng.lognormal(0, 1.2, 12) for _ in range(3)]
    lead = {}
    for name, arrays in (("similar", similar), ("spread", spread), ("skewed", skewed)):
        entry = sec.compute(make_table(arrays), SiteSettings(), np.random.default_rng(1))[
            "comparisons"
        ][0]
        lead[name] = (entry["lead_test"], entry["pairs"][0]["test"])
        assert entry["lead_reason"]
    assert lead["similar"] == ("one-way ANOVA", "Welch's t-test")
    assert lead["spread"] == ("Welch's ANOVA", "Welch's t-test")
    assert lead["skewed"] == ("Kruskal–Wallis", "Mann–Whitney U")


def test_the_skewness_of_a_tiny_group_does_not_choose_the_test():
    rng = np.random.default_rng(4)
    # Three normal groups of 40 and one of 3 whose values happen to be skewed (G1 about 1.7).
    arrays = [rng.normal(0, 1, 40) for _ in range(3)] + [np.array([0.0, 0.1, 3.0])]
    entry = sec.compute(make_table(arrays), SiteSettings(), np.random.default_rng(1))[
        "comparisons"
    ][0]
    assert entry["lead_test"] != "Kruskal–Wallis", entry["lead_reason"]


def test_reference_group_gives_dunnett_and_no_letters():
    rng = np.random.default_rng(3)
    arrays = [rng.normal(i * 0.5, 1, 20) for i in range(4)]
    entry = sec.compute(
        make_table(arrays, reference="G0"), SiteSettings(), np.random.default_rng(1)
    )["comparisons"][0]
    assert entry["mode"] == "reference"
    assert [(p["a"], p["b"]) for p in entry["pairs"]] == [("G1", "G0"), ("G2", "G0"), ("G3", "G0")]
    assert all(p["dunnett_p"] is not None for p in entry["pairs"])
    assert entry["letters"] == {} and entry["letters_reason"]


def test_many_groups_are_summarised_not_paired():
    rng = np.random.default_rng(4)
    arrays = [rng.normal(0, 1, 8) for _ in range(500)]
    result = sec.compute(make_table(arrays), SiteSettings(), np.random.default_rng(1))
    entry = result["comparisons"][0]
    assert entry["mode"] == "each group vs the rest"
    assert len(entry["pairs"]) == 500  # not 124,750
    assert "pooled" in entry["family"]["description"]
    _validate(result)
    charts = sec.charts(result, SiteSettings())
    forest = next(c for c in charts if c.id == "cmp-0-forest")
    assert len(forest.spec["data"]["values"]) <= 60


def test_each_group_against_the_rest_matches_scipy_on_the_pooled_rest():
    # The each-vs-rest path never lists "the rest"; reference: scipy.stats on the listed rest.
    from scipy import stats

    rng = np.random.default_rng(9)
    arrays = [np.round(rng.normal(i % 3, 1 + (i % 4) / 4, 6 + i % 5), 1) for i in range(40)]
    result = sec.compute(make_table(arrays), SiteSettings(), np.random.default_rng(1))
    entry = result["comparisons"][0]
    assert entry["mode"] == "each group vs the rest"
    by_group = {p["a"]: p for p in entry["pairs"]}
    for i in (0, 7, 39):
        x = arrays[i]
        rest = np.concatenate([a for j, a in enumerate(arrays) if j != i])
        pair = by_group[f"G{i}"]
        welch = stats.ttest_ind(x, rest, equal_var=False)
        assert pair["welch_t"] == pytest.approx(welch.statistic, rel=1e-9)
        assert pair["welch_p"] == pytest.approx(welch.pvalue, rel=1e-9)
        assert pair["mean_difference"] == pytest.approx(x.mean() - rest.mean(), rel=1e-9, abs=1e-12)
        mw = stats.mannwhitneyu(x, rest, alternative="two-sided", method="asymptotic")
        assert pair["mw_u"] == mw.statistic
        assert pair["mw_p"] == pytest.approx(mw.pvalue, rel=1e-9)


def test_too_few_groups_is_a_reasoned_empty_entry():
    result = sec.compute(
        make_table([np.array([1.0, 2.0]), np.array([3.0])]),
        SiteSettings(),
        np.random.default_rng(1),
    )
    entry = result["comparisons"][0]
    assert entry["lead_test"] is None and entry["reason"]
    assert entry["pairs"] == [] and entry["findings"]
    _validate(result)


def test_charts_compile_and_use_only_safe_field_names(mixed):
    import vl_convert as vlc

    charts = sec.charts(mixed, SiteSettings())
    assert [c.id for c in charts] == ["cmp-0-forest", "cmp-0-pmatrix"]
    safe = {"label", "x", "low", "high", "status", "order", "row", "col", "value", "band", "text"}

    def fields(node):
        if isinstance(node, dict):
            for k, v in node.items():
                if k == "field":
                    yield v
                else:
                    yield from fields(v)
        elif isinstance(node, list):
            for v in node:
                yield from fields(v)

    for chart in charts:
        assert set(fields(chart.spec)) <= safe
        assert "<svg" in vlc.vegalite_to_svg(chart.spec)
        for row in chart.spec["data"]["values"]:
            assert set(row) <= safe


def test_layout_escapes_labels_and_shows_lead_test_first(mixed):
    from sitebuild.sections import Chart
    from sitebuild.site.render import environment

    env = environment()
    charts = {c.id: c for c in sec.charts(mixed, SiteSettings())}
    tables = {t.id: t for t in sec.tables(mixed, SiteSettings())}
    assert set(tables) == {"cmp-0-omnibus", "cmp-0-pairs", "cmp-0-letters", "cmp-0-excluded"}
    assert all(isinstance(c, Chart) for c in charts.values())
    ds = {**mixed, "name": "d"}
    html = env.get_template("sections/comparisons.html").render(
        ds=ds, measure="m", mi=0, charts=charts, tables=tables, site=SiteSettings()
    )
    assert EVIL not in html and "&lt;script&gt;" in html
    assert '<div class="comparisons"' in html
    assert html.index("Main test") < html.index("Other tests")


@pytest.mark.slow
def test_any_pair_declared_different_under_holm_stays_at_alpha():
    # Simulation: 3 groups of 15 from one normal distribution, 300 runs of the whole section.
    # With Holm the family-wise error is at most alpha = 0.05; the Monte-Carlo SD of the share
    # at 0.05 is sqrt(0.05 * 0.95 / 300) = 0.0126, so the share must stay below
    # 0.05 + 3 SD = 0.088. (About 15 s: Tukey and Games–Howell integrals dominate.)
    rng = np.random.default_rng(2024)
    runs, hits = 300, 0
    for _ in range(runs):
        arrays = [rng.normal(0, 1, 15) for _ in range(3)]
        entry = sec.compute(make_table(arrays), SiteSettings(), rng)["comparisons"][0]
        hits += any(p["significant"] for p in entry["pairs"])
    assert hits / runs <= 0.05 + 3 * math.sqrt(0.05 * 0.95 / runs)


@pytest.mark.slow
def test_large_groups_use_a_seeded_hodges_lehmann_sample():
    # Above HL_SAMPLE_LIMIT values the shift is estimated on a seeded sample; its interval must
    # still cover the exact all-values Hodges–Lehmann shift (pairwise.hodges_lehmann, checked
    # against brute force in test_pairwise.py). Timing lives in benchmarks/comparisons.py.
    from sitebuild.stats.pairwise import hodges_lehmann

    rng = np.random.default_rng(6)
    arrays = [rng.normal(10.5, 1, 20_000), rng.normal(10, 1.2, 15_000)]
    result = sec.compute(make_table(arrays), SiteSettings(), np.random.default_rng(1))
    pair = result["comparisons"][0]["pairs"][0]
    assert "seeded random sample of 2,000 and 2,000" in pair["null_reasons"]["hl_sample"]
    exact = hodges_lehmann(arrays[0], arrays[1]).estimate
    signed = exact if pair["a"] == "G0" else -exact
    assert pair["hl_ci_low"] <= signed <= pair["hl_ci_high"]
    again = sec.compute(make_table(arrays), SiteSettings(), np.random.default_rng(1))
    assert again["comparisons"][0]["pairs"][0]["hl_shift"] == pair["hl_shift"]  # seeded


def test_groups_that_differ_in_x_are_flagged_as_a_possible_confounder(tmp_path):
    import json

    import numpy as np
    from scipy import stats

    import sitebuild

    from conftest import write_project

    rng = np.random.default_rng(12)
    rows = []
    for g, shift in (("Early", 0.0), ("Late", 0.0), ("Night", 2.0)):
        for _ in range(40):
            lines = float(rng.poisson(3 + shift) + 1)
            rows.append((g, lines, 20 + 7 * lines + float(rng.normal(0, 3))))
    text = "shift,lines,time\n" + "".join(f"{g},{x!r},{y!r}\n" for g, x, y in rows)
    root = write_project(
        tmp_path / "p",
        """
        [site]
        title = "Balance"
        [[datasets]]
        name = "Picks"
        file = "d.csv"
        group = "shift"
        measures = ["time"]
        x = "lines"
        """,
        {"d.csv": text},
    )
    out = tmp_path / "site"
    sitebuild.build(root, out=out, quiet=True)
    entry = json.loads((out / "results.json").read_text("utf-8"))["datasets"][0]["comparisons"][0]
    balance = entry["x_balance"]
    # Reference: scipy.stats.kruskal on the x values of each group.
    ref = stats.kruskal(*[[x for g, x, _ in rows if g == k] for k in ("Early", "Late", "Night")])
    assert balance["p"] == pytest.approx(ref.pvalue, rel=1e-9)
    assert balance["statistic"] == pytest.approx(ref.statistic, rel=1e-9)
    assert balance["differs"] and balance["highest"]["group"] == "Night"
    text = " ".join(entry["findings"])
    assert "The groups also differ in 'lines'" in text
    assert "part of these differences may come from 'lines'" in text


def test_every_null_number_in_a_pair_has_its_reason(example_site):
    results = json.loads((example_site / "results.json").read_text(encoding="utf-8"))
    for ds in results["datasets"]:
        for entry in ds["comparisons"]:
            for pair in entry["pairs"]:
                missing = {k for k, v in pair.items() if v is None} - set(pair["null_reasons"])
                assert not missing, (ds["name"], entry["measure"], missing)


@pytest.mark.parametrize(
    "constant, where",
    [
        (0.0, "Its value, 0.00, lies below every value of the compared groups (lowest 1.00)"),
        (9.0, "Its value, 9.00, lies above every value of the compared groups (highest 6.00)"),
        (3.0, "Its value, 3.00, lies within the range of the compared groups (1.00 to 6.00;"),
    ],
)
def test_a_group_without_variation_is_placed_among_the_others(constant, where):
    # A line with no defects at all cannot enter tests that need variation, but the reader is
    # still told where its value lies.
    rng = np.random.default_rng(6)
    arrays = [rng.integers(1, 7, 40).astype(float) for _ in range(2)]
    arrays[0][:2] = (1.0, 6.0)  # fixes the range of the compared values: 1 to 6
    arrays.append(np.full(40, constant))
    entry = sec.compute(make_table(arrays), SiteSettings(), np.random.default_rng(1))[
        "comparisons"
    ][0]
    left_out = [e for e in entry["not_comparable"] if e["reason"].startswith("no variation")]
    assert len(left_out) == 1 and left_out[0]["value"] == constant
    text = " ".join(entry["findings"])
    assert where in text, text
