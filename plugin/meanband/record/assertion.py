"""The stand-alone check: assert that the interval of the mean lies inside a band."""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np

from meanband import defaults
from meanband.errors import BandViolation, hide_plugin_frames
from meanband.record.message import describe
from meanband.stats.bands import Edge, Tolerance, make_band
from meanband.stats.decision import Decision, decide
from meanband.stats.decision_rules import DecisionRule, ProcessPrior
from meanband.stats.notes import assumption_notes
from meanband.stats.rules import GUARDED
from meanband.stats.uncertainty import InstrumentSpec

__all__ = ["assert_mean_within"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


def assert_mean_within(
    values: Iterable[float] | np.ndarray,
    low: Edge = None,
    high: Edge = None,
    *,
    center: Edge = None,
    tolerance: Tolerance = None,
    confidence: float = defaults.CONFIDENCE,
    method: str = "t",
    unit: str | None = None,
    instrument_uncertainty: InstrumentSpec = None,
    rule: str | DecisionRule = GUARDED,
    process: ProcessPrior | tuple[float, float] | None = None,
) -> Decision:
    """Return the :class:`Decision` when the interval of the mean lies inside the band.

    Raises :class:`BandViolation` (an ``AssertionError``) on FAIL or UNDECIDED, with a message
    that gives n, mean, interval, band, verdict and diagnostics.

    ``instrument_uncertainty`` (standard uncertainty in the trials' unit, ``(u, df)`` or an
    :class:`~meanband.stats.uncertainty.InstrumentUncertainty`) widens the interval to mean +/- U;
    ``rule="simple"`` compares the mean alone with the band (see :func:`meanband.decide`).
    """
    band = make_band(low, high, center=center, tolerance=tolerance, unit=unit)
    decision = decide(
        values, band, confidence=confidence, method=method,
        instrument_uncertainty=instrument_uncertainty, rule=rule, process=process,
    )
    if not decision.passed:
        raise BandViolation(describe(decision, notes=assumption_notes(
            decision.diagnostics, method=method, unit=unit)),
                            decision)
    return decision
