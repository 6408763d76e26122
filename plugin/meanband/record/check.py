"""A check's decision and its assumption notes: the one step the recorder and a pooled merge share."""

from __future__ import annotations

from collections.abc import Collection, Iterable, Mapping
from typing import Any

import numpy as np

from meanband import defaults
from meanband.stats.bands import Band
from meanband.stats.decision import Decision, decide
from meanband.stats.notes import assumption_notes
from meanband.stats.rules import GUARDED
from meanband.stats.uncertainty import InstrumentSpec

__all__ = ["decide_with_notes"]


def decide_with_notes(
    values: Iterable[float] | np.ndarray,
    band: Band,
    settings: Mapping[str, Any],
    *,
    instrument_uncertainty: InstrumentSpec = None,
    rule: str = GUARDED,
    skip: Collection[str] = (),
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
        instrument_uncertainty=instrument_uncertainty, rule=rule,
    )
    notes = assumption_notes(
        decision.diagnostics, min_n=setting("min_n", defaults.MIN_N),
        normality_alpha=normality_alpha, method=method, skip=skip,
    )
    return decision, notes
