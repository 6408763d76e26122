"""Numbers with units, read and written: duration strings in, readable values, bands and
probabilities out."""

from __future__ import annotations

import math
import re

from meanband.errors import TrialError, hide_plugin_frames

__all__ = [
    "SECONDS",
    "duration_scale",
    "format_band",
    "format_bound",
    "format_df",
    "format_number",
    "format_pair",
    "format_probability",
    "format_value",
    "parse_duration",
    "read_fraction",
    "significant_digits",
    "time_scale",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: The unit label of timing trials; values are seconds per call.
SECONDS = "s"

_DURATION_SCALE = {
    "ns": 1e-9,
    "us": 1e-6,
    "µs": 1e-6,
    "μs": 1e-6,  # Greek mu as well as the micro sign: both are typed in the wild
    "ms": 1e-3,
    "s": 1.0,
}
_DURATION = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*([a-zA-Zµμ]+)\s*$")


def parse_duration(text: str) -> float:
    """Seconds in a duration string such as ``"800ns"``, ``"250us"``, ``"250µs"``, ``"3ms"``."""
    match = _DURATION.match(text)
    if not match or match.group(2) not in _DURATION_SCALE:
        raise TrialError(
            f"cannot read {text!r} as a duration; write a number and one of the units "
            "ns, us (or µs), ms, s, e.g. '250us' or '3ms'"
        )
    return float(match.group(1)) * _DURATION_SCALE[match.group(2)]


_FRACTION = re.compile(r"^\s*([-+]?(?:\d+\.?\d*|\.\d+)(?:[eE][-+]?\d+)?)\s*(%?)\s*$")


def read_fraction(value: object, what: str) -> tuple[float, bool]:
    """A fraction written ``0.05`` or ``"5%"`` (or ``"0.05"``), and whether it was a percentage.

    The one reader of levels, powers and relative amounts, so each accepts both spellings.
    """
    if isinstance(value, bool):
        raise TrialError(f"{what} must be a number such as 0.05 or '5%', got {value!r}")
    if isinstance(value, str):
        match = _FRACTION.match(value)
        if not match:
            raise TrialError(f"cannot read {what}={value!r} as a number; write e.g. 0.05 or '5%'")
        number = float(match.group(1))
        return (number / 100.0, True) if match.group(2) else (number, False)
    try:
        return float(value), False  # type: ignore[arg-type]
    except (TypeError, ValueError):
        raise TrialError(f"{what} must be a number such as 0.05 or '5%', got {value!r}") from None


def duration_scale(unit: str | None) -> float | None:
    """Seconds per ``unit`` when it is a time unit (``"ms"`` gives 0.001), else None."""
    return None if unit is None else _DURATION_SCALE.get(unit)


def format_number(value: float, digits: int = 4) -> str:
    """A number with ``digits`` significant digits, without an exponent where one is not needed."""
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return "nan"
    if math.isinf(value):
        return "-inf" if value < 0 else "inf"
    if value == 0:
        return "0"
    magnitude = math.floor(math.log10(abs(value)))
    rounded = round(value, digits - 1 - magnitude)
    if rounded != 0:  # 999.96 rounds up to 1000.0: count digits from the rounded value
        magnitude = math.floor(math.log10(abs(rounded)))
    if -4 <= magnitude < 9:
        decimals = max(digits - 1 - magnitude, 0)
        return f"{value:.{decimals}f}"
    return f"{value:.{digits - 1}e}"


def format_value(
    value: float, unit: str | None, digits: int = 4, *, scale: float | None = None,
    trim: bool = False,
) -> str:
    """``value`` with its unit; seconds are shown in ns, µs, ms or s as fits.

    Pass ``scale`` (seconds per shown unit, from :func:`time_scale`) so that the numbers of one
    row share a unit; ``trim`` drops trailing zeros (for limits a user typed, like ``3 ms``).
    """
    if unit == SECONDS:
        factor = scale if scale is not None else time_scale(value)
        label = _SCALE_LABEL[factor]
        return f"{_trimmed(format_number(value / factor, digits), trim)} {label}"
    text = _trimmed(format_number(value, digits), trim)
    return f"{text} {unit}" if unit else text


def _trimmed(text: str, trim: bool) -> str:
    if trim and "." in text and "e" not in text:
        return text.rstrip("0").rstrip(".")
    return text


def significant_digits(center: float, resolution: float) -> int:
    """Digits that show ``center`` to about two digits of ``resolution`` (e.g. its sem)."""
    if not (math.isfinite(center) and math.isfinite(resolution)) or resolution <= 0 or center == 0:
        return 4
    return int(min(max(math.floor(math.log10(abs(center) / resolution)) + 2, 3), 12))


_SCALE_LABEL = {1e-9: "ns", 1e-6: "µs", 1e-3: "ms", 1.0: "s"}


def time_scale(value: float) -> float:
    """Seconds per unit of the largest of ns, µs, ms, s that shows ``value`` as at least 1."""
    magnitude = abs(value) if math.isfinite(value) else 0.0
    for factor in (1.0, 1e-3, 1e-6):
        if magnitude >= factor:
            return factor
    return 1e-9


def format_bound(value: float, unit: str | None, digits: int = 4, *, scale: float | None = None) -> str:
    """``value`` with its unit, or ``-inf``/``inf``/``nan`` for the ends a bound may leave open."""
    if not math.isfinite(value):
        return "nan" if math.isnan(value) else ("-inf" if value < 0 else "inf")
    return format_value(value, unit, digits, scale=scale)


def format_band(
    low: float, high: float, unit: str | None, digits: int = 4, *, unit_once: bool = False
) -> str:
    """A band as a user wrote it: ``<= 3 ms``, ``>= 10 V`` or ``[84.6 degC, 85.4 degC]``; timing
    edges get a time unit of their own, so a 3 ms budget never shows as 3000 µs. ``unit_once``
    writes a shared unit once, after the brackets: ``[84.6, 85.4] degC``."""

    def fmt(value: float) -> str:
        return format_value(value, unit, digits, trim=True)

    if math.isfinite(low) and math.isfinite(high):
        return format_pair(fmt(low), fmt(high), unit_once=unit_once)
    if math.isfinite(high):
        return f"<= {fmt(high)}"
    return f">= {fmt(low)}"


def format_pair(low: str, high: str, *, unit_once: bool = True) -> str:
    """Two values with units as an interval; with ``unit_once``, a unit they share is written
    once after the brackets (``[1.2, 3.4] ms``), else it stays with each value."""
    if unit_once:
        for label in sorted(_unit_endings(low), key=len, reverse=True):
            if high.endswith(label):
                return f"[{low.removesuffix(label)}, {high.removesuffix(label)}]{label}"
    return f"[{low}, {high}]"


def _unit_endings(text: str) -> list[str]:
    """Every ending `` <unit>`` that ``text`` (a number, a space, a unit) may have."""
    return [text[i:] for i, char in enumerate(text) if char == " "]


def format_probability(p: float) -> str:
    """A probability with enough digits to tell 0.9999 from 1 (``1 - 2e-06``); one that rounds
    to 1 in float64 is ``1 - <1e-16``, since certainty is not what was computed."""
    if p == 1.0:
        return "1 - <1e-16"
    if p == 0.0:
        return "0"
    if p > 0.99:
        return f"1 - {1.0 - p:.2g}"
    return f"{p:.3g}"


def format_df(df: float | None) -> str:
    """Degrees of freedom: ``inf`` (or None) for infinitely many, whole above 100, else 3 digits."""
    if df is None or math.isinf(df):
        return "inf"
    return f"{df:.0f}" if df >= 100 else f"{df:.3g}"
