"""Bands, verdicts and the decision of a check: does the interval of the mean lie inside?"""

from __future__ import annotations

import enum
import math
from collections.abc import Iterable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband.errors import TrialError
from meanband.stats.diagnostics import Diagnostics, diagnose
from meanband.stats.interval import Interval, mean_interval
from meanband.stats.planning import trials_needed
from meanband.stats.rules import GUARDED, RuleOutcome, apply_rule, check_rule
from meanband.stats.sample import as_sample, check_confidence
from meanband.stats.uncertainty import (
    InstrumentSpec,
    UncertaintyBudget,
    as_instrument_uncertainty,
    trials_to_decide,
    uncertainty_budget,
)
from meanband.units import SECONDS, parse_duration

__all__ = ["Band", "Decision", "Verdict", "decide", "make_band"]

Edge = float | int | str | None
#: A tolerance: symmetric ``0.4``, or asymmetric ``(below, above)`` such as ``(0.3, 0.5)``.
Tolerance = Edge | tuple[Edge, Edge]


class Verdict(str, enum.Enum):
    """Outcome of a check. FAIL and UNDECIDED both fail the test, with different messages."""

    PASS = "PASS"
    FAIL = "FAIL"
    UNDECIDED = "UNDECIDED"

    def __str__(self) -> str:
        return self.value


@dataclass(frozen=True, slots=True)
class Band:
    """The range the mean must lie in; an open edge is -inf or +inf."""

    low: float
    high: float
    unit: str | None = None

    @property
    def side(self) -> str:
        """Which interval the check uses: ``two-sided``, ``upper`` (a budget) or ``lower``."""
        if math.isfinite(self.low) and math.isfinite(self.high):
            return "two-sided"
        return "upper" if math.isfinite(self.high) else "lower"

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only."""
        return {"low": float(self.low), "high": float(self.high), "unit": self.unit}


def make_band(
    low: Edge = None,
    high: Edge = None,
    *,
    center: Edge = None,
    tolerance: Tolerance = None,
    unit: str | None = None,
) -> Band:
    """Build a band from ``low``/``high`` or from ``center`` +/- ``tolerance``.

    ``tolerance=(below, above)`` is asymmetric: ``center=85, tolerance=(0.3, 0.5)`` is the
    band 84.7..85.5 (-0.3/+0.5). Edges may be duration strings (``"3ms"``) when the trials are
    timings (``unit="s"``).
    """
    if center is not None or tolerance is not None:
        if low is not None or high is not None:
            raise TrialError(
                "give the band either as low=/high= or as center=/tolerance=, not both"
            )
        if center is None or tolerance is None:
            raise TrialError("center= and tolerance= go together; give both")
        middle = _edge_value(center, unit, "center")
        below, above = _tolerance_values(tolerance, unit)
        low_value, high_value = middle - below, middle + above
    else:
        if low is None and high is None:
            raise TrialError("a band needs at least one edge: give low=, high= or center=/tolerance=")
        low_value = -math.inf if low is None else _edge_value(low, unit, "low")
        high_value = math.inf if high is None else _edge_value(high, unit, "high")
    if low_value == math.inf or high_value == -math.inf:
        raise TrialError(f"a band edge cannot lie beyond all values (low={low!r}, high={high!r})")
    if not (math.isfinite(low_value) or math.isfinite(high_value)):
        raise TrialError("a band needs at least one finite edge; both edges are open")
    if low_value > high_value:
        raise TrialError(
            f"the band's low edge {low!r} lies above its high edge {high!r}; swap them"
        )
    return Band(low_value, high_value, unit)


def _tolerance_values(tolerance: Tolerance, unit: str | None) -> tuple[float, float]:
    """(below, above) from a symmetric tolerance or an asymmetric pair, each finite and >= 0."""
    if isinstance(tolerance, tuple | list):
        if len(tolerance) != 2:
            raise TrialError(
                f"an asymmetric tolerance is a pair (below, above), e.g. (0.3, 0.5) for "
                f"-0.3/+0.5; got {tolerance!r}"
            )
        parts = (tolerance[0], tolerance[1])
    else:
        parts = (tolerance, tolerance)
    values = tuple(_edge_value(part, unit, "tolerance") for part in parts)
    if values[0] < 0 or values[1] < 0:
        raise TrialError(
            f"tolerance must be >= 0 (a pair is given as magnitudes below and above the center, "
            f"e.g. (0.3, 0.5)), got {tolerance!r}"
        )
    return values[0], values[1]


def _edge_value(edge: Edge, unit: str | None, name: str) -> float:
    if isinstance(edge, str):
        if unit != SECONDS:
            raise TrialError(
                f"{name}={edge!r}: a band edge with a unit string needs timing trials "
                f"(these trials are in {unit or 'no unit'}); give a plain number"
            )
        return parse_duration(edge)
    try:
        value = float(edge)  # type: ignore[arg-type]
    except (TypeError, ValueError) as exc:
        raise TrialError(f"{name}= must be a number, got {edge!r}") from exc
    if math.isnan(value) or (name in ("center", "tolerance") and math.isinf(value)):
        raise TrialError(f"{name}= must be a finite number, got {edge!r}")
    return value


@dataclass(frozen=True, slots=True)
class Decision:
    """The verdict of one check and everything behind it."""

    verdict: Verdict
    band: Band
    interval: Interval
    counter: Interval | None
    diagnostics: Diagnostics
    suggested_n: int | None
    unit: str | None = None
    #: The uncertainty of the mean (Type A, instrument Type B, k, U); None for methods other
    #: than the t interval.
    uncertainty: UncertaintyBudget | None = None
    #: The decision rule applied and the conformance probability.
    rule: RuleOutcome | None = None

    @property
    def passed(self) -> bool:
        """True for PASS only."""
        return self.verdict is Verdict.PASS

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only, safe for JSON and for pytest-xdist's report transport."""
        return {
            "verdict": self.verdict.value,
            "band": self.band.to_dict(),
            "interval": self.interval.to_dict(),
            "counter": None if self.counter is None else self.counter.to_dict(),
            "diagnostics": self.diagnostics.to_dict(),
            "suggested_n": self.suggested_n,
            "unit": self.unit,
        }


def decide(
    values: Iterable[float] | np.ndarray,
    band: Band,
    *,
    confidence: float = 0.95,
    method: str = "t",
    power: float = 0.9,
    alpha: float = 0.05,
    instrument_uncertainty: InstrumentSpec = None,
    rule: str = GUARDED,
) -> Decision:
    """Decide a check at ``confidence``.

    Two-sided band: the two-sided interval must lie inside (PASS), wholly outside on an edge
    (FAIL) or straddles an edge (UNDECIDED). A budget (one open edge): the one-sided bound at
    ``confidence`` must be inside for PASS; the opposite one-sided bound beyond the edge is FAIL.
    This is guarded acceptance with the guard band equal to the expanded uncertainty
    (ILAC-G8:2019; JCGM 106:2012, clause 8).

    ``instrument_uncertainty`` (a standard uncertainty in the trials' unit, ``(u, df)`` or an
    :class:`~meanband.stats.uncertainty.InstrumentUncertainty`) is combined with the Type A
    uncertainty of the mean (JCGM 100:2008): the interval becomes mean +/- U. ``rule="simple"``
    compares the mean alone with the band (simple acceptance, no UNDECIDED).
    """
    level = check_confidence(confidence)
    check_rule(rule)
    instrument = as_instrument_uncertainty(instrument_uncertainty)
    x = as_sample(values, minimum=2)
    side = band.side
    budget: UncertaintyBudget | None = None
    if method == "t":
        budget = uncertainty_budget(x, level, side, instrument)
    elif instrument is not None and instrument.standard > 0:
        raise TrialError(
            f"instrument_uncertainty combines with the t interval only (JCGM 100); this check "
            f"uses method={method!r}: use method='t' or leave instrument_uncertainty out"
        )
    combined = budget if budget is not None and budget.has_instrument else None
    interval = combined.interval() if combined is not None else mean_interval(x, level, side, method)
    counter: Interval | None = None
    low, high = interval.low, interval.high
    if side != "two-sided":
        opposite = "lower" if side == "upper" else "upper"
        if combined is not None:
            counter = combined.interval(opposite)
        else:
            counter = mean_interval(x, level, opposite, method)
        # The bounds that decide a budget: the one-sided bound and its opposite counterpart.
        if side == "upper":
            low, high = counter.low, interval.high
        else:
            low, high = interval.low, counter.high
    outcome = apply_rule(
        rule, mean=interval.mean, low=low, high=high, band_low=band.low, band_high=band.high,
        standard_uncertainty=None if budget is None else budget.combined,
        df=None if budget is None else budget.effective_df,
    )
    verdict = Verdict(outcome.verdict)
    diagnostics = diagnose(x, alpha=alpha)
    suggested = None
    if verdict is not Verdict.FAIL:
        margin = edge_margin(interval.mean, band)
        if combined is not None:
            suggested = trials_to_decide(
                interval.sd, margin, instrument, confidence=level, side=side, power=power
            )
        else:
            # sem * sqrt(n) is the sd per trial that the method's interval implies: the plain
            # sd for independent trials, the long-run sd for batch means of correlated ones.
            spread = interval.sem * math.sqrt(interval.n)
            suggested = trials_needed(
                spread, margin=margin, confidence=level, side=side, power=power
            )
    return Decision(
        verdict, band, interval, counter, diagnostics, suggested, band.unit, budget, outcome
    )


def edge_margin(mean: float, band: Band) -> float:
    """Distance from the mean to the band edge that decides the check (the nearest one)."""
    distances = [abs(mean - edge) for edge in (band.low, band.high) if math.isfinite(edge)]
    return min(distances)
