"""The object the ``trials`` fixture hands a test: collect trials, then check their mean."""

from __future__ import annotations

from collections.abc import Callable, Iterable
from typing import Any

import numpy as np

from meanband.bands import Band, Decision, Edge, decide, make_band
from meanband.errors import BandViolation, TrialError
from meanband.explain import assumption_notes, describe
from meanband.interval import Interval, mean_interval
from meanband.sample import as_sample
from meanband.settings import Settings
from meanband.timing import time_trials
from meanband.units import SECONDS

__all__ = ["Recorder", "Series"]

Row = dict[str, Any]


class Series:
    """One named stream of trials in a test, with the checks made on it."""

    def __init__(self, name: str, settings: Settings, nodeid: str = "") -> None:
        self.name = name
        self.settings = settings
        self.nodeid = nodeid
        self.unit: str | None = None
        self.source: str | None = None
        self._values = np.empty(0, dtype=np.float64)
        self._warmup = np.empty(0, dtype=np.float64)
        self._timing: dict[str, Any] | None = None
        self._rows: list[Row] = []
        self._two_stage: tuple[Any, Band] | None = None  # (TwoStageRun, planning band)

    # -- collecting -------------------------------------------------------------------------

    def time(
        self, fn: Callable[..., Any], *args: Any, n: int | str | None = None,
        warmup: int | str | None = None, max_n: int | None = None,
        band: dict[str, Edge] | Band | None = None, pilot: int | None = None, **kwargs: Any,
    ) -> np.ndarray:
        """Run ``n`` timed trials of ``fn(*args, **kwargs)``; each value is seconds per call.

        ``n="auto"`` picks the count by Stein's two-stage rule for ``band`` (see ``_auto``).
        """
        if n == "auto":
            settings = self.settings.merged(warmup=warmup)
            self._claim(SECONDS, "time")
            warm = [settings.warmup]

            def collect(count: int) -> np.ndarray:
                run = time_trials(fn, args, kwargs, n=count, warmup=warm.pop() if warm else 0)
                self._warmup = np.concatenate([self._warmup, run.warmup])
                self._timing = dict(run.details)
                return run.values

            return self._auto(collect, settings, max_n=max_n, band=band, pilot=pilot)
        _refuse_auto_options(max_n, band, pilot)
        settings = self.settings.merged(n=n, warmup=warmup)
        self._claim(SECONDS, "time")
        run = time_trials(fn, args, kwargs, n=settings.n, warmup=settings.warmup)
        self._append(run.values)
        self._warmup = np.concatenate([self._warmup, run.warmup])
        self._timing = dict(run.details)
        return run.values

    def sample(
        self, fn: Callable[..., Any], *args: Any, n: int | str | None = None,
        unit: str | None = None, max_n: int | None = None,
        band: dict[str, Edge] | Band | None = None, pilot: int | None = None, **kwargs: Any,
    ) -> np.ndarray:
        """Record ``n`` values returned by ``fn(*args, **kwargs)``, in ``unit``.

        ``n="auto"`` picks the count by Stein's two-stage rule for ``band`` (see ``_auto``).
        """

        def collect(count: int) -> np.ndarray:
            collected = [fn(*args, **kwargs) for _ in range(count)]
            try:
                return as_sample(collected, minimum=1)
            except TrialError as exc:
                raise TrialError(f"{_callable_name(fn)} returned bad values: {exc}") from None

        if n == "auto":
            self._claim(unit, "sample")
            return self._auto(collect, self.settings, max_n=max_n, band=band, pilot=pilot)
        _refuse_auto_options(max_n, band, pilot)
        settings = self.settings.merged(n=n)
        self._claim(unit, "sample")
        values = collect(settings.n)
        self._append(values)
        return values

    def _auto(
        self, collect: Callable[[int], np.ndarray], settings: Settings, *, max_n: int | None,
        band: dict[str, Edge] | Band | None, pilot: int | None,
    ) -> np.ndarray:
        """Stein's two-stage collection: a pilot, then the count its sd and margin call for.

        The band must be known before collecting, so it is given here (``band=dict(high=...)``);
        a later ``check()`` without edges uses it. ``max_n`` caps the total (pilot included).
        """
        from meanband import twostage

        if self._values.size:
            raise TrialError(
                f"n='auto' needs a fresh series, but {self._label() or '(default)'} already holds "
                f"{self._values.size} trials; use trials.series('name') for the adaptive one"
            )
        planned = _planning_band(band, self.unit)
        run = twostage.run_two_stage(
            collect, planned,
            pilot_n=twostage.DEFAULT_PILOT if pilot is None else pilot,
            confidence=settings.confidence, power=settings.power,
            max_n=twostage.DEFAULT_MAX_N if max_n is None else max_n,
        )
        self._append(run.values)
        self._two_stage = (run, planned)
        return run.values

    def add(self, value: float, *, unit: str | None = None) -> None:
        """Record one value measured elsewhere."""
        self.extend([value], unit=unit)

    def extend(self, values: Iterable[float] | np.ndarray, *, unit: str | None = None) -> None:
        """Record values measured elsewhere; nothing is recorded if any value is bad."""
        clean = as_sample(values, minimum=0)
        self._claim(unit, "values")
        self._append(clean)

    @property
    def values(self) -> np.ndarray:
        """The trials recorded so far (warm-up excluded), read-only."""
        view = self._values.view()
        view.flags.writeable = False
        return view

    @property
    def warmup_values(self) -> np.ndarray:
        """Warm-up trials: timed, kept for charts, left out of the statistics."""
        view = self._warmup.view()
        view.flags.writeable = False
        return view

    # -- analysing and checking -------------------------------------------------------------

    def interval(
        self, confidence: float | None = None, side: str = "two-sided", method: str | None = None
    ) -> Interval:
        """The confidence interval of the mean of the trials so far."""
        settings = self.settings.merged(confidence=confidence, method=method)
        return mean_interval(self._values, settings.confidence, side, settings.method)

    def check(
        self,
        low: Edge = None,
        high: Edge = None,
        *,
        center: Edge = None,
        tolerance: Edge = None,
        confidence: float | None = None,
        method: str | None = None,
    ) -> Decision:
        """Pass only if the interval of the mean lies inside the band; raise BandViolation if not.

        Two edges: the two-sided interval must lie inside. One edge (a budget): the one-sided
        bound must lie on the right side of it.
        """
        settings = self.settings.merged(confidence=confidence, method=method)
        if self._two_stage is not None:
            decision, notes, row = self._check_two_stage(low, high, center, tolerance, settings)
        else:
            band = make_band(low, high, center=center, tolerance=tolerance, unit=self.unit)
            decision = decide(
                self._values, band, confidence=settings.confidence, method=settings.method,
                power=settings.power,
            )
            notes = assumption_notes(
                decision.diagnostics, min_n=settings.min_n,
                normality_alpha=settings.normality_alpha,
            )
            row = self._row("check", settings, decision.to_dict(), notes)
        self._rows.append(row)
        if not decision.passed:
            raise BandViolation(describe(decision, label=self._label(), notes=notes), decision)
        return decision

    def _check_two_stage(
        self, low: Edge, high: Edge, center: Edge, tolerance: Edge, settings: Settings
    ) -> tuple[Decision, list[dict[str, str]], Row]:
        from meanband.twostage import decide_two_stage

        run, planned = self._two_stage  # type: ignore[misc]
        if any(edge is not None for edge in (low, high, center, tolerance)):
            band = make_band(low, high, center=center, tolerance=tolerance, unit=self.unit)
            if (band.low, band.high) != (planned.low, planned.high):
                raise TrialError(
                    "this check's band differs from the band the n='auto' count was planned "
                    "for; call check() without edges, or give the same band to both"
                )
        if self._values.size != run.plan.total_n:
            raise TrialError(
                f"{self._values.size - run.plan.total_n} trials were added after the n='auto' "
                "collection; the two-stage verdict holds only for the trials it planned"
            )
        if settings.confidence != run.plan.confidence:
            raise TrialError(
                f"confidence {settings.confidence:g} differs from {run.plan.confidence:g}, at "
                "which the n='auto' count was planned; set it on the marker or before collecting"
            )
        if settings.method != "t":
            raise TrialError(
                f"method {settings.method!r} cannot be used with n='auto': the two-stage "
                "verdict uses Stein's interval"
            )
        decision = decide_two_stage(
            run.pilot, run.second, planned, run.plan, alpha=settings.normality_alpha
        )
        notes = assumption_notes(
            decision.diagnostics, min_n=settings.min_n, normality_alpha=settings.normality_alpha
        )
        code = "two-stage-capped" if run.plan.capped else "two-stage"
        notes.append({"code": code, "text": run.plan.note()})
        row = self._row("check", settings, decision.to_dict(), notes)
        row["settings"]["n"] = "auto"
        row["two_stage"] = run.plan.to_dict()
        return decision, notes, row

    # -- reporting --------------------------------------------------------------------------

    def rows(self) -> list[Row]:
        """The rows for the summary: one per check, or one "unchecked" row for lone trials."""
        if self._rows:
            return list(self._rows)
        if self._values.size:
            return [self._row("unchecked", self.settings, None, [])]
        return []

    def _row(
        self, kind: str, settings: Settings, decision: dict[str, Any] | None,
        notes: list[dict[str, str]],
    ) -> Row:
        return {
            "nodeid": self.nodeid,
            "series": self.name,
            "kind": kind,
            "unit": self.unit,
            "source": self.source,
            "values": self._values.tolist(),
            "warmup": self._warmup.tolist(),
            "decision": decision,
            "notes": notes,
            "settings": settings.to_dict(),
            "timing": None if self._timing is None else dict(self._timing),
        }

    def _label(self) -> str:
        return self.name

    def _claim(self, unit: str | None, source: str) -> None:
        """Keep one unit per series: mixing seconds with volts would make a meaningless mean."""
        if not self._values.size:
            self.unit, self.source = unit, source
        elif unit is not None and unit != self.unit:
            raise TrialError(
                f"series {self.name or '(default)'} holds trials in {self.unit or 'no unit'}; "
                f"cannot add trials in {unit}. Use trials.series('other') for another quantity"
            )

    def _append(self, values: np.ndarray) -> None:
        self._values = np.concatenate([self._values, values])


class Recorder(Series):
    """The ``trials`` fixture: the default series, plus named ones from :meth:`series`."""

    def __init__(
        self, settings: Settings, nodeid: str = "", *,
        series_settings: dict[str, Settings] | None = None, other_series: Settings | None = None,
    ) -> None:
        super().__init__("", settings, nodeid)
        self._series: dict[str, Series] = {}
        # A plan may give named series counts of their own; unplanned series use other_series.
        self._series_settings = dict(series_settings or {})
        self._other_series = settings if other_series is None else other_series

    def series(self, name: str) -> Series:
        """The series called ``name`` (created on first use), e.g. ``trials.series("cold")``."""
        if not isinstance(name, str) or not name:
            raise TrialError(f"a series needs a non-empty name, got {name!r}")
        if name not in self._series:
            settings = self._series_settings.get(name, self._other_series)
            self._series[name] = Series(name, settings, self.nodeid)
        return self._series[name]

    def all_rows(self) -> list[Row]:
        """Rows of the default series and every named series, in creation order."""
        rows = self.rows()
        for named in self._series.values():
            rows.extend(named.rows())
        return rows


def _refuse_auto_options(max_n: Any, band: Any, pilot: Any) -> None:
    given = [name for name, value in (("max_n", max_n), ("band", band), ("pilot", pilot))
             if value is not None]
    if given:
        raise TrialError(f"{', '.join(given)}= go with n='auto' only; drop them or pass n='auto'")


def _planning_band(band: dict[str, Edge] | Band | None, unit: str | None) -> Band:
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
    unknown = sorted(set(band) - {"low", "high", "center", "tolerance"})
    if unknown:
        raise TrialError(f"band= has unknown key {unknown[0]!r}; use low, high, center, tolerance")
    return make_band(unit=unit, **band)


def _callable_name(fn: Callable[..., Any]) -> str:
    return getattr(fn, "__qualname__", None) or repr(fn)
