"""A check's decision and its assumption notes: the one step the recorder and a pooled merge share."""

from __future__ import annotations

import datetime
import math
from collections.abc import Collection, Iterable, Mapping
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import hide_plugin_frames
from meanband.stats.bands import Band
from meanband.stats.decision import WIDE_MARGIN, Decision, decide, edge_margin, headroom
from meanband.stats.decision_rules import DecisionRule, ProcessPrior
from meanband.stats.notes import (
    FALLBACK_METHOD,
    FALLBACK_MIN_N,
    MIN_BOOTSTRAP_TRIALS,
    SHAPE_FREE_METHOD,
    assumption_notes,
    batch_means_fallback,
    skewed_timing_note,
)
from meanband.stats.rules import GUARDED
from meanband.stats.uncertainty import InstrumentSpec

__all__ = [
    "DRIFT_SHARE",
    "SHAPE_NOTES",
    "decide_with_notes",
    "drop_immaterial_drift",
    "fallback_note",
    "metrology_notes",
    "timing_method",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


def decide_with_notes(
    values: Iterable[float] | np.ndarray,
    band: Band,
    settings: Mapping[str, Any],
    *,
    instrument_uncertainty: InstrumentSpec = None,
    rule: str | DecisionRule = GUARDED,
    skip: Collection[str] = (),
    today: datetime.date | None = None,
    process: ProcessPrior | tuple[float, float] | None = None,
) -> tuple[Decision, list[dict[str, str]]]:
    """Decide the check at the row's ``settings`` and judge its assumptions; ``skip`` names
    note codes to leave out (one the timing engine already gave, or drift across pooled runs)."""

    def setting(name: str, default: Any) -> Any:
        value = settings.get(name)
        return default if value is None else value

    method = setting("method", defaults.METHOD)
    normality_alpha = setting("normality_alpha", defaults.NORMALITY_ALPHA)
    decision = decide(
        values, band, confidence=setting("confidence", defaults.CONFIDENCE), method=method,
        power=setting("power", defaults.POWER),
        instrument_uncertainty=instrument_uncertainty, rule=rule, process=process,
    )
    notes = assumption_notes(
        decision.diagnostics, min_n=setting("min_n", defaults.MIN_N),
        normality_alpha=normality_alpha, method=method, skip=skip, unit=band.unit,
    )
    notes.extend(metrology_notes(
        decision, today=today,
        min_ratio=setting("min_uncertainty_ratio", defaults.MIN_UNCERTAINTY_RATIO),
    ))
    notes = drop_immaterial_drift(notes, decision)
    if decision.passed and _wide_margin(decision):
        # The shape of the data cannot change this verdict: nothing to say about normality.
        notes = [note for note in notes if note["code"] not in SHAPE_NOTES]
    return decision, notes


#: Largest count for which a timing check whose method nobody set takes the bootstrap-t
#: interval: above it t's error from skewness is a fraction of a point (it falls as
#: G1 / sqrt(n); Hall 1992, ch. 2) and the bootstrap would cost seconds a check (about 0.5 s at
#: 5,000 timings, 2.7 s at 20,000 here).
SKEW_CORRECTION_MAX_N = 5000


def timing_method(
    values: np.ndarray, *, source: str | None, unit: str | None
) -> tuple[str, dict[str, str]] | None:
    """The interval method of timings (source ``time``, unit s) whose method nobody set, and
    the note that says why when it is not the usual one; None for other trials (they keep t).

    Batch means when lag-1 r is in doubt (``fallback_note``); else, from
    ``MIN_BOOTSTRAP_TRIALS`` (20) to ``SKEW_CORRECTION_MAX_N`` timings, the studentised
    bootstrap, which roughly halves t's excess false PASS on right-skewed timings and does no
    harm on normal ones (studies/skewed_budgets.py, docs/methods.md); t below 20 timings, where
    no method does better.
    """
    from meanband.units import SECONDS

    if source != "time" or unit != SECONDS:
        return None
    note = fallback_note(values, source=source, unit=unit)
    if note is not None:
        return FALLBACK_METHOD, note
    if MIN_BOOTSTRAP_TRIALS <= values.size <= SKEW_CORRECTION_MAX_N:
        return SHAPE_FREE_METHOD, skewed_timing_note(values.size)
    return None


def fallback_note(
    values: np.ndarray, *, source: str | None, unit: str | None
) -> dict[str, str] | None:
    """The ``batch-means-fallback`` note when these trials are timings (source ``time``, unit
    s) of at least ``FALLBACK_MIN_N`` whose lag-1 r is in doubt, else None; the caller has
    checked that nobody set the method."""
    from meanband.stats.diagnostics import lag1_autocorrelation
    from meanband.units import SECONDS

    if source != "time" or unit != SECONDS or values.size < FALLBACK_MIN_N:
        return None
    return batch_means_fallback(lag1_autocorrelation(values, float(np.mean(values))),
                                values.size)


#: Notes on the shape of the data (normality, and the outliers that make a skew): left out of
#: a check that passes with a wide margin (``WIDE_MARGIN``), which no shape of them could change.
SHAPE_NOTES = frozenset({"not-normal", "not-normal-harmless", "log-not-normal", "outliers"})


#: A drift matters to a check when the level moved, first third to last, by at least this share
#: of the room between the mean and the nearest band edge (common practice, no source).
DRIFT_SHARE = 0.25


def drop_immaterial_drift(notes: list[dict[str, str]], decision: Decision) -> list[dict[str, str]]:
    """``notes`` without a drift note when the drift is too small to matter against the band:
    a 0.4 s call that drifts by 0.01% says nothing a 1 s budget needs to know."""
    drift = decision.diagnostics.drift
    shift = abs(drift.last - drift.first)
    room = edge_margin(decision.interval.mean, decision.band)
    if not (math.isfinite(shift) and math.isfinite(room)) or shift >= DRIFT_SHARE * room:
        return notes
    return [note for note in notes if note["code"] != "drift"]


def _wide_margin(decision: Decision) -> bool:
    iv, band = decision.interval, decision.band
    return headroom(iv.mean, iv.low, iv.high, band.low, band.high) >= WIDE_MARGIN


def metrology_notes(
    decision: Decision, *, today: datetime.date | None = None,
    min_ratio: float = defaults.MIN_UNCERTAINTY_RATIO,
) -> list[dict[str, str]]:
    """Notes a bench gate needs: an instrument past its calibration due date (code
    ``calibration-overdue``) and a test uncertainty ratio below 4:1 (``low-uncertainty-ratio``)."""
    budget = decision.uncertainty
    if budget is None or not budget.has_instrument:
        return []
    notes = []
    calibration = budget.calibration
    on = datetime.date.today() if today is None else today
    if calibration is not None and calibration.overdue(on):
        certificate = f" (certificate {calibration.certificate})" if calibration.certificate else ""
        notes.append({
            "code": "calibration-overdue",
            "text": f"instrument {calibration.instrument}{certificate} was due for calibration on "
                    f"{calibration.due}: its stated uncertainty is no longer vouched for; "
                    "recalibrate it before this gate counts",
        })
    ratio = decision.uncertainty_ratio
    if ratio is not None and ratio < min_ratio:
        notes.append({
            "code": "low-uncertainty-ratio",
            "text": f"test uncertainty ratio {ratio:.2g}:1, below {min_ratio:g}:1 (4:1 is "
                    "common practice): the tolerance is narrow beside the expanded uncertainty "
                    "U, so many good units will be UNDECIDED; a better instrument or more trials "
                    "raise it",
        })
    return notes
