"""n="auto" for the recorder: collect by Stein's two-stage rule, then check against its band."""

from __future__ import annotations

from collections.abc import Callable
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.record.settings import Settings
from meanband.stats.bands import Band, Edge, Tolerance, make_band
from meanband.stats.decision import Decision
from meanband.stats.notes import assumption_notes
from meanband.stats.twostage import (
    DEFAULT_MAX_N,
    DEFAULT_PILOT,
    TwoStageRun,
    decide_two_stage,
    run_two_stage,
)

__all__ = ["AdaptiveRun", "collect", "planning_band", "refuse_options"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

_BAND_KEYS = ("low", "high", "center", "tolerance")


def refuse_options(max_n: Any, band: Any, pilot: Any) -> None:
    """``max_n``, ``band`` and ``pilot`` mean something only with ``n="auto"``: refuse them."""
    given = [name for name, value in (("max_n", max_n), ("band", band), ("pilot", pilot))
             if value is not None]
    if given:
        raise TrialError(
            f"{', '.join(given)}= go with n='auto' only (max_n= and band= also with "
            "n='until-decided'); drop them or pass such an n"
        )


def planning_band(band: dict[str, Edge] | Band | None, unit: str | None) -> Band:
    """The band an n='auto' count is planned for, from ``band=dict(high=...)`` or a Band."""
    if band is None:
        raise TrialError(
            "n='auto' plans its count for a band, so it needs the band before collecting: "
            "pass band=dict(high=...) (or low=, or center= and tolerance=)"
        )
    if isinstance(band, Band):
        return band
    if not isinstance(band, dict):
        raise TrialError(f"band= must be a dict such as dict(high='3ms') or a Band, got {band!r}")
    unknown = sorted(set(band) - set(_BAND_KEYS))
    if unknown:
        raise TrialError(f"band= has unknown key {unknown[0]!r}; use low, high, center, tolerance")
    return make_band(unit=unit, **band)


@dataclass(frozen=True)
class AdaptiveRun:
    """A series' two-stage collection and the band it was planned for."""

    run: TwoStageRun
    band: Band

    @property
    def values(self) -> np.ndarray:
        """All trials, pilot first."""
        return self.run.values

    def check(
        self, low: Edge, high: Edge, center: Edge, tolerance: Tolerance, *, held: int,
        unit: str | None, settings: Settings,
    ) -> tuple[Decision, list[dict[str, str]], dict[str, Any]]:
        """The decision, its notes, and the row's extra keys; refuse what would void the plan.

        ``held`` is the number of trials the series holds now. No edges: the planning band.
        """
        plan = self.run.plan
        if any(edge is not None for edge in (low, high, center, tolerance)):
            band = make_band(low, high, center=center, tolerance=tolerance, unit=unit)
            if (band.low, band.high) != (self.band.low, self.band.high):
                raise TrialError(
                    "this check's band differs from the band the n='auto' count was planned "
                    "for; call check() without edges, or give the same band to both"
                )
        if held != plan.total_n:
            raise TrialError(
                f"{held - plan.total_n} trials were added after the n='auto' collection; the "
                "two-stage verdict holds only for the trials it planned"
            )
        if settings.confidence != plan.confidence:
            raise TrialError(
                f"confidence {settings.confidence:g} differs from {plan.confidence:g}, at which "
                "the n='auto' count was planned; set it on the marker or before collecting"
            )
        if settings.method != "t":
            raise TrialError(
                f"method {settings.method!r} cannot be used with n='auto': the two-stage "
                "verdict uses Stein's interval"
            )
        decision = decide_two_stage(
            self.run.pilot, self.run.second, self.band, plan, alpha=settings.normality_alpha
        )
        notes = assumption_notes(
            decision.diagnostics, min_n=settings.min_n, normality_alpha=settings.normality_alpha,
            unit=self.band.unit,
        )
        notes.append({"code": "two-stage-capped" if plan.capped else "two-stage",
                      "text": plan.note()})
        return decision, notes, {"two_stage": plan.to_dict()}


def collect(
    take: Callable[[int], np.ndarray], *, held: int, label: str, unit: str | None,
    band: dict[str, Edge] | Band | None, settings: Settings, max_n: int | None,
    pilot: int | None,
) -> AdaptiveRun:
    """Stein's two-stage collection: a pilot, then the count its sd and margin call for.

    ``take(count)`` collects ``count`` trials; ``held`` is how many the series already holds
    (the pilot must be its first trials). ``max_n`` caps the total, pilot included.
    """
    if held:
        raise TrialError(
            f"n='auto' needs a fresh series, but {label or '(default)'} already holds {held} "
            "trials; use trials.series('name') for the adaptive one"
        )
    planned = planning_band(band, unit)
    if isinstance(max_n, int) and not isinstance(max_n, bool):
        settings.check_count(max_n, "the call's argument max_n")
    run = run_two_stage(
        take, planned,
        pilot_n=DEFAULT_PILOT if pilot is None else pilot,
        confidence=settings.confidence, power=settings.power,
        max_n=max_n if max_n is not None else (
            DEFAULT_MAX_N if settings.max_n is None else settings.max_n),
    )
    return AdaptiveRun(run, planned)
