"""A/A calibration: the run-to-run noise floor of each check, from runs of unchanged code.

Record the same code several times under one label (``pytest --meanband-record=aa``, three
times or more), then ``meanband history calibrate --label aa --for main`` measures, per check,
how far whole runs move against each other and whether position in the run biases its trials,
and stores that floor with the baseline label. A comparison with that baseline never allows for
less run-to-run noise than the floor.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np

from meanband.stats.run_noise import between_runs, position_shift, run_level
from meanband.store.history import HistoryStore, NoiseFloor, RunInfo

__all__ = ["MIN_RUNS", "Calibration", "calibrate"]

#: Fewer runs than this give no between-run estimate at all.
MIN_RUNS = 2


@dataclass(frozen=True, slots=True)
class Calibration:
    """The runs a calibration read and the floor of each check (checks in fewer than two of
    the runs get none)."""

    runs: tuple[RunInfo, ...]
    floors: tuple[NoiseFloor, ...]
    skipped: tuple[str, ...]


def calibrate(store: HistoryStore, label: str, keep: int) -> Calibration:
    """Noise floors from the ``keep`` newest runs labelled ``label`` (at least two)."""
    runs = tuple(store.baseline_runs(label, keep))
    if len(runs) < MIN_RUNS:
        raise ValueError(
            f"an A/A calibration needs at least {MIN_RUNS} runs of the same code under one "
            f"label; {label!r} has {len(runs)}. Record more with --meanband-record={label}"
        )
    trials: dict[tuple[str, str], list[np.ndarray]] = {}
    for run in runs:
        for check in store.checks(run.id):
            if check.values.size >= 2:
                trials.setdefault(check.key, []).append(check.values)
    floors: list[NoiseFloor] = []
    skipped: list[str] = []
    for (nodeid, series), values in trials.items():
        name = nodeid + (f" [{series}]" if series else "")
        if len(values) < MIN_RUNS:
            skipped.append(f"{name}: in {len(values)} of the {len(runs)} runs")
            continue
        positive = all(np.all(v > 0) for v in values)
        scale = abs(float(np.mean([np.mean(v) for v in values]))) or 1.0
        between = between_runs([run_level(v, log=positive, scale=scale) for v in values])
        assert between is not None
        shift = position_shift(values) if positive else None
        floors.append(NoiseFloor(
            nodeid, series, between.sd, int(between.df), len(values),
            None if shift is None else shift[0], None if shift is None else shift[1],
        ))
    return Calibration(runs, tuple(floors), tuple(skipped))
