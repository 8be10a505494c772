"""Which measures rise and fall together: plain sentences from a dataset's correlation results.

Presentation only: reads the all-rows Pearson and Spearman results and the curved-relationship
flags (results.json shape) and words them, strongest relationship first.
"""

from __future__ import annotations

from dataclasses import dataclass

from ..stats.findings import p_phrase

# Size words for |r| (Cohen 1988's 0.1 / 0.3 / 0.5; common practice).
STRENGTH = ((0.5, "strongly"), (0.3, "moderately"), (0.1, "weakly"))
MAX_SENTENCES = 8


@dataclass(frozen=True)
class TogetherSentence:
    """Returned per pair of columns: a sentence and the numbers it rests on."""

    a: str
    b: str
    r: float | None
    clear: bool  # significant after the table's adjustment
    curved: bool
    text: str


def _strength(r: float) -> str:
    size = abs(r)
    for limit, word in STRENGTH:
        if size >= limit:
            return word
    return "barely"


def together_sentences(ds: dict, alpha: float) -> list[TogetherSentence]:
    """Return sentences on how pairs of columns move together over all rows, strongest
    first; pairs with no clear straight-line link are gathered into one last sentence."""
    pearson = [
        c
        for c in ds.get("correlations", []) or []
        if c.get("group") is None and c.get("method") == "pearson" and c.get("r") is not None
    ]
    spearman = {
        (c["a"], c["b"]): c
        for c in ds.get("correlations", []) or []
        if c.get("group") is None and c.get("method") == "spearman"
    }
    curved = {
        frozenset((r["a"], r["b"])): r
        for r in ds.get("relationships", []) or []
        if r.get("group") is None and r.get("curved")
    }
    out: list[TogetherSentence] = []
    unclear: list[TogetherSentence] = []
    for c in sorted(pearson, key=lambda c: -abs(c["r"])):
        a, b, r = c["a"], c["b"], c["r"]
        p = c.get("p_adjusted")
        clear = p is not None and p < alpha
        bend = curved.get(frozenset((a, b)))
        if bend is not None:
            text = (
                f"{bend['b']} follows a curve against {bend['a']}: a fitted curve explains "
                f"{bend['smooth_r2']:.0%} of its variation, a straight line {bend['linear_r2']:.0%} "
                f"(r = {r:.2f}, which only sees the straight part)."
            )
            out.append(TogetherSentence(a, b, r, clear, True, text))
            continue
        if not clear:
            unclear.append(TogetherSentence(a, b, r, False, False, f"{a} and {b}"))
            continue
        how = (
            "rise together"
            if r > 0
            else "move in opposite directions: as one rises, the other tends to fall"
        )
        rank = spearman.get((a, b))
        extra = f", rank correlation {rank['r']:.2f}" if rank and rank.get("r") is not None else ""
        text = f"{a} and {b} {_strength(r)} {how} (r = {r:.2f}{extra}; adjusted {p_phrase(p)})."
        out.append(TogetherSentence(a, b, r, True, False, text))
    out = out[:MAX_SENTENCES]
    if unclear:
        names = "; ".join(s.text for s in unclear[:MAX_SENTENCES])
        more = (
            f" and {len(unclear) - MAX_SENTENCES} more pairs"
            if len(unclear) > MAX_SENTENCES
            else ""
        )
        out.append(
            TogetherSentence(
                "",
                "",
                None,
                False,
                False,
                f"No clear straight-line link shown between {names}{more} — which does not mean "
                "they are unrelated.",
            )  # fmt: skip
        )
    return out
