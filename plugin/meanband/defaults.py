"""Every user-facing default in one place, so code, help texts and docs cannot disagree."""

from __future__ import annotations

__all__ = [
    "CLOCK",
    "CONFIDENCE",
    "GC",
    "MAX_CHANGE",
    "MAX_INCREASE",
    "METHOD",
    "MIN_N",
    "MIN_UNCERTAINTY_RATIO",
    "NORMALITY_ALPHA",
    "OVERDUE_CALIBRATION",
    "POWER",
    "STORE_TIMEOUT",
    "WARMUP",
    "N",
]

#: Trials per collection call.
N = 30
#: Confidence level of every interval and bound.
CONFIDENCE = 0.95
#: Warm-up before timed trials: a count, or a duration string such as "200ms".
WARMUP = 0
#: A check with fewer trials than this gets a "few trials" note.
MIN_N = 10
#: Level of the normality test behind the normality notes.
NORMALITY_ALPHA = 0.05
#: Interval method.
METHOD = "t"
#: Power at which trial counts are suggested and planned.
POWER = 0.9
#: Clock of timed trials ("wall" or "cpu") and whether garbage collection stays on during them.
CLOCK = "wall"
GC = False
#: How much slower than its baseline a timing may get, and how far another value may move,
#: before the check counts as regressed.
MAX_INCREASE = 0.05
MAX_CHANGE = 0.05
#: A check with an instrument past its calibration due date: "note" or "fail".
OVERDUE_CALIBRATION = "note"
#: A test uncertainty ratio (tolerance / 2U) below this gets a note (4:1, common practice).
MIN_UNCERTAINTY_RATIO = 4.0
#: Seconds to wait for another process that holds the history store's write lock.
STORE_TIMEOUT = 10.0
