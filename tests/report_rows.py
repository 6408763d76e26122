"""Result rows in the shape the plugin records (see recorder.py), for the reporter tests."""

from __future__ import annotations

import math
from typing import Any

import numpy as np
from meanband.stats.bands import make_band
from meanband.stats.decision import decide
from meanband.stats.notes import assumption_notes


def make_row(
    nodeid: str,
    values: Any,
    *,
    series: str = "",
    band: dict[str, Any] | None = None,
    unit: str | None = None,
    warmup: Any = (),
    confidence: float = 0.95,
    **extra: Any,
) -> dict[str, Any]:
    """A check row (or an unchecked one when ``band`` is None) built with the core's decide()."""
    x = np.asarray(values, dtype=float)
    decision = None
    notes: list[dict[str, str]] = []
    if band is not None:
        result = decide(x, make_band(**band, unit=unit), confidence=confidence)
        decision = result.to_dict()
        notes = assumption_notes(result.diagnostics)
    row = {
        "nodeid": nodeid,
        "series": series,
        "kind": "unchecked" if band is None else "check",
        "unit": unit,
        "source": "time" if unit == "s" else "sample",
        "values": x.tolist(),
        "warmup": [float(v) for v in warmup],
        "decision": decision,
        "notes": notes,
        "settings": {"confidence": confidence, "method": "t", "n": int(x.size), "min_n": 10},
        "timing": None,
    }
    row.update(extra)
    return row


def sample_rows(seed: int = 7) -> list[dict[str, Any]]:
    """Invented scenario: a quoting service's latency budgets and a climate-chamber probe."""
    rng = np.random.default_rng(seed)
    return [
        make_row("tests/test_quote.py::test_quote_latency", rng.normal(1.1e-3, 1e-4, 40),
                 band={"high": "2ms"}, unit="s", warmup=rng.normal(2.5e-3, 2e-4, 5)),
        make_row("tests/test_quote.py::test_batch_latency", rng.normal(1.98e-3, 2e-4, 12),
                 band={"high": "2ms"}, unit="s"),
        make_row("tests/test_chamber.py::test_probe_mean", rng.normal(85.05, 0.15, 25),
                 series="probe-a", band={"center": 85.0, "tolerance": 0.4}, unit="degC"),
        make_row("tests/test_chamber.py::test_probe_mean", rng.normal(86.2, 0.15, 25),
                 series="probe-b", band={"center": 85.0, "tolerance": 0.4}, unit="degC"),
        make_row("tests/test_chamber.py::test_supply_rail", rng.normal(12.3, 0.2, 20),
                 band={"low": 11.5}, unit="V"),
        make_row("tests/test_chamber.py::test_fan_speed", rng.normal(2400.0, 30.0, 15),
                 unit="rpm"),
    ]


def same(a: Any, b: Any) -> bool:
    """Deep equality in which NaN equals NaN (undefined statistics stay undefined)."""
    if isinstance(a, float) and isinstance(b, float):
        return (math.isnan(a) and math.isnan(b)) or a == b
    if isinstance(a, dict) and isinstance(b, dict):
        return a.keys() == b.keys() and all(same(a[k], b[k]) for k in a)
    if isinstance(a, list) and isinstance(b, list):
        return len(a) == len(b) and all(same(x, y) for x, y in zip(a, b, strict=True))
    return type(a) is type(b) and a == b
