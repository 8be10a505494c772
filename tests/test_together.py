"""Which measures rise and fall together: sentences strongest first, from the results only."""

from __future__ import annotations

import json

from sitebuild.site.together import together_sentences


def dataset(example_site, name):
    results = json.loads((example_site / "results.json").read_text(encoding="utf-8"))
    return next(ds for ds in results["datasets"] if ds["name"] == name)


def test_sentences_run_strongest_first_and_say_the_direction(example_site):
    ds = dataset(example_site, "Warehouse order picking")
    sentences = together_sentences(ds, 0.05)
    sizes = [abs(s.r) for s in sentences if s.r is not None]
    assert sizes == sorted(sizes, reverse=True) and len(sizes) == 3
    assert sentences[0].text.startswith("walk distance [m] and lines strongly rise together")


def test_curve_is_named_and_unclear_pairs_share_one_sentence(example_site):
    hydro = together_sentences(dataset(example_site, "Hydroponic growing trial"), 0.05)
    curved = [s for s in hydro if s.curved]
    assert len(curved) == 1 and "follows a curve against temperature" in curved[0].text
    seed = together_sentences(dataset(example_site, "Seed coating germination test"), 0.05)
    # No pair is significant after adjustment: one sentence, and it does not claim "unrelated".
    assert len(seed) == 1 and seed[0].text.startswith("No clear straight-line link")
    assert "does not mean they are unrelated" in seed[0].text
