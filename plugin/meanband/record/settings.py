"""Per-test settings and where they come from: call > marker > plan > option > ini > default."""

from __future__ import annotations

import math
from collections.abc import Callable, Iterable, Mapping
from dataclasses import dataclass, fields, replace
from typing import Any

from meanband import defaults
from meanband.errors import TrialError, hide_plugin_frames

__all__ = [
    "DEFAULTS",
    "SettingError",
    "Settings",
    "marker_settings",
    "resolve",
    "unknown_setting_names",
    "validate",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


class SettingError(TrialError):
    """A setting has a bad value; the message names where the value came from."""


@dataclass(frozen=True)
class Settings:
    """Everything a check needs to know beyond its trials and band."""

    n: int = defaults.N
    confidence: float = defaults.CONFIDENCE
    warmup: int | str = defaults.WARMUP
    min_n: int = defaults.MIN_N
    normality_alpha: float = defaults.NORMALITY_ALPHA
    method: str = defaults.METHOD
    power: float = defaults.POWER
    #: Timing engine (see docs/timing.md): seconds a trial lasts at least (None: automatic),
    #: the clock ("wall" or "cpu"), whether garbage collection stays on during trials, and a
    #: per-test limit in seconds on the time spent timing (None: no limit).
    min_trial_time: float | None = None
    clock: str = defaults.CLOCK
    gc: bool = defaults.GC
    time_limit: float | None = None
    #: What a check made with an instrument past its calibration due date does: "note" (a loud
    #: note) or "fail" (the test fails, the row is kept).
    overdue_calibration: str = defaults.OVERDUE_CALIBRATION
    #: A check whose test uncertainty ratio (tolerance / 2U) is below this gets a note.
    min_uncertainty_ratio: float = defaults.MIN_UNCERTAINTY_RATIO
    #: The ceiling on any trial count asked for (n, a plan entry, max_n).
    max_trials: int = defaults.MAX_TRIALS
    #: Cap of the modes that choose their own count (n="auto", "until-decided", "looks:K") when
    #: the call gives no max_n; None leaves each mode its own default. A plan learns it from
    #: where earlier runs stopped (stats/stopping_caps.py).
    max_n: int | None = None

    def merged(self, **overrides: Any) -> Settings:
        """A copy with the non-None ``overrides`` (call arguments), validated."""
        given = {k: v for k, v in overrides.items() if v is not None}
        for name, value in given.items():
            given[name] = validate(name, value, "the call's argument")
        merged = replace(self, **given)
        if "n" in given:
            merged.check_count(given["n"], "the call's argument n")
        return merged

    def check_count(self, count: int, source: str, ceiling_source: str | None = None) -> int:
        """``count`` when it is at most :attr:`max_trials`; else a SettingError naming ``source``
        and how to raise the ceiling."""
        if count > self.max_trials:
            where = f", from {ceiling_source}" if ceiling_source else ""
            raise SettingError(
                f"{source}: {count:,} trials is above the ceiling of {self.max_trials:,} trials "
                f"(max_trials{where}), which keeps a mistyped count from running without end; "
                "lower the count, or raise the ceiling with --meanband-max-trials, ini "
                "meanband_max_trials or @pytest.mark.meanband(max_trials=...)"
            )
        return count

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; the ceiling is left out, as it does not shape the result."""
        return {f.name: getattr(self, f.name) for f in fields(self) if f.name != "max_trials"}


DEFAULTS = Settings()


def marker_settings(
    *,
    n: int | None = None,
    confidence: float | None = None,
    warmup: int | str | None = None,
    min_n: int | None = None,
    normality_alpha: float | None = None,
    method: str | None = None,
    power: float | None = None,
    min_trial_time: float | str | None = None,
    clock: str | None = None,
    gc: bool | str | None = None,
    time_limit: float | str | None = None,
    overdue_calibration: str | None = None,
    min_uncertainty_ratio: float | None = None,
    max_trials: int | None = None,
    max_n: int | None = None,
) -> dict[str, Any]:
    """The signature of ``@pytest.mark.meanband(...)``: a wrong keyword is a TypeError."""
    return {k: v for k, v in locals().items() if v is not None}


def unknown_setting_names(given: Iterable[str]) -> str:
    """What is wrong with the names in ``given`` that are no setting ("" when all are), with
    the closest valid name for each and the list of valid ones, e.g. for a marker typo."""
    import difflib
    import inspect

    valid = list(inspect.signature(marker_settings).parameters)
    unknown = [name for name in given if name not in valid]
    if not unknown:
        return ""
    parts = []
    for name in unknown:
        close = difflib.get_close_matches(name, valid, n=1)
        parts.append(f"{name!r} (did you mean {close[0]!r}?)" if close else repr(name))
    plural = "s" if len(parts) > 1 else ""
    return f"unknown meanband setting{plural} {', '.join(parts)}; the settings are {', '.join(valid)}"


def _integer(minimum: int) -> Callable[[Any], int]:
    def check(value: Any) -> int:
        if isinstance(value, bool):
            raise ValueError("a whole number is needed, not a boolean")
        number = int(value) if isinstance(value, str) else value
        if not isinstance(number, int) or number < minimum:
            raise ValueError(f"a whole number >= {minimum} is needed")
        return number

    return check


def _probability(value: Any) -> float:
    from meanband.stats.sample import check_probability

    try:
        return check_probability(value, "the value")
    except TrialError as exc:
        raise ValueError(str(exc).removeprefix("the value ")) from None


def _warmup(value: Any) -> int | str:
    if isinstance(value, str) and not value.strip().lstrip("+").isdigit():
        from meanband.units import parse_duration

        parse_duration(value)
        return value.strip()
    return _integer(0)(value)


def _method(value: Any) -> str:
    from meanband.stats.methods import METHODS

    if value not in METHODS:
        raise ValueError(f"choose one of {', '.join(sorted(METHODS))}")
    return str(value)


def _seconds(*, zero_ok: bool) -> Callable[[Any], float]:
    def check(value: Any) -> float:
        if isinstance(value, bool):
            raise ValueError("a duration is needed, e.g. '2ms' or 0.002 (seconds)")
        if isinstance(value, str):
            from meanband.units import parse_duration

            text = value.strip()
            seconds = float(text) if _is_number(text) else parse_duration(text)
        else:
            seconds = float(value)
        if not math.isfinite(seconds) or seconds < 0 or (seconds == 0 and not zero_ok):
            raise ValueError(f"a duration {'>= 0' if zero_ok else '> 0'} is needed, e.g. '2ms'")
        return seconds

    return check


def _is_number(text: str) -> bool:
    try:
        float(text)
    except ValueError:
        return False
    return True


def _clock(value: Any) -> str:
    from meanband.collect.clock import CLOCKS

    if value not in CLOCKS:
        raise ValueError(f"choose one of {', '.join(sorted(CLOCKS))}")
    return str(value)


def _positive(value: Any) -> float:
    if isinstance(value, bool):
        raise ValueError("a positive number is needed, e.g. 4 for 4:1")
    number = float(value)
    if not (math.isfinite(number) and number > 0):
        raise ValueError("a positive number is needed, e.g. 4 for 4:1")
    return number


def _choice(*words: str) -> Callable[[Any], str]:
    def check(value: Any) -> str:
        if value not in words:
            raise ValueError(f"choose one of {', '.join(words)}")
        return str(value)

    return check


_SWITCH = {"on": True, "true": True, "yes": True, "1": True,
           "off": False, "false": False, "no": False, "0": False}


def _switch(value: Any) -> bool:
    if isinstance(value, bool):
        return value
    if isinstance(value, str) and value.strip().lower() in _SWITCH:
        return _SWITCH[value.strip().lower()]
    raise ValueError("write on or off (True or False in a marker)")


_VALIDATORS: dict[str, Callable[[Any], Any]] = {
    "n": _integer(2),
    "confidence": _probability,
    "warmup": _warmup,
    "min_n": _integer(2),
    "normality_alpha": _probability,
    "method": _method,
    "power": _probability,
    "min_trial_time": _seconds(zero_ok=True),
    "clock": _clock,
    "gc": _switch,
    "time_limit": _seconds(zero_ok=False),
    "overdue_calibration": _choice("note", "fail"),
    "min_uncertainty_ratio": _positive,
    "max_trials": _integer(2),
    "max_n": _integer(2),
}


def validate(name: str, value: Any, source: str) -> Any:
    """Return ``value`` converted for setting ``name``, or raise SettingError naming ``source``."""
    check = _VALIDATORS.get(name)
    if check is None:
        raise SettingError(f"{source}: {unknown_setting_names([name])}")
    try:
        return check(value)
    except (TypeError, ValueError) as exc:
        raise SettingError(f"{source}: bad value {value!r} for {name}: {exc}") from None


def resolve(layers: Iterable[tuple[str, Mapping[str, Any]]]) -> Settings:
    """Settings from ``(source, values)`` layers listed from the highest precedence down.

    Each value is validated with its source named in any error; the defaults fill the rest. A
    count above the ceiling (``max_trials``) is an error naming the layer the count came from.
    """
    chosen: dict[str, Any] = {}
    sources: dict[str, str] = {}
    for source, values in layers:
        for name, value in values.items():
            if name not in chosen and value is not None:
                chosen[name] = validate(name, value, source)
                sources[name] = source
    settings = replace(DEFAULTS, **chosen)
    for name in ("n", "max_n"):
        if name in sources:
            settings.check_count(getattr(settings, name), sources[name], sources.get("max_trials"))
    return settings
