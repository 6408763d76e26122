"""An invented greenhouse irrigation controller: simulated probes and a watering planner."""

from __future__ import annotations

import numpy as np


class Probe:
    """A simulated sensor channel: readings scatter normally around a true mean.

    Each test makes its own probe from a fixed seed, so a run reads the same sequence.
    """

    def __init__(self, mean: float, sd: float, seed: int) -> None:
        self._rng = np.random.default_rng(seed)
        self.mean = mean
        self.sd = sd

    def read(self) -> float:
        return float(self._rng.normal(self.mean, self.sd))


def plan_watering(moisture: list[float], days: int = 14) -> list[float]:
    """Minutes of drip per zone per day from a simple water balance (pure Python on purpose)."""
    minutes = []
    for level in moisture:
        store = level
        total = 0.0
        for day in range(days):
            store -= 0.9 + 0.05 * (day % 7)  # evaporation, higher late in the week
            if store < 28.0:
                top_up = (31.0 - store) / 0.35  # 0.35 % per minute of drip
                store += top_up * 0.35
                total += top_up
        minutes.append(total / days)
    return minutes
