"""Error control across all regression verdicts of one run: Holm and Benjamini-Hochberg.

Twenty checks each judged at 2.5% give about a 40% chance that at least one false "regressed"
appears in a run of unchanged code. Holm (1979) bounds the chance of any false verdict in the
run (family-wise); Benjamini and Hochberg (1995) bound the expected share of false verdicts
among those flagged (false discovery rate) and flag more true slowdowns in large suites.

A test must fail while it runs, before the other p-values exist, so each check is first judged
at ``alpha / m`` (Bonferroni), where ``m`` is the number of comparisons the run will make: a
check that meets it is rejected by both procedures whatever the other p-values turn out to be.
At the end of the session the full step-down (Holm) or step-up (BH) may add verdicts; those
fail the session, since their tests have already reported.
"""

from __future__ import annotations

from collections.abc import Sequence

__all__ = ["ADJUSTMENTS", "adjusted_rejections", "check_adjustment", "immediate_threshold"]

#: The adjustments offered, and what each controls, in words for the summary.
ADJUSTMENTS = {
    "holm": "Holm, family-wise",
    "bh": "Benjamini-Hochberg, false discovery rate",
    "none": "no adjustment",
}


def check_adjustment(name: str) -> str:
    """The adjustment named, or a ValueError listing the choices."""
    key = str(name).strip().lower()
    if key not in ADJUSTMENTS:
        raise ValueError(f"unknown adjustment {name!r}; choose one of {', '.join(ADJUSTMENTS)}")
    return key


def immediate_threshold(alpha: float, comparisons: int, adjustment: str) -> float:
    """The p-value at or below which one check is rejected before the others are known."""
    if adjustment == "none":
        return alpha
    return alpha / max(1, comparisons)


def adjusted_rejections(
    p_values: Sequence[float], alpha: float, adjustment: str, comparisons: int | None = None
) -> list[bool]:
    """Which of ``p_values`` the chosen procedure rejects at level ``alpha``.

    ``comparisons`` is the size of the family (at least ``len(p_values)``): checks that were
    expected but made no comparison count as non-rejections with p-value 1.
    """
    m = max(len(p_values), comparisons or 0)
    if adjustment == "none":
        return [p <= alpha for p in p_values]
    order = sorted(range(len(p_values)), key=lambda i: p_values[i])
    rejected = [False] * len(p_values)
    if adjustment == "holm":
        for rank, index in enumerate(order):
            if p_values[index] > alpha / (m - rank):
                break
            rejected[index] = True
        return rejected
    if adjustment == "bh":
        last = -1
        for rank, index in enumerate(order):
            if p_values[index] <= alpha * (rank + 1) / m:
                last = rank
        for rank in range(last + 1):
            rejected[order[rank]] = True
        return rejected
    raise ValueError(f"unknown adjustment {adjustment!r}")
