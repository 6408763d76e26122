"""Exceptions a user of meanband can catch."""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

if TYPE_CHECKING:
    from meanband.stats.bands import Decision

__all__ = ["BandViolation", "TrialError"]


class TrialError(ValueError):
    """Bad trials or bad arguments: the message says what was wrong and what to do."""


class BandViolation(AssertionError):
    """A check did not pass: the interval of the mean is outside or across its band."""

    def __init__(self, message: str, decision: Decision | Any = None) -> None:
        super().__init__(message)
        #: The :class:`~meanband.stats.bands.Decision` that failed.
        self.decision = decision
