"""Exceptions a user of meanband can catch; every one derives from :class:`MeanbandError`."""

from __future__ import annotations

from typing import Any

__all__ = [
    "BandViolation",
    "MeanbandError",
    "ReportError",
    "StoreError",
    "TrialError",
    "hide_plugin_frames",
]


class MeanbandError(Exception):
    """Root of meanband's exceptions: ``except MeanbandError`` catches every one of them."""


class TrialError(MeanbandError, ValueError):
    """Bad trials or bad arguments: the message says what was wrong and what to do."""


class BandViolation(MeanbandError, AssertionError):
    """A check did not pass: the interval of the mean is outside or across its band."""

    def __init__(self, message: str, decision: Any = None) -> None:
        super().__init__(message)
        #: What failed: a :class:`~meanband.stats.decision.Decision`, or the
        #: :class:`~meanband.stats.ratio.RatioCheck` of an in-run comparison.
        self.decision = decision


class ReportError(MeanbandError, ValueError):
    """A report file that cannot be read or written, or reports that cannot be combined."""


class StoreError(MeanbandError):
    """The history store cannot be used; the message names the file and what to do."""


def hide_plugin_frames(excinfo: Any) -> bool:
    """pytest's ``__tracebackhide__`` for the modules between a test and the error it gets.

    A module that sets ``__tracebackhide__ = hide_plugin_frames`` keeps its frames out of a
    failing test's traceback when the error is meanband's own (a BandViolation or TrialError
    says what went wrong in its message) or came from the user's code that the plugin called
    (a timed function). A bug of the plugin itself keeps every frame; ``--full-trace`` shows all.
    """
    if excinfo is None:
        return False
    if isinstance(excinfo.value, MeanbandError):
        return True
    try:
        raised_in = excinfo.traceback[-1].frame.f_globals.get("__name__", "")
    except (AttributeError, IndexError):
        return False
    return not str(raised_in).startswith("meanband.")
