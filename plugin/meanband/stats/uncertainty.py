"""Measurement uncertainty of a mean: Type A from the trials, Type B from the instrument (GUM).

Clause numbers of JCGM 100:2008 cited in this module were recalled from memory.
"""

from __future__ import annotations

import datetime
import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband import defaults
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.interval import SIDES, Interval, critical_t
from meanband.stats.sample import as_sample, check_confidence, check_probability, location_scale

__all__ = [
    "COMBINED_METHOD",
    "Calibration",
    "InstrumentUncertainty",
    "UncertaintyBudget",
    "as_instrument_uncertainty",
    "coverage_factor",
    "trials_to_decide",
    "uncertainty_budget",
    "welch_satterthwaite",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: ``Interval.method`` of an interval that carries a Type B part (a plain t interval says "t").
COMBINED_METHOD = "t+instrument"


@dataclass(frozen=True, slots=True)
class Calibration:
    """Where an instrument's uncertainty comes from: the instrument, its calibration certificate,
    the date of calibration and the date the next one is due (ISO 8601 dates or ``date``).

    A check made after ``due`` gets a loud note (or fails, with the setting
    ``overdue_calibration="fail"``): the certificate no longer vouches for the Type B part.
    """

    instrument: str
    certificate: str | None = None
    calibrated: datetime.date | str | None = None
    due: datetime.date | str | None = None

    def __post_init__(self) -> None:
        if not isinstance(self.instrument, str) or not self.instrument.strip():
            raise TrialError(
                f"a calibration names its instrument (an id string), got {self.instrument!r}"
            )
        for name in ("calibrated", "due"):
            object.__setattr__(self, name, _date(getattr(self, name), name))
        if self.calibrated is not None and self.due is not None and self.due < self.calibrated:  # type: ignore[operator]
            raise TrialError(
                f"the calibration of {self.instrument} is due ({self.due}) before it was made "
                f"({self.calibrated}); swap the dates"
            )

    def overdue(self, on: datetime.date) -> bool:
        """Whether the next calibration was due before ``on``."""
        return self.due is not None and on > self.due  # type: ignore[operator]

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; dates as ISO 8601 strings."""
        return {
            "instrument": self.instrument,
            "certificate": self.certificate,
            "calibrated": None if self.calibrated is None else str(self.calibrated),
            "due": None if self.due is None else str(self.due),
        }


def _date(value: datetime.date | str | None, name: str) -> datetime.date | None:
    if value is None or isinstance(value, datetime.date):
        return value
    try:
        return datetime.date.fromisoformat(str(value))
    except ValueError:
        raise TrialError(f"{name}={value!r} is not a date; write it as YYYY-MM-DD") from None


@dataclass(frozen=True, slots=True)
class InstrumentUncertainty:
    """The instrument's standard uncertainty, in the unit of the trials, and its degrees of freedom.

    ``df`` is infinite by default: the calibration is taken as exactly known (JCGM 100:2008,
    G.4.2). A finite ``df`` says how reliable the stated uncertainty itself is.
    """

    standard: float
    df: float = math.inf
    #: The instrument and certificate behind ``standard``, for the record.
    calibration: Calibration | None = None

    def __post_init__(self) -> None:
        if self.calibration is not None and not isinstance(self.calibration, Calibration):
            raise TrialError(f"calibration= must be a Calibration, got {self.calibration!r}")
        if isinstance(self.standard, bool) or isinstance(self.df, bool):
            raise TrialError("instrument uncertainty and its df must be numbers, not True/False")
        try:
            standard, df = float(self.standard), float(self.df)
        except (TypeError, ValueError) as exc:
            raise TrialError(
                f"instrument uncertainty must be numbers (standard, df), got "
                f"{self.standard!r}, {self.df!r}"
            ) from exc
        if not (math.isfinite(standard) and standard >= 0):
            raise TrialError(
                f"the instrument's standard uncertainty must be a finite number >= 0 in the "
                f"trials' unit, got {self.standard!r}"
            )
        if math.isnan(df) or df <= 0:
            raise TrialError(
                f"the instrument uncertainty's degrees of freedom must be > 0 (or inf), got "
                f"{self.df!r}"
            )
        object.__setattr__(self, "standard", standard)
        object.__setattr__(self, "df", df)

    @classmethod
    def from_limits(
        cls, half_width: float, df: float = math.inf, *, calibration: Calibration | None = None
    ) -> InstrumentUncertainty:
        """From a datasheet's accuracy +/- a with no more known: a rectangular distribution,
        u = a / sqrt(3) (JCGM 100:2008, 4.3.7)."""
        return cls(_non_negative(half_width, "half_width") / math.sqrt(3.0), df, calibration)

    @classmethod
    def from_certificate(
        cls, expanded: float, coverage_factor: float = 2.0, df: float = math.inf, *,
        calibration: Calibration | None = None,
    ) -> InstrumentUncertainty:
        """From a calibration certificate's expanded uncertainty U and its k: u = U / k
        (JCGM 100:2008, 4.3.3)."""
        k = _non_negative(coverage_factor, "coverage_factor")
        if k == 0:
            raise TrialError("coverage_factor must be > 0 (a certificate usually states k = 2)")
        return cls(_non_negative(expanded, "expanded") / k, df, calibration)

    @classmethod
    def with_reliability(cls, standard: float, relative: float) -> InstrumentUncertainty:
        """``standard`` judged reliable to a fraction ``relative`` (0.25 = 25 %):
        df = (1/2) * relative**-2 (JCGM 100:2008, G.4.2, equation G.3)."""
        rel = _non_negative(relative, "relative")
        if rel == 0:
            return cls(standard, math.inf)
        return cls(standard, 0.5 / (rel * rel))

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; an infinite df is written as None (JSON has no infinity)."""
        out: dict[str, Any] = {"standard": self.standard, "df": _finite_or_none(self.df)}
        if self.calibration is not None:
            out["calibration"] = self.calibration.to_dict()
        return out


InstrumentSpec = InstrumentUncertainty | float | int | tuple[float, float] | None


def as_instrument_uncertainty(value: InstrumentSpec) -> InstrumentUncertainty | None:
    """Accept ``0.05``, ``(0.05, 12)`` or an :class:`InstrumentUncertainty`; None stays None."""
    if value is None or isinstance(value, InstrumentUncertainty):
        return value
    if isinstance(value, tuple | list):
        if len(value) != 2:
            raise TrialError(
                f"instrument_uncertainty as a tuple is (standard uncertainty, degrees of freedom), "
                f"got {len(value)} items: {value!r}"
            )
        return InstrumentUncertainty(value[0], value[1])
    if isinstance(value, int | float | np.floating | np.integer) and not isinstance(value, bool):
        return InstrumentUncertainty(float(value))
    raise TrialError(
        f"instrument_uncertainty must be a standard uncertainty (e.g. 0.05), a pair "
        f"(0.05, 12) with degrees of freedom, or an InstrumentUncertainty; got {value!r}"
    )


def coverage_factor(confidence: float, df: float, side: str = "two-sided") -> float:
    """k = t_p(df): the Student-t quantile that gives coverage ``confidence``
    (JCGM 100:2008, G.3.4 and Table G.2); the normal quantile when ``df`` is infinite."""
    return critical_t(confidence, df, side)


def welch_satterthwaite(
    uncertainties: Sequence[float] | np.ndarray, dfs: Sequence[float] | np.ndarray
) -> float:
    """Effective degrees of freedom nu_eff = u_c**4 / sum(u_i**4 / nu_i)
    (Welch 1947, Satterthwaite 1946; JCGM 100:2008, G.4.1, equation G.2b).

    ``uncertainties`` are the contributions u_i(y) = |c_i| u(x_i). Components with zero
    uncertainty drop out; a single remaining component gives its own df exactly; infinite
    ``dfs`` contribute nothing to the denominator, so all-infinite gives infinity. No
    truncation to an integer is made: the t quantile is defined for any df > 0.
    """
    u = np.asarray(uncertainties, dtype=np.float64)
    nu = np.asarray(dfs, dtype=np.float64)
    if u.ndim != 1 or u.shape != nu.shape or u.size == 0:
        raise TrialError("give one degrees-of-freedom value per uncertainty component")
    if not np.all(np.isfinite(u)) or np.any(u < 0):
        raise TrialError(f"uncertainty components must be finite and >= 0, got {u.tolist()}")
    if np.any(np.isnan(nu)) or np.any(nu <= 0):
        raise TrialError(f"degrees of freedom must be > 0 (or inf), got {nu.tolist()}")
    present = u > 0
    if not present.any():
        raise TrialError(
            "every uncertainty component is zero: the effective degrees of freedom are undefined"
        )
    if int(present.sum()) == 1:
        return float(nu[present][0])
    u, nu = u[present], nu[present]
    combined_sq = float(np.sum(u * u))
    finite = np.isfinite(nu)
    denominator = float(np.sum(u[finite] ** 4 / nu[finite]))
    if denominator == 0.0:
        return math.inf
    return combined_sq * combined_sq / denominator


@dataclass(frozen=True, slots=True)
class UncertaintyBudget:
    """Uncertainty of the mean of the trials, combined per JCGM 100:2008 (GUM).

    ``type_a`` = s / sqrt(n) with n - 1 df (4.2.3); ``type_b`` the instrument's standard
    uncertainty; ``combined`` u_c = sqrt(type_a**2 + type_b**2) (5.1.2, unit sensitivity);
    ``effective_df`` from Welch-Satterthwaite (G.4.1); ``coverage_factor`` k = t_p(nu_eff)
    at ``confidence`` for ``side`` (G.3.4; one-sided: the ``confidence`` quantile);
    ``expanded`` U = k u_c (6.2.1).
    """

    mean: float
    n: int
    sd: float
    type_a: float
    type_a_df: float
    type_b: float
    type_b_df: float
    combined: float
    effective_df: float
    coverage_factor: float
    expanded: float
    confidence: float
    side: str
    #: The instrument's calibration record, when one was given.
    calibration: Calibration | None = None

    @property
    def has_instrument(self) -> bool:
        """Whether a non-zero Type B part enters the budget."""
        return self.type_b > 0.0

    def interval(self, side: str | None = None) -> Interval:
        """mean +/- U as an :class:`Interval`; with no Type B part it is the plain t interval.

        ``side`` may name the opposite one-sided bound of a one-sided budget (same k).
        """
        side = self.side if side is None else side
        if side not in SIDES or (side == "two-sided") != (self.side == "two-sided"):
            raise TrialError(
                f"this budget was computed for a {self.side} interval; a {side!r} interval "
                "needs its own budget"
            )
        low = -math.inf if side == "upper" else self.mean - self.expanded
        high = math.inf if side == "lower" else self.mean + self.expanded
        method = COMBINED_METHOD if self.has_instrument else "t"
        return Interval(
            self.mean, low, high, self.confidence, side, self.n, self.effective_df, self.sd,
            self.combined, method, self.coverage_factor, "mean",
        )

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; an infinite df is written as None (JSON has no infinity)."""
        return {
            "mean": float(self.mean),
            "n": int(self.n),
            "sd": float(self.sd),
            "type_a": float(self.type_a),
            "type_a_df": _finite_or_none(self.type_a_df),
            "type_b": float(self.type_b),
            "type_b_df": _finite_or_none(self.type_b_df),
            "combined": float(self.combined),
            "effective_df": _finite_or_none(self.effective_df),
            "coverage_factor": float(self.coverage_factor),
            "expanded": float(self.expanded),
            "confidence": float(self.confidence),
            "side": self.side,
            "calibration": None if self.calibration is None else self.calibration.to_dict(),
        }


def uncertainty_budget(
    values: Iterable[float] | np.ndarray,
    confidence: float = defaults.CONFIDENCE,
    side: str = "two-sided",
    instrument: InstrumentSpec = None,
) -> UncertaintyBudget:
    """Combine the Type A uncertainty of the mean of ``values`` with the instrument's Type B.

    With no instrument uncertainty (None or 0) the result is the t interval exactly:
    u_c = s / sqrt(n), nu_eff = n - 1, k = t(n - 1), so ``interval()`` equals
    :func:`meanband.mean_interval`.
    """
    level = check_confidence(confidence)
    if side not in SIDES:
        raise TrialError(f"unknown side {side!r}; choose one of {', '.join(SIDES)}")
    spec = as_instrument_uncertainty(instrument) or InstrumentUncertainty(0.0)
    x = as_sample(values, minimum=2)
    n = x.size
    mean, sd = location_scale(x)
    type_a = sd / math.sqrt(n)
    type_a_df = float(n - 1)
    combined = math.hypot(type_a, spec.standard)  # exact |type_a| when type_b is zero
    if combined == 0.0:
        effective_df = type_a_df  # zero spread, no instrument: the t interval's [mean, mean]
    else:
        effective_df = welch_satterthwaite([type_a, spec.standard], [type_a_df, spec.df])
    k = coverage_factor(level, effective_df, side)
    return UncertaintyBudget(
        mean=mean, n=n, sd=sd, type_a=type_a, type_a_df=type_a_df, type_b=spec.standard,
        type_b_df=spec.df, combined=combined, effective_df=effective_df, coverage_factor=k,
        expanded=k * combined, confidence=level, side=side, calibration=spec.calibration,
    )


def trials_to_decide(
    sd: float,
    margin: float,
    instrument: InstrumentSpec,
    *,
    confidence: float = defaults.CONFIDENCE,
    side: str = "two-sided",
    power: float = defaults.POWER,
    n_max: int = 1_000_000,
) -> int | None:
    """Trials that likely decide a check whose mean sits ``margin`` from the deciding edge,
    when the instrument adds a Type B part that more trials do not shrink.

    Smallest n with margin - U(n) >= z_power * sd / sqrt(n), where U(n) = k(nu_eff) u_c(n)
    at the per-edge level: the estimate's own scatter is treated as normal (a large-sample
    approximation of the power; with no instrument, :func:`meanband.trials_needed` is exact).
    None when even infinitely many trials leave U above the margin: then only a better
    instrument decides.
    """
    from scipy.stats import norm

    level = check_confidence(confidence)
    spec = as_instrument_uncertainty(instrument) or InstrumentUncertainty(0.0)
    power = check_probability(power, "power")
    if not (math.isfinite(sd) and sd >= 0):
        raise TrialError(f"the planning standard deviation must be finite and >= 0, got {sd!r}")
    margin = abs(float(margin))
    if not math.isfinite(margin):
        raise TrialError(f"margin must be a finite number, got {margin!r}")
    z_power = float(norm.ppf(power))

    def meets(n: int) -> bool:
        type_a = sd / math.sqrt(n)
        combined = math.hypot(type_a, spec.standard)
        if combined == 0.0:
            return margin > 0.0
        nu = welch_satterthwaite([type_a, spec.standard], [float(n - 1), spec.df])
        expanded = coverage_factor(level, nu, side) * combined
        return margin - expanded >= z_power * type_a

    floor = coverage_factor(level, spec.df, side) * spec.standard  # U as n -> infinity
    if margin <= floor:
        return None
    low, high = 1, 2
    while not meets(high):
        if high >= n_max:
            return None
        low, high = high, min(high * 2, n_max)
    while high - low > 1:
        mid = (low + high) // 2
        if meets(mid):
            high = mid
        else:
            low = mid
    return high


def _non_negative(value: float, name: str) -> float:
    try:
        number = float(value)
    except (TypeError, ValueError) as exc:
        raise TrialError(f"{name} must be a number, got {value!r}") from exc
    if not (math.isfinite(number) and number >= 0):
        raise TrialError(f"{name} must be a finite number >= 0, got {value!r}")
    return number


def _finite_or_none(value: float) -> float | None:
    return float(value) if math.isfinite(value) else None
