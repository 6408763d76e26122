"""A baseline as a set of stored runs: their trials per check and the run-to-run noise of each.

Read once at session start (by the controller, or read-only by a worker given the run ids), so
every check is compared with the same runs while it is being made.
"""

from __future__ import annotations

import math
from collections.abc import Mapping, Sequence
from dataclasses import dataclass, field
from datetime import datetime, timezone
from typing import Any

import numpy as np

from meanband.stats.regression import is_timing
from meanband.stats.run_noise import (
    ASSUMED_RUN_NOISE,
    Between,
    between_runs,
    pool_between,
    run_level,
)
from meanband.store.history import HistoryStore, NoiseFloor, RunInfo, StoredCheck

__all__ = ["Baseline", "BaselineCheck", "choose_between", "load_baseline", "read_baseline"]


@dataclass(frozen=True, slots=True)
class BaselineCheck:
    """One check across the baseline runs: its unit and source, trials of each run (newest
    first), and the run-to-run variance the comparison uses."""

    unit: str | None
    source: str | None
    runs: tuple[np.ndarray, ...] = field(repr=False)
    between: Between
    loads: tuple[float, ...] = ()


@dataclass(frozen=True, slots=True)
class Baseline:
    """The runs a comparison is made against, newest first, and each check's stored trials."""

    runs: tuple[RunInfo, ...]
    checks: Mapping[tuple[str, str], BaselineCheck]
    floors: Mapping[tuple[str, str], NoiseFloor]
    pooled: Between | None

    @property
    def newest(self) -> RunInfo:
        return self.runs[0]

    @property
    def run_ids(self) -> list[int]:
        return [run.id for run in self.runs]

    def age_days(self, now: datetime | None = None) -> float | None:
        """Days since the newest baseline run started, or None when its time cannot be read."""
        try:
            started = datetime.fromisoformat(self.newest.started)
        except ValueError:
            return None
        if started.tzinfo is None:
            started = started.replace(tzinfo=timezone.utc)
        moment = now or datetime.now(timezone.utc)
        return (moment - started).total_seconds() / 86400.0

    def describe(self) -> dict[str, Any]:
        """What a row's ``baseline`` entry says about the runs compared with (builtin types)."""
        run = self.newest
        return {"run": run.id, "label": run.label, "started": run.started, "commit": run.commit,
                "runs": self.run_ids}


def load_baseline(
    store: HistoryStore, ref: str | int | None, keep: int, *,
    assumed: float = ASSUMED_RUN_NOISE,
) -> Baseline:
    """The newest ``keep`` runs of label ``ref`` (or the one run it names), read from ``store``."""
    return _read(store, tuple(store.baseline_runs(ref, keep)), assumed)


def read_baseline(
    store: HistoryStore, run_ids: Sequence[int], *, assumed: float = ASSUMED_RUN_NOISE
) -> Baseline:
    """The baseline made of exactly the runs ``run_ids`` (newest first)."""
    by_id = {run.id: run for run in store.runs()}
    runs = tuple(by_id[i] for i in run_ids if i in by_id)
    if not runs:
        raise ValueError(f"none of the runs {list(run_ids)} is in the store any more")
    return _read(store, runs, assumed)


def _read(store: HistoryStore, runs: tuple[RunInfo, ...], assumed: float) -> Baseline:
    """The stored checks of ``runs`` and the label's noise floors, assembled."""
    stored: dict[tuple[str, str], list[StoredCheck]] = {}
    for run in runs:
        for check in store.checks(run.id):
            stored.setdefault(check.key, []).append(check)
    floors = store.noise_floors(runs[0].label)
    return assemble(runs, stored, floors, assumed=assumed)


def assemble(
    runs: tuple[RunInfo, ...], stored: Mapping[tuple[str, str], list[StoredCheck]],
    floors: Mapping[tuple[str, str], NoiseFloor], *, assumed: float = ASSUMED_RUN_NOISE,
) -> Baseline:
    """Each check's runs (those whose unit matches the newest) and its run-to-run variance."""
    own: dict[tuple[str, str], Between | None] = {}
    kept: dict[tuple[str, str], tuple[StoredCheck, list[np.ndarray]]] = {}
    for key, checks in stored.items():
        newest = checks[0]
        same = [c.values for c in checks if c.unit == newest.unit and c.values.size >= 2]
        kept[key] = (newest, same)
        own[key] = _own_between(same)
    pooled = pool_between([b for b in own.values() if b is not None])
    result = {
        key: BaselineCheck(
            newest.unit, newest.source, tuple(values),
            choose_between(own[key], pooled, floors.get(key),
                           assumed if is_timing(newest.unit, newest.source) else 0.0),
            tuple(float(c.row["load"]) for c in stored[key]
                  if isinstance(c.row.get("load"), int | float)),
        )
        for key, (newest, values) in kept.items()
    }
    return Baseline(runs, result, dict(floors), pooled)


def _own_between(runs: list[np.ndarray]) -> Between | None:
    if len(runs) < 2:
        return None
    positive = all(np.all(r > 0) for r in runs)
    scale = abs(float(np.mean([np.mean(r) for r in runs]))) or 1.0
    return between_runs([run_level(r, log=positive, scale=scale) for r in runs])


def choose_between(
    own: Between | None, pooled: Between | None, floor: NoiseFloor | None, assumed: float,
) -> Between:
    """The run-to-run variance a check is judged with.

    The suite's pooled estimate is steadier than a check's own (many checks, few runs each), so
    it is used unless the check's own estimate is larger beyond chance: above the pooled one
    times the 99th percentile of F(own df, pooled df), a variance-ratio test (Snedecor; common
    practice for pooling variances). A calibrated floor then bounds it from below. The assumed
    allowance applies only when nothing measured it (``assumed`` is 0 for a value that is not a
    timing: machine noise does not move a sensor reading). Every step errs towards "cannot tell
    yet" rather than towards a false "regressed".
    """
    chosen = pooled or own
    if own is not None and pooled is not None and own is not pooled and pooled.df > 0:
        from scipy import stats

        critical = float(stats.f.ppf(0.99, own.df, pooled.df))
        if own.variance > pooled.variance * critical:
            chosen = own
    if floor is not None and math.isfinite(floor.between_sd):
        calibrated = Between(floor.between_sd**2, float(max(floor.df, 1)), "calibration",
                             floor.runs)
        if chosen is None or calibrated.variance > chosen.variance:
            chosen = calibrated
    if chosen is None:
        return Between(assumed**2, math.inf, "assumed" if assumed > 0 else "none measured", 1)
    return chosen
