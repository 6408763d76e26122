"""meanband: pass a test only when the Student-t interval of the mean lies inside its band."""

from __future__ import annotations

from meanband.assertion import assert_mean_within
from meanband.bands import Band, Decision, Verdict, decide, make_band
from meanband.diagnostics import Diagnostics, NormalityTest, diagnose
from meanband.errors import BandViolation, TrialError
from meanband.interval import Interval, critical_t, mean_interval
from meanband.planning import trials_needed

__all__ = [
    "Band",
    "BandViolation",
    "Decision",
    "Diagnostics",
    "Interval",
    "NormalityTest",
    "TrialError",
    "Verdict",
    "assert_mean_within",
    "critical_t",
    "decide",
    "diagnose",
    "make_band",
    "mean_interval",
    "trials_needed",
]

__version__ = "0.1.0"
