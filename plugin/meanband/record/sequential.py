"""n="until-decided" for the recorder: collect in blocks, look after each block with the anytime-
valid interval, and stop as soon as it decides the band.

The interval is the confidence sequence of ``stats/sequential.py`` (Lai 1976; Wang & Ramdas
2023): valid at every n at once, so a true mean on an edge passes with probability at most 1 - C
for a budget, and (1 - C) / 2 per edge of a two-sided band, however the stopping fell (normal
trials). Looks fall at the end of each block: for fast callables a block of timed trials keeps
the timing loop undisturbed, and fewer looks only keep the guarantee.
"""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.record.adaptive import planning_band
from meanband.record.settings import Settings
from meanband.stats.bands import Band, Edge, Tolerance, make_band
from meanband.stats.decision import Decision
from meanband.stats.diagnostics import diagnose
from meanband.stats.notes import assumption_notes
from meanband.stats.sample import ArrayEquality
from meanband.stats.sequential import DEFAULT_TIGHTEST_AT, StopDecision, stop_or_go_on
from meanband.stats.verdict import Verdict

__all__ = ["DEFAULT_MAX_N", "FIRST_LOOK", "UNTIL_DECIDED", "SequentialRun", "collect"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: The value of ``n`` that asks for this mode.
UNTIL_DECIDED = "until-decided"
#: Cap on the trials when ``max_n`` is not given, so a mean on an edge cannot run forever.
DEFAULT_MAX_N = 200
#: No look before this many trials: the anytime bound is wide (or infinite) on a few trials, and
#: skewed timings mislead the sd of the first handful (docs/sequential.md).
FIRST_LOOK = 10


@dataclass(frozen=True, eq=False)
class SequentialRun(ArrayEquality):
    """A series collected until decided: its trials, the last look, and why collection ended."""

    values: np.ndarray
    band: Band
    last: StopDecision
    looks: int
    block: int
    max_n: int
    first_look: int
    reason: str  # "decided", "max_n" or "time limit"

    def record(self) -> dict[str, Any]:
        """The row's ``sequential`` entry: builtin types only."""
        return {
            "stopped_at": int(self.values.size),
            "looks": int(self.looks),
            "block": int(self.block),
            "max_n": int(self.max_n),
            "first_look": int(self.first_look),
            "tightest_at": DEFAULT_TIGHTEST_AT,
            "reason": self.reason,
        }

    def note(self) -> dict[str, str]:
        """One line for the summary: where collection stopped and why."""
        n, verdict = self.values.size, self.last.verdict
        if self.reason == "decided":
            text = (f"until decided: stopped at {n} trials after {self.looks} look(s), {verdict} "
                    f"(anytime-valid interval, cap max_n={self.max_n})")
            return {"code": "until-decided", "text": text}
        why = (f"the cap max_n={self.max_n}" if self.reason == "max_n"
               else "the time limit")
        return {"code": "until-decided-capped",
                "text": f"until decided: {why} ended collection at {n} trials after {self.looks} "
                        "look(s) without a decision; raise the cap, or look at the mean's "
                        "distance from the edge"}

    def check(
        self, low: Edge, high: Edge, center: Edge, tolerance: Tolerance, *, held: int,
        unit: str | None, settings: Settings,
    ) -> tuple[Decision, list[dict[str, str]], dict[str, Any]]:
        """The decision, its notes and the row's extra keys; refuse what would void the guarantee."""
        if any(edge is not None for edge in (low, high, center, tolerance)):
            band = make_band(low, high, center=center, tolerance=tolerance, unit=unit)
            if (band.low, band.high) != (self.band.low, self.band.high):
                raise TrialError(
                    "this check's band differs from the band n='until-decided' looked at; call "
                    "check() without edges, or give the same band to both"
                )
        if held != self.values.size:
            raise TrialError(
                f"{held - self.values.size} trials were added after the n='until-decided' "
                "collection; its verdict holds only for the trials it looked at"
            )
        if settings.confidence != self.last.interval.confidence:
            raise TrialError(
                f"confidence {settings.confidence:g} differs from "
                f"{self.last.interval.confidence:g}, at which n='until-decided' looked; set it "
                "on the marker or before collecting"
            )
        diagnostics = diagnose(self.values, alpha=settings.normality_alpha)
        decision = Decision(
            Verdict(self.last.verdict), self.band, self.last.interval, self.last.counter,
            diagnostics, None, self.band.unit, power=settings.power,
        )
        notes = assumption_notes(diagnostics, min_n=settings.min_n,
                                 normality_alpha=settings.normality_alpha, unit=self.band.unit)
        notes.append(self.note())
        return decision, notes, {"sequential": self.record()}


def collect(
    take: Callable[[int], np.ndarray], *, held: int, label: str, unit: str | None,
    band: dict[str, Edge] | Band | None, settings: Settings, max_n: int | None,
    block: int | None, default_block: int,
) -> SequentialRun:
    """Take trials ``block`` at a time (``take(count)`` may return fewer when a time limit cut
    it short), looking after each block once ``FIRST_LOOK`` trials are in, until the anytime-
    valid interval decides ``band`` or ``max_n`` trials are taken."""
    if held:
        raise TrialError(
            f"n='until-decided' needs a fresh series, but {label or '(default)'} already holds "
            f"{held} trials; use trials.series('name') for it"
        )
    planned = planning_band(band, unit)
    cap = DEFAULT_MAX_N if max_n is None else _whole(max_n, "max_n", 2)
    size = default_block if block is None else _whole(block, "block", 1)
    first_look = min(FIRST_LOOK, cap)
    parts: list[np.ndarray] = []
    taken = looks = 0
    last: StopDecision | None = None
    reason = "max_n"
    while taken < cap:
        want = min(size, cap - taken)
        got = take(want)
        parts.append(got)
        taken += got.size
        if taken >= max(first_look, 2):
            looks += 1
            values = np.concatenate(parts)
            # One look, at the end of this block: prefixes before it were looked at already.
            last = stop_or_go_on(values, planned.low, planned.high,
                                 confidence=settings.confidence, first_look=taken)
            if last.stop:
                reason = "decided"
                break
        if got.size < want:
            reason = "time limit"
            break
    values = np.concatenate(parts) if parts else np.empty(0)
    if last is None and values.size >= 2:
        # Cut short before the first look: report what was seen (UNDECIDED on so few trials).
        looks += 1
        last = stop_or_go_on(values, planned.low, planned.high, confidence=settings.confidence,
                             first_look=values.size)
    if last is None:
        raise TrialError(
            f"n='until-decided' took only {values.size} trial before "
            f"{'the time limit' if reason == 'time limit' else 'max_n'} stopped it; it needs at "
            "least 2 to judge: raise the limit"
        )
    return SequentialRun(values, planned, last, looks, size, cap, first_look, reason)


def _whole(value: Any, name: str, least: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < least:
        raise TrialError(f"{name}={value!r} must be a whole number >= {least}")
    return int(value)
