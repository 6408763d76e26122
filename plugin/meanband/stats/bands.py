"""Bands: the range a mean must lie in, built from edges or from a center and tolerance."""

from __future__ import annotations

import math
from dataclasses import dataclass
from typing import Any

from meanband.errors import TrialError, hide_plugin_frames
from meanband.units import duration_scale, parse_duration

__all__ = ["Band", "Edge", "Tolerance", "make_band", "side_alpha"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

Edge = float | int | str | None
#: A tolerance: symmetric ``0.4``, or asymmetric ``(below, above)`` such as ``(0.3, 0.5)``.
Tolerance = Edge | tuple[Edge, Edge]


@dataclass(frozen=True, slots=True)
class Band:
    """The range the mean must lie in; an open edge is -inf or +inf."""

    low: float
    high: float
    unit: str | None = None

    @property
    def side(self) -> str:
        """Which interval the check uses: ``two-sided``, ``upper`` (a budget) or ``lower``."""
        if math.isfinite(self.low) and math.isfinite(self.high):
            return "two-sided"
        return "upper" if math.isfinite(self.high) else "lower"

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only."""
        return {"low": float(self.low), "high": float(self.high), "unit": self.unit}


def make_band(
    low: Edge = None,
    high: Edge = None,
    *,
    center: Edge = None,
    tolerance: Tolerance = None,
    unit: str | None = None,
) -> Band:
    """Build a band from ``low``/``high`` or from ``center`` +/- ``tolerance``.

    ``tolerance=(below, above)`` is asymmetric: ``center=85, tolerance=(0.3, 0.5)`` is the
    band 84.7..85.5 (-0.3/+0.5). Edges may be duration strings (``"3ms"``) when the trials are
    in a time unit (``"s"``, ``"ms"``, ``"us"``, ``"ns"``): they are converted to it.
    """
    if center is not None or tolerance is not None:
        if low is not None or high is not None:
            raise TrialError(
                "give the band either as low=/high= or as center=/tolerance=, not both"
            )
        if center is None or tolerance is None:
            raise TrialError("center= and tolerance= go together; give both")
        middle = _edge_value(center, unit, "center")
        below, above = _tolerance_values(tolerance, unit)
        low_value, high_value = middle - below, middle + above
    else:
        if low is None and high is None:
            raise TrialError("a band needs at least one edge: give low=, high= or center=/tolerance=")
        low_value = -math.inf if low is None else _edge_value(low, unit, "low")
        high_value = math.inf if high is None else _edge_value(high, unit, "high")
    if low_value == math.inf or high_value == -math.inf:
        raise TrialError(f"a band edge cannot lie beyond all values (low={low!r}, high={high!r})")
    if not (math.isfinite(low_value) or math.isfinite(high_value)):
        raise TrialError("a band needs at least one finite edge; both edges are open")
    if low_value > high_value:
        raise TrialError(
            f"the band's low edge {low!r} lies above its high edge {high!r}; swap them"
        )
    return Band(low_value, high_value, unit)


def _tolerance_values(tolerance: Tolerance, unit: str | None) -> tuple[float, float]:
    """(below, above) from a symmetric tolerance or an asymmetric pair, each finite and >= 0."""
    if isinstance(tolerance, tuple | list):
        if len(tolerance) != 2:
            raise TrialError(
                f"an asymmetric tolerance is a pair (below, above), e.g. (0.3, 0.5) for "
                f"-0.3/+0.5; got {tolerance!r}"
            )
        parts = (tolerance[0], tolerance[1])
    else:
        parts = (tolerance, tolerance)
    values = tuple(_edge_value(part, unit, "tolerance") for part in parts)
    if values[0] < 0 or values[1] < 0:
        raise TrialError(
            f"tolerance must be >= 0 (a pair is given as magnitudes below and above the center, "
            f"e.g. (0.3, 0.5)), got {tolerance!r}"
        )
    return values[0], values[1]


def _edge_value(edge: Edge, unit: str | None, name: str) -> float:
    if isinstance(edge, str):
        per_unit = duration_scale(unit)
        if per_unit is None:
            try:
                parse_duration(edge)
            except TrialError:
                raise TrialError(f"{name}= must be a number, got {edge!r}") from None
            remedy = ("record them with unit='s' (e.g. trials.extend(values, unit='s')) to give "
                      "edges as durations" if unit is None else "give a plain number in "
                      f"{unit}")
            raise TrialError(
                f"{name}={edge!r}: a band edge with a time unit needs trials in a time unit "
                f"(these trials are in {unit or 'no unit'}); {remedy}"
            )
        return parse_duration(edge) / per_unit
    try:
        value = float(edge)  # type: ignore[arg-type]
    except (TypeError, ValueError) as exc:
        raise TrialError(f"{name}= must be a number, got {edge!r}") from exc
    if math.isnan(value) or (name in ("center", "tolerance") and math.isinf(value)):
        raise TrialError(f"{name}= must be a finite number, got {edge!r}")
    return value


def side_alpha(level: float, side: str) -> float:
    """The tail probability one edge gets: half of ``1 - level`` for a two-sided interval, all
    of it for a one-sided bound (``upper`` or ``lower``)."""
    return (1.0 - level) / 2.0 if side == "two-sided" else 1.0 - level
