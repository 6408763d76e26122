"""meanband: pass a test only when the Student-t interval of the mean lies inside its band.

The public names load on first use (PEP 562), so importing the package (and the pytest plugin
that lives in it) costs neither numpy nor scipy until a test actually records trials.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from meanband.errors import BandViolation, TrialError
    from meanband.record.assertion import assert_mean_within
    from meanband.stats.bands import Band, make_band
    from meanband.stats.decision import Decision, decide
    from meanband.stats.diagnostics import Diagnostics, NormalityTest, diagnose
    from meanband.stats.interval import Interval, critical_t
    from meanband.stats.methods import mean_interval
    from meanband.stats.planning import trials_needed
    from meanband.stats.sequential import anytime_interval
    from meanband.stats.uncertainty import (
        Calibration,
        InstrumentUncertainty,
        UncertaintyBudget,
        uncertainty_budget,
    )
    from meanband.stats.verdict import Verdict

__all__ = [
    "Band",
    "BandViolation",
    "Calibration",
    "Decision",
    "Diagnostics",
    "InstrumentUncertainty",
    "Interval",
    "NormalityTest",
    "TrialError",
    "UncertaintyBudget",
    "Verdict",
    "anytime_interval",
    "assert_mean_within",
    "critical_t",
    "decide",
    "diagnose",
    "make_band",
    "mean_interval",
    "trials_needed",
    "uncertainty_budget",
]

__version__ = "0.1.0"

_HOME = {
    "assert_mean_within": "record.assertion",
    "Band": "stats.bands",
    "Decision": "stats.decision",
    "Verdict": "stats.verdict",
    "decide": "stats.decision",
    "make_band": "stats.bands",
    "Diagnostics": "stats.diagnostics",
    "NormalityTest": "stats.diagnostics",
    "diagnose": "stats.diagnostics",
    "BandViolation": "errors",
    "TrialError": "errors",
    "Interval": "stats.interval",
    "critical_t": "stats.interval",
    "mean_interval": "stats.methods",
    "trials_needed": "stats.planning",
    "anytime_interval": "stats.sequential",
    "Calibration": "stats.uncertainty",
    "InstrumentUncertainty": "stats.uncertainty",
    "UncertaintyBudget": "stats.uncertainty",
    "uncertainty_budget": "stats.uncertainty",
}


def __getattr__(name: str) -> Any:
    try:
        module = _HOME[name]
    except KeyError:
        raise AttributeError(f"module 'meanband' has no attribute {name!r}") from None
    value = getattr(importlib.import_module(f"meanband.{module}"), name)
    globals()[name] = value
    return value


def __dir__() -> list[str]:
    return sorted(set(globals()) | set(__all__))
