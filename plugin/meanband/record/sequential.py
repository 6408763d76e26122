"""n="until-decided" for the recorder: collect in blocks, look after each block with the anytime-
valid interval, and stop as soon as it decides the band.

The interval is the confidence sequence of ``stats/sequential.py`` (Lai 1976; Wang & Ramdas
2023): valid at every n at once, so a true mean on an edge passes with probability at most 1 - C
for a budget, and (1 - C) / 2 per edge of a two-sided band, however the stopping fell (normal
trials). Looks fall at the end of each block: for fast callables a block of timed trials keeps
the timing loop undisturbed, and fewer looks only keep the guarantee.
"""

from __future__ import annotations

import functools
import math
from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.record.adaptive import planning_band
from meanband.record.settings import Settings
from meanband.stats.bands import Band, Edge, Tolerance, make_band, side_alpha
from meanband.stats.decision import Decision
from meanband.stats.diagnostics import diagnose
from meanband.stats.notes import assumption_notes
from meanband.stats.sample import ArrayEquality
from meanband.stats.sequential import (
    DEFAULT_TIGHTEST_AT,
    SHAPES,
    GroupSequentialDesign,
    StopDecision,
    group_sequential_design,
    planned_look,
    stop_or_go_on,
)
from meanband.stats.verdict import Verdict

__all__ = [
    "DEFAULT_MAX_N",
    "FIRST_LOOK",
    "PLANNED_LOOKS",
    "UNTIL_DECIDED",
    "Earlier",
    "SequentialRun",
    "collect",
    "is_sequential",
    "parse_looks",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: The value of ``n`` that asks for this mode.
UNTIL_DECIDED = "until-decided"
#: ``n="looks:K"`` or ``n="looks:K:SHAPE"``: K planned looks with group-sequential boundaries.
PLANNED_LOOKS = "looks"
#: Trials between planned looks at the least: with 5 trials at the first look the t-converted
#: boundaries passed a mean on a 95% budget 5.6% of the time, with 10 about 5.1%
#: (studies/sequential_looks.py, part 4; 20,000 runs, MC SE 0.15%).
LOOK_TRIALS = 10
#: Cap on the trials when ``max_n`` is not given, so a mean on an edge cannot run forever.
DEFAULT_MAX_N = 200
#: No look before this many trials: the anytime bound is wide (or infinite) on a few trials, and
#: skewed timings mislead the sd of the first handful (docs/sequential.md).
FIRST_LOOK = 10


@dataclass(frozen=True, eq=False)
class Earlier(ArrayEquality):
    """Trials an earlier try of the same commit took for this series, and the run they are in."""

    values: np.ndarray
    run: int


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
    design: GroupSequentialDesign | None = None
    planned: tuple[int, ...] = ()
    earlier: Earlier | None = None

    @property
    def mode(self) -> str:
        """The ``n`` this series was collected with."""
        if self.design is None:
            return UNTIL_DECIDED
        return f"{PLANNED_LOOKS}:{len(self.planned)}:{self.design.shape}"

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
            **({} if self.design is None else {
                "mode": self.mode, "planned": list(self.planned), "shape": self.design.shape,
                "bounds": [float(b) for b in self.design.bounds],
            }),
            **({} if self.earlier is None else {
                "continued": {"run": int(self.earlier.run),
                              "trials": int(self.earlier.values.size)},
            }),
        }

    def note(self) -> dict[str, str]:
        """One line for the summary: where collection stopped and why."""
        n, verdict = self.values.size, self.last.verdict
        if self.design is not None:
            shape = "O'Brien-Fleming" if self.design.shape == "obrien-fleming" else "Pocock"
            where = (f"planned looks: stopped at look {self.looks} of {len(self.planned)} "
                     f"({n} trials), {verdict} ({shape} spending, looks at "
                     f"{', '.join(str(c) for c in self.planned)})")
            if self.reason == "time limit":
                where += "; the time limit ended collection early"
            return {"code": "planned-looks", "text": where}
        went_on = ("" if self.earlier is None else
                   f"; continued the sequence of run {self.earlier.run} of the same commit and "
                   f"pipeline ({self.earlier.values.size} trials)")
        if self.reason == "decided":
            text = (f"until decided: stopped at {n} trials after {self.looks} look(s), {verdict} "
                    f"(anytime-valid interval, cap max_n={self.max_n}){went_on}")
            return {"code": "until-decided", "text": text}
        why = (f"the cap max_n={self.max_n}" if self.reason == "max_n"
               else "the time limit")
        return {"code": "until-decided-capped",
                "text": f"until decided: {why} ended collection at {n} trials after {self.looks} "
                        f"look(s) without a decision; {self._what_decides()}{went_on}"}

    def _what_decides(self) -> str:
        """How many trials the anytime interval would need at this mean and sd."""
        from meanband import defaults
        from meanband.stats.stopping_caps import trials_to_decide

        interval = self.last.interval
        edges = [e for e in (self.band.low, self.band.high) if math.isfinite(e)]
        effect = (min(abs(interval.mean - e) for e in edges) / interval.sd
                  if edges and interval.sd > 0 else math.nan)
        needed = trials_to_decide(effect, confidence=interval.confidence,
                                  side=self.band.side, ceiling=defaults.MAX_TRIALS)
        if needed is None:
            return ("the mean sits too close to the edge for any count to decide it: look at "
                    "its distance from the edge")
        return (f"at this mean and sd the interval would decide at about {needed:,} trials: "
                "raise the cap (max_n), or look at the mean's distance from the edge")

    def check(
        self, low: Edge, high: Edge, center: Edge, tolerance: Tolerance, *, held: int,
        unit: str | None, settings: Settings,
    ) -> tuple[Decision, list[dict[str, str]], dict[str, Any]]:
        """The decision, its notes and the row's extra keys; refuse what would void the guarantee."""
        if any(edge is not None for edge in (low, high, center, tolerance)):
            band = make_band(low, high, center=center, tolerance=tolerance, unit=unit)
            if (band.low, band.high) != (self.band.low, self.band.high):
                raise TrialError(
                    f"this check's band differs from the band n={self.mode!r} looked at; call "
                    "check() without edges, or give the same band to both"
                )
        if held != self.values.size:
            raise TrialError(
                f"{held - self.values.size} trials were added after the n={self.mode!r} "
                "collection; its verdict holds only for the trials it looked at"
            )
        if settings.confidence != self.last.interval.confidence:
            raise TrialError(
                f"confidence {settings.confidence:g} differs from "
                f"{self.last.interval.confidence:g}, at which n={self.mode!r} looked; set it "
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


def is_sequential(n: object) -> bool:
    """Whether ``n`` asks for collection that stops when decided (either kind)."""
    return n == UNTIL_DECIDED or (isinstance(n, str) and n.startswith(PLANNED_LOOKS + ":"))


def parse_looks(n: str) -> tuple[int, str]:
    """``"looks:5"`` -> (5, "obrien-fleming"); ``"looks:4:pocock"`` -> (4, "pocock")."""
    parts = n.split(":")
    shapes = ", ".join(SHAPES)
    if len(parts) not in (2, 3) or not parts[1].strip().isdigit() or int(parts[1]) < 1:
        raise TrialError(
            f"n={n!r}: write n='looks:K' or n='looks:K:SHAPE' with K planned looks (a whole "
            f"number >= 1) and SHAPE one of {shapes}, e.g. n='looks:5'"
        )
    shape = parts[2].strip() if len(parts) == 3 else "obrien-fleming"
    if shape not in SHAPES:
        raise TrialError(f"n={n!r}: unknown spending shape {shape!r}; choose one of {shapes}")
    return int(parts[1]), shape


def collect(
    take: Callable[[int], np.ndarray], *, held: int, label: str, unit: str | None,
    band: dict[str, Edge] | Band | None, settings: Settings, max_n: int | None,
    block: int | None, default_block: int, mode: str = UNTIL_DECIDED,
    earlier: Earlier | None = None,
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
    if max_n is not None:
        cap = settings.check_count(_whole(max_n, "max_n", 2), "the call's argument max_n")
    else:
        cap = DEFAULT_MAX_N if settings.max_n is None else settings.max_n
    if mode != UNTIL_DECIDED:
        earlier = None  # planned looks keep their own plan; a rerun starts it again
        if block is not None:
            raise TrialError(f"block= goes with n='until-decided'; n={mode!r} looks where it "
                             "plans to (max_n / K trials apart)")
        return _planned(take, planned, cap, settings, mode)
    size = default_block if block is None else _whole(block, "block", 1)
    first_look = min(FIRST_LOOK, cap)
    parts: list[np.ndarray] = [] if earlier is None else [earlier.values[:cap]]
    taken = 0 if earlier is None else parts[0].size
    looks = 0
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
    return SequentialRun(values, planned, last, looks, size, cap, first_look, reason,
                         earlier=earlier)


def _planned(
    take: Callable[[int], np.ndarray], band: Band, cap: int, settings: Settings, mode: str,
) -> SequentialRun:
    """K looks at equal steps up to ``cap`` with Lan-DeMets boundaries (stats/sequential.py)."""
    looks, shape = parse_looks(mode)
    per_edge = side_alpha(settings.confidence, band.side)
    if cap < LOOK_TRIALS * looks:
        raise TrialError(f"max_n={cap} is too small for {looks} looks of at least {LOOK_TRIALS} "
                         f"trials each; give max_n >= {LOOK_TRIALS * looks}")
    design = _design(looks, 1.0 - per_edge, shape, settings.power)
    counts = tuple(math.ceil(f * cap) for f in design.fractions)
    parts: list[np.ndarray] = []
    taken = done = 0
    last: StopDecision | None = None
    reason = "max_n"
    for look, count in enumerate(counts):
        want = count - taken
        got = take(want)
        parts.append(got)
        taken += got.size
        if got.size < want:
            reason = "time limit"
            if taken >= 2:
                done += 1
                last = planned_look(np.concatenate(parts), band.low, band.high, design,
                                    look, confidence=settings.confidence)
            break
        done += 1
        last = planned_look(np.concatenate(parts), band.low, band.high, design, look,
                            confidence=settings.confidence)
        if last.stop:
            reason = "decided"
            break
    if last is None:
        raise TrialError(f"n={mode!r} took only {taken} trial before the time limit stopped it; "
                         "it needs at least 2 to judge: raise the limit")
    values = np.concatenate(parts)
    return SequentialRun(values, band, last, done, 0, cap, counts[0], reason, design, counts)


@functools.lru_cache(maxsize=64)
def _design(looks: int, confidence: float, shape: str, power: float) -> GroupSequentialDesign:
    """Boundaries depend only on these four; a suite of many checks computes them once."""
    return group_sequential_design(looks, confidence=confidence, shape=shape, power=power)


def _whole(value: Any, name: str, least: int) -> int:
    if isinstance(value, bool) or not isinstance(value, int | np.integer) or value < least:
        raise TrialError(f"{name}={value!r} must be a whole number >= {least}")
    return int(value)
