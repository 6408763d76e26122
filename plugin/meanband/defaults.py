"""Every user-facing default in one place, so code, help texts and docs cannot disagree."""

from __future__ import annotations

__all__ = [
    "ASSUMED_RUN_NOISE",
    "BASELINE_MAX_AGE_DAYS",
    "BASELINE_RUNS",
    "BASELINE_UNDECIDED",
    "CLOCK",
    "CONFIDENCE",
    "GC",
    "MAX_CHANGE",
    "MAX_INCREASE",
    "MAX_READ_BYTES",
    "MAX_TRIALS",
    "METHOD",
    "MIN_N",
    "MIN_UNCERTAINTY_RATIO",
    "NORMALITY_ALPHA",
    "OVERDUE_CALIBRATION",
    "POWER",
    "REGRESSION_ADJUST",
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
#: How many of a label's newest runs make its baseline.
BASELINE_RUNS = 5
#: Run-to-run spread (log scale) assumed when no stored runs or calibration measured it.
ASSUMED_RUN_NOISE = 0.03
#: Control of false "regressed" verdicts across all checks of a run: "holm", "bh" or "none".
REGRESSION_ADJUST = "holm"
#: What a baseline comparison that cannot tell yet does to its test: "pass" (with a note) or "fail".
BASELINE_UNDECIDED = "pass"
#: A baseline whose newest run is older than this many days gets a loud note.
BASELINE_MAX_AGE_DAYS = 30.0
#: Largest file (bytes) a reader of reports, merge inputs, rows and plan files accepts: 256 MiB,
#: far above any real report, far below what would exhaust a CI machine's memory.
MAX_READ_BYTES = 256 * 1024**2
#: Most trials one collection may be asked for (``n``, a plan entry, ``max_n``): a count above it
#: is an error naming where it came from, not a run that never ends. Raised with
#: --meanband-max-trials, ini meanband_max_trials or the marker's ``max_trials``.
MAX_TRIALS = 1_000_000
