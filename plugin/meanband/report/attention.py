"""Which notes could change a verdict: the summary shows those and counts the rest."""

from __future__ import annotations

import math
from collections.abc import Mapping
from typing import Any

from meanband.stats.decision import WIDE_MARGIN, headroom

__all__ = ["ALWAYS_SHOWN", "threatens_verdict"]

#: Notes that speak of the measurement itself, not of a margin: shown on every check.
ALWAYS_SHOWN = frozenset({
    "calibration-overdue", "low-uncertainty-ratio", "zero-spread", "time-limit", "read-cost",
    "coarse-clock", "loop-limit", "two-stage-capped", "until-decided-capped", "log-out-of-order",
    "repeated-check", "batch-means-fallback",
})


def threatens_verdict(row: Mapping[str, Any], note: Mapping[str, Any]) -> bool:
    """True when ``note`` could change the row's verdict or says why it is not PASS.

    The notes in :data:`ALWAYS_SHOWN` matter on any row; every note of a FAIL or UNDECIDED
    check may say why it failed; the others matter on a PASS only when its interval could not
    grow ``WIDE_MARGIN`` times as far from the mean and still pass. Trials never checked have
    no verdict to change.
    """
    decision = row.get("decision")
    if note.get("code") in ALWAYS_SHOWN:
        return True
    if not decision:
        return False
    if decision.get("verdict") != "PASS":
        return True
    interval, band = decision.get("interval") or {}, decision.get("band") or {}
    room = headroom(_number(interval.get("mean")), _number(interval.get("low"), -math.inf),
                    _number(interval.get("high"), math.inf), _number(band.get("low"), -math.inf),
                    _number(band.get("high"), math.inf))
    return not room >= WIDE_MARGIN  # an unknown headroom (nan) is a threat


def _number(value: Any, default: float = math.nan) -> float:
    return default if value is None else float(value)
