"""A check's history as a trend: each run's mean with its interval, and the change points found
in the series of run means, in text and as a picture."""

from __future__ import annotations

import itertools
import math
import os
import re
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from pathlib import Path
from typing import Any

import numpy as np

from meanband import defaults
from meanband.stats.changepoint import DEFAULT_ALPHA, DEFAULT_PERMUTATIONS, Trend, find_change_points
from meanband.store.history import RunInfo, StoredCheck
from meanband.units import SECONDS, format_number, format_value, time_scale

__all__ = [
    "STORE_TREND_RUNS",
    "CheckTrend",
    "RunPoint",
    "build_trends",
    "store_trends",
    "trend_lines",
    "write_trend_plots",
]

#: How many of the newest stored runs the trend pictures of a test session show.
STORE_TREND_RUNS = 60


@dataclass(frozen=True, slots=True)
class RunPoint:
    """One run of one check: its mean and two-sided t interval of the mean."""

    run_id: int
    label: str
    started: str
    commit: str | None
    n: int
    mean: float
    low: float
    high: float


@dataclass(frozen=True, slots=True)
class CheckTrend:
    """The runs of one check, oldest first, and the change points in their means."""

    nodeid: str
    series: str
    unit: str | None
    points: tuple[RunPoint, ...]
    trend: Trend
    confidence: float = defaults.CONFIDENCE

    @property
    def name(self) -> str:
        return self.nodeid + (f" [{self.series}]" if self.series else "")


def build_trends(
    history: Iterable[tuple[RunInfo, Sequence[StoredCheck]]],
    *,
    confidence: float = defaults.CONFIDENCE,
    alpha: float = DEFAULT_ALPHA,
    permutations: int = DEFAULT_PERMUTATIONS,
    seed: int = 0,
) -> list[CheckTrend]:
    """One trend per check from ``(run, its checks)`` pairs given oldest first.

    Runs where a check has fewer than two finite trials give no interval and are left out of
    that check's series.
    """
    from meanband.stats.methods import mean_interval

    grouped: dict[tuple[str, str], list[tuple[RunPoint, str | None]]] = {}
    for run, checks in history:
        for check in checks:
            values = check.values[np.isfinite(check.values)]
            if values.size < 2:
                continue
            interval = mean_interval(values, confidence)
            point = RunPoint(run.id, run.label, run.started, run.commit, int(values.size),
                             float(interval.mean), float(interval.low), float(interval.high))
            grouped.setdefault(check.key, []).append((point, check.unit))
    trends = []
    for (nodeid, series), entries in grouped.items():
        points = tuple(p for p, _unit in entries)
        means = [p.mean for p in points]
        scale = "log" if all(m > 0 for m in means) else "linear"
        trend = find_change_points(means, scale=scale, alpha=alpha, permutations=permutations,
                                   seed=seed)
        trends.append(CheckTrend(nodeid, series, entries[-1][1], points, trend, confidence))
    return trends


def store_trends(
    location: str | os.PathLike[str], keys: Iterable[tuple[str, str]], *,
    label: str | None = None, last: int = STORE_TREND_RUNS,
) -> list[CheckTrend]:
    """Trends of the checks ``keys`` over the newest ``last`` runs in a store (of one label)."""
    from meanband.store.history import HistoryStore

    wanted = set(keys)
    with HistoryStore(location, create=False, read_only=True) as store:
        runs = [r for r in store.runs() if label is None or r.label == label][:last]
        history = [(run, [c for c in store.checks(run.id) if c.key in wanted])
                   for run in reversed(runs)]
    return [t for t in build_trends(history) if len(t.points) >= 2]


def trend_lines(trend: CheckTrend) -> list[str]:
    """The text of ``meanband history trend`` for one check."""
    t, points = trend.trend, trend.points
    noise = (f"run-to-run noise {t.noise:.1%} of the mean" if t.scale == "log"
             else f"run-to-run noise {_value(t.noise, trend.unit)}") if math.isfinite(t.noise) else ""
    head = f"{trend.name}: {len(points)} runs, {points[0].run_id}..{points[-1].run_id}"
    lines = [head + (f", {noise}" if noise else "")]
    if t.note:
        lines.append(f"  no change points: {t.note}")
        return lines
    if not t.change_points:
        lines.append(f"  no change point (no change anywhere: permutation p = {t.series_p:.3g})")
        return lines
    for c in t.change_points:
        run = points[c.index]
        shift = f"{c.shift:+.1%}" if t.scale == "log" else _value(c.shift, trend.unit, signed=True)
        commit = f"commit {run.commit[:10]}" if run.commit else "no commit"
        lines.append(
            f"  change at run {run.run_id} ({commit}, {run.started}): "
            f"{_value(c.before, trend.unit)} -> {_value(c.after, trend.unit)} ({shift}); "
            f"p = {c.p_value:.3g}, adjusted {c.adjusted_p:.3g}: {c.verdict}"
        )
    return lines


def _value(value: float, unit: str | None, *, signed: bool = False) -> str:
    text = format_value(value, unit) if math.isfinite(value) else format_number(value)
    return f"+{text}" if signed and value > 0 else text


def write_trend_plots(
    trends: Sequence[CheckTrend], directory: str | os.PathLike[str], *,
    formats: Sequence[str] = ("png",), dpi: int = 100,
) -> list[Path]:
    """One ``trend-<check>.<format>`` picture per check: run means, intervals, change points."""
    from meanband.report.plots import _save, check_formats, require_matplotlib

    require_matplotlib()
    formats = check_formats(formats)
    target = Path(directory)
    target.mkdir(parents=True, exist_ok=True)
    written: list[Path] = []
    used: set[str] = set()
    for trend in trends:
        stem = _stem(trend.name, used)
        written += _save(_draw(trend), target / stem, formats, dpi)
    return written


def _stem(name: str, used: set[str]) -> str:
    base = "trend-" + (re.sub(r"[^A-Za-z0-9_.-]+", "_", name).strip("_.")[:80] or "check")
    stem, i = base, 2
    while stem in used:
        stem, i = f"{base}-{i}", i + 1
    used.add(stem)
    return stem


def _draw(trend: CheckTrend) -> Any:
    from meanband.report.plots import _figure

    points = trend.points
    timing = trend.unit == SECONDS
    factor = time_scale(float(np.median([p.mean for p in points]))) if timing else 1.0
    unit = {1e-9: "ns", 1e-6: "µs", 1e-3: "ms", 1.0: "s"}[factor] if timing else (trend.unit or "")
    x = np.arange(1, len(points) + 1)
    mean = np.array([p.mean for p in points]) / factor
    low = np.array([p.low for p in points]) / factor
    high = np.array([p.high for p in points]) / factor
    figure = _figure(8.0, 3.6)
    ax = figure.add_subplot()
    ax.errorbar(x, mean, yerr=[mean - low, high - mean], fmt="o", markersize=3, color="#2166ac",
                ecolor="#92c5de", elinewidth=1.2, capsize=2,
                label=f"run mean, {trend.confidence:.0%} interval")
    edges = [0, *(c.index for c in trend.trend.change_points), len(points)]
    for i, c in enumerate(trend.trend.change_points, start=1):
        style = ("-", "#b2182b") if c.confirmed else (":", "#999999")
        ax.axvline(c.index + 0.5, linestyle=style[0], color=style[1], linewidth=1.0,
                   label=f"change: {c.verdict}" if i == 1 or c.confirmed else None)
    for start, stop in itertools.pairwise(edges):
        level = float(np.exp(np.mean(np.log(mean[start:stop])))) if trend.trend.scale == "log" \
            else float(np.mean(mean[start:stop]))
        ax.hlines(level, start + 0.5, stop + 0.5, color="black", linewidth=1.0)
    step = max(1, len(points) // 12)
    ax.set_xticks(x[::step], [str(p.run_id) for p in points[::step]], fontsize=7)
    ax.set_xlabel("run")
    ax.set_ylabel(unit)
    ax.set_title(trend.name, fontsize=9)
    handles, labels = ax.get_legend_handles_labels()
    unique = dict(zip(labels, handles, strict=True))
    ax.legend(unique.values(), unique.keys(), fontsize=7, loc="best")
    return figure
