"""Checks that may look at the trials as often as they like: anytime-valid bounds and planned looks.

Two tools, both for a mean that a check may stop measuring early:

- a confidence sequence for the mean of normal trials with unknown spread: bounds that hold at
  every trial count at once, so a check may look after every trial and stop at the first PASS
  or FAIL with its false-PASS rate still at most 1 - C;
- group-sequential boundaries for k planned looks with Lan-DeMets alpha spending.

The confidence sequence is the scale-invariant mixture of Lai (1976), in the form studied by
Wang & Ramdas (2023, "Anytime-valid t-tests and confidence sequences for Gaussian means with
unknown variance"), with a half-normal mixing distribution for each side. For a candidate mean
m0 and the trials y = x - m0, the spread is integrated out with the scale-invariant measure
dsigma/sigma and the standardised shift delta = (mean - m0) / sigma is mixed over a normal
prior N(0, tau^2) cut to one side. The result is a likelihood ratio of the scale-invariant part
of the data (Wijsman's representation), hence a nonnegative martingale with mean 1 when m0 is
the true mean, and Ville's inequality bounds the chance that it ever exceeds 1/alpha by alpha.
Integrating (derived here; the integrals are checked numerically in tests/test_sequential.py),
with t = sqrt(n) (mean - m0) / s, a = n + 1 / tau^2 and w = |t|:

    ratio(w) = (1 + n tau^2)^(-1/2) * (a (n - 1 + w^2) / (a (n - 1) + w^2 / tau^2))^(n/2)
               * 2 F_n(n w / sqrt(a (n - 1) + w^2 / tau^2))

where F_n is Student's t distribution function with n degrees of freedom. The ratio grows with
w, so each bound is mean -/+ w_n * s / sqrt(n) with w_n the root of ratio(w) = 1 / alpha: one
cheap bisection per n, the same for every sample of that size. While the ratio's supremum
(1 + n tau^2)^((n-1)/2) * 2 F_n(n tau) stays below 1 / alpha, no finite bound exists yet and
the bound is infinite: with the default tuning that lasts up to n = 5 for a one-sided
bound at C = 0.95.

A one-sided bound at C uses alpha = 1 - C; a two-sided interval at C is the two one-sided
bounds at alpha = (1 - C) / 2 each, so each edge of a band keeps the error (1 - C) / 2 that
the fixed-n check promises (the symmetric two-sided mixture would only bound the sum).

The tuning is ``tightest_at``: the prior precision 1 / tau^2 is chosen by the rule of Howard,
Ramdas, McAuliffe & Sekhon (2021, Ann. Statist., from memory) for the normal
mixture, rho = n* / (2 log(1/alpha) + log(1 + 2 log(1/alpha))), which makes the bound nearly
the narrowest it can be at n = n*. The default n* = 20 suits checks that decide within tens of
trials.
"""

from __future__ import annotations

import math
from collections.abc import Iterable, Sequence
from dataclasses import dataclass

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.bands import side_alpha
from meanband.stats.interval import Interval
from meanband.stats.sample import as_sample, check_confidence, location_scale

__all__ = [
    "DEFAULT_TIGHTEST_AT",
    "METHOD",
    "SHAPES",
    "AnytimeBounds",
    "GroupSequentialDesign",
    "StopDecision",
    "anytime_bounds",
    "anytime_interval",
    "anytime_multiplier",
    "crossing_probabilities",
    "expected_fraction",
    "group_sequential_design",
    "inflation_factor",
    "log_mixture_ratio",
    "planned_look",
    "prior_variance",
    "spending",
    "stop_or_go_on",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: The trial count at which the anytime bound is tuned to be narrowest.
DEFAULT_TIGHTEST_AT = 20
#: The ``Interval.method`` of the confidence sequence.
METHOD = "anytime-t"
#: Spending shapes: Lan & DeMets (1983) O'Brien-Fleming type and Pocock type.
SHAPES = ("obrien-fleming", "pocock")

_SIDES = ("two-sided", "upper", "lower")
_BISECTIONS = 80


# ----------------------------------------------------------------------------------------------
# Confidence sequence
# ----------------------------------------------------------------------------------------------


def _check_side(side: str) -> None:
    if side not in _SIDES:
        raise TrialError(f"unknown side {side!r}; choose one of {', '.join(_SIDES)}")


def _check_tightest_at(tightest_at: int) -> int:
    if isinstance(tightest_at, bool) or not isinstance(tightest_at, (int, np.integer)) or tightest_at < 2:
        raise TrialError(
            f"tightest_at must be a whole number of trials >= 2, got {tightest_at!r}; "
            f"the default is {DEFAULT_TIGHTEST_AT}"
        )
    return int(tightest_at)


def prior_variance(alpha: float, tightest_at: int) -> float:
    """tau^2 for the one-sided level ``alpha``: Howard et al. (2021) tuning, from memory."""
    log_inv = math.log(1.0 / alpha)
    rho = tightest_at / (2.0 * log_inv + math.log1p(2.0 * log_inv))
    return 1.0 / rho


def log_mixture_ratio(w: np.ndarray, n: np.ndarray, tau2: float) -> np.ndarray:
    """log of the one-sided mixture ratio at standardised distance ``w`` >= 0 (closed form above)."""
    from scipy.stats import t as student_t

    a = n + 1.0 / tau2
    w2 = np.square(w)
    scale = a * (n - 1.0) + w2 / tau2
    two_sided = -0.5 * np.log1p(n * tau2) + 0.5 * n * np.log(a * (n - 1.0 + w2) / scale)
    log_ratio: np.ndarray = math.log(2.0) + student_t.logcdf(n * w / np.sqrt(scale), n) + two_sided
    return log_ratio


def anytime_multiplier(
    n: int | Sequence[int] | np.ndarray,
    confidence: float = 0.95,
    side: str = "two-sided",
    tightest_at: int = DEFAULT_TIGHTEST_AT,
) -> np.ndarray:
    """w_n: the bound is mean -/+ w_n * s / sqrt(n), valid at every n at once; inf while unbounded.

    Vectorised over ``n`` (each n >= 2). ``side`` chooses one bound at 1 - C or two at (1 - C) / 2.
    """
    level = check_confidence(confidence)
    _check_side(side)
    tightest_at = _check_tightest_at(tightest_at)
    counts = np.asarray(n)
    if counts.size and (not np.issubdtype(counts.dtype, np.integer) or counts.min() < 2):
        raise TrialError(f"trial counts must be whole numbers >= 2, got {n!r}")
    nf = counts.astype(np.float64)
    alpha = side_alpha(level, side)
    tau2 = prior_variance(alpha, tightest_at)
    target = math.log(1.0 / alpha)
    from scipy.stats import t as student_t

    supremum = (
        math.log(2.0) + student_t.logcdf(nf * math.sqrt(tau2), nf) + 0.5 * (nf - 1.0) * np.log1p(nf * tau2)
    )
    bounded = supremum > target
    # The root lies above the fixed-n quantile (a valid sequence is a valid fixed-n bound); widen
    # the bracket by doubling, then bisect: the ratio grows with w.
    low = np.zeros_like(nf)
    high = np.where(bounded, 2.0, 1.0)
    for _ in range(200):  # a loop over bracket doublings, not over trials
        short = bounded & (log_mixture_ratio(high, nf, tau2) < target)
        if not short.any():
            break
        low = np.where(short, high, low)
        high = np.where(short, 2.0 * high, high)
    for _ in range(_BISECTIONS):
        middle = 0.5 * (low + high)
        above = log_mixture_ratio(middle, nf, tau2) >= target
        high = np.where(above, middle, high)
        low = np.where(above, low, middle)
    return np.where(bounded, high, np.inf)


@dataclass(frozen=True)
class AnytimeBounds:
    """Bounds of the mean after every prefix of a stream: entry i uses the first ``n[i]`` trials."""

    n: np.ndarray
    mean: np.ndarray
    sd: np.ndarray
    low: np.ndarray
    high: np.ndarray
    confidence: float
    side: str
    tightest_at: int


def _prefix_statistics(x: np.ndarray) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Counts, means and sds (n - 1 divisor) of every prefix of two or more trials."""
    d = x - x[0]  # shifted by the first value, so the running sums stay small (see sample.py)
    counts = np.arange(1, x.size + 1, dtype=np.float64)
    sums = np.cumsum(d)
    squares = np.cumsum(np.square(d))
    means = sums / counts
    with np.errstate(invalid="ignore", divide="ignore"):
        variance = np.maximum(squares - sums * means, 0.0) / (counts - 1.0)
    return counts[1:].astype(np.int64), x[0] + means[1:], np.sqrt(variance[1:])


def _reach(multiplier: np.ndarray, sd: np.ndarray, n: np.ndarray) -> np.ndarray:
    sem = sd / np.sqrt(n)
    with np.errstate(invalid="ignore"):
        return np.where(np.isfinite(multiplier), multiplier * sem, np.inf)


def anytime_bounds(
    values: Iterable[float] | np.ndarray,
    confidence: float = 0.95,
    side: str = "two-sided",
    tightest_at: int = DEFAULT_TIGHTEST_AT,
) -> AnytimeBounds:
    """The anytime bounds after every prefix of ``values`` (n = 2, 3, ..., len(values)) in one call."""
    level = check_confidence(confidence)
    _check_side(side)
    x = as_sample(values, minimum=2)
    n, mean, sd = _prefix_statistics(x)
    reach = _reach(anytime_multiplier(n, level, side, tightest_at), sd, n)
    low = np.full(n.size, -np.inf) if side == "upper" else mean - reach
    high = np.full(n.size, np.inf) if side == "lower" else mean + reach
    return AnytimeBounds(n, mean, sd, low, high, level, side, int(tightest_at))


def anytime_interval(
    values: Iterable[float] | np.ndarray,
    confidence: float = 0.95,
    side: str = "two-sided",
    tightest_at: int = DEFAULT_TIGHTEST_AT,
) -> Interval:
    """The interval of the mean from all of ``values``, one member of a sequence valid at every n.

    Wider than the t interval of the same trials (it must hold however the count was chosen);
    infinite while too few trials bound it (Lai 1976; Wang & Ramdas 2023).
    """
    level = check_confidence(confidence)
    _check_side(side)
    x = as_sample(values, minimum=2)
    mean, sd = location_scale(x)
    n = x.size
    multiplier = float(anytime_multiplier(np.array([n]), level, side, tightest_at)[0])
    sem = sd / math.sqrt(n)
    reach = float(_reach(np.array([multiplier]), np.array([sd]), np.array([float(n)]))[0])
    low = -math.inf if side == "upper" else mean - reach
    high = math.inf if side == "lower" else mean + reach
    return Interval(mean, low, high, level, side, n, float(n - 1), sd, sem, METHOD, multiplier, "mean")


@dataclass(frozen=True, slots=True)
class StopDecision:
    """Whether a stream so far decides its band: PASS or FAIL (stop), or UNDECIDED (go on)."""

    verdict: str
    n: int
    seen: int
    interval: Interval
    counter: Interval | None

    @property
    def stop(self) -> bool:
        """True once the stream has decided (PASS or FAIL)."""
        return self.verdict != "UNDECIDED"


def _band_edges(low: float | None, high: float | None) -> tuple[float, float, str]:
    low_v = -math.inf if low is None else float(low)
    high_v = math.inf if high is None else float(high)
    if math.isnan(low_v) or math.isnan(high_v):
        raise TrialError(f"band edges must be numbers, got low={low!r}, high={high!r}")
    if not (math.isfinite(low_v) or math.isfinite(high_v)):
        raise TrialError("a band needs at least one finite edge: give low=, high= or both")
    if low_v > high_v:
        raise TrialError(f"the band's low edge {low!r} lies above its high edge {high!r}; swap them")
    if math.isfinite(low_v) and math.isfinite(high_v):
        return low_v, high_v, "two-sided"
    return low_v, high_v, ("upper" if math.isfinite(high_v) else "lower")


def _three_state(
    lower: np.ndarray, upper: np.ndarray, low: float, high: float, side: str
) -> np.ndarray:
    """Same rule as ``bands.decide``: inside is PASS, wholly beyond an edge FAIL, else UNDECIDED."""
    if side == "two-sided":
        inside = (low <= lower) & (upper <= high)
        beyond = (upper < low) | (lower > high)
    elif side == "upper":
        inside, beyond = upper <= high, lower > high
    else:
        inside, beyond = lower >= low, upper < low
    return np.where(inside, "PASS", np.where(beyond, "FAIL", "UNDECIDED"))


def stop_or_go_on(
    values: Iterable[float] | np.ndarray,
    low: float | None = None,
    high: float | None = None,
    *,
    confidence: float = 0.95,
    tightest_at: int = DEFAULT_TIGHTEST_AT,
    first_look: int = 2,
) -> StopDecision:
    """Look at every prefix of the stream and stop at the first that decides the band.

    Prefixes shorter than ``first_look`` are not looked at (fewer looks keep the guarantee).

    A budget (one finite edge) uses the one-sided anytime bound at C for PASS and the opposite
    one-sided bound at C for FAIL; a two-sided band uses the two-sided sequence at C. However
    often one looks and whenever one stops, a true mean on an edge passes with probability at
    most 1 - C for a budget and (1 - C) / 2 per edge of a band, for normal trials.
    """
    level = check_confidence(confidence)
    low_v, high_v, side = _band_edges(low, high)
    if isinstance(first_look, bool) or not isinstance(first_look, (int, np.integer)) or first_look < 2:
        raise TrialError(f"first_look must be a whole number of trials >= 2, got {first_look!r}")
    x = as_sample(values, minimum=2)
    n, mean, sd = _prefix_statistics(x)
    reach = _reach(anytime_multiplier(n, level, side, tightest_at), sd, n)
    verdicts = _three_state(mean - reach, mean + reach, low_v, high_v, side)
    verdicts = np.where(n >= first_look, verdicts, "UNDECIDED")
    decided = np.flatnonzero(verdicts != "UNDECIDED")
    at = int(decided[0]) if decided.size else n.size - 1
    used = x[: int(n[at])]
    interval = anytime_interval(used, level, side, tightest_at)
    counter = None
    if side != "two-sided":
        counter = anytime_interval(used, level, "lower" if side == "upper" else "upper", tightest_at)
    return StopDecision(str(verdicts[at]), int(n[at]), int(x.size), interval, counter)


# ----------------------------------------------------------------------------------------------
# Group-sequential boundaries for planned looks
# ----------------------------------------------------------------------------------------------


def spending(
    fractions: Sequence[float] | np.ndarray, alpha: float, shape: str = "obrien-fleming"
) -> np.ndarray:
    """Cumulative one-sided alpha spent by information fraction t (Lan & DeMets 1983).

    O'Brien-Fleming type: 2 - 2 Phi(z(1 - alpha/2) / sqrt(t)); Pocock type:
    alpha log(1 + (e - 1) t). Both spend exactly ``alpha`` at t = 1.
    """
    from scipy.stats import norm

    t = _check_fractions(fractions)
    if not (0.0 < alpha < 1.0):
        raise TrialError(f"alpha must lie strictly between 0 and 1, got {alpha!r}")
    if shape == "obrien-fleming":
        return np.asarray(2.0 * norm.sf(norm.isf(alpha / 2.0) / np.sqrt(t)))
    if shape == "pocock":
        return alpha * np.log1p((math.e - 1.0) * t)
    raise TrialError(f"unknown spending shape {shape!r}; choose one of {', '.join(SHAPES)}")


def _check_fractions(fractions: Sequence[float] | np.ndarray) -> np.ndarray:
    t = np.asarray(fractions, dtype=np.float64)
    if t.ndim != 1 or t.size < 1:
        raise TrialError(f"information fractions must be a flat sequence, got {fractions!r}")
    if not np.all(np.isfinite(t)) or t[0] <= 0 or t[-1] > 1 or np.any(np.diff(t) <= 0):
        raise TrialError(
            f"information fractions must rise strictly within (0, 1], got {list(t)}; "
            "give e.g. [0.2, 0.4, 0.6, 0.8, 1.0]"
        )
    return t


def _as_fractions(looks: int | Sequence[float]) -> np.ndarray:
    if isinstance(looks, (int, np.integer)) and not isinstance(looks, bool):
        if looks < 1:
            raise TrialError(f"looks must be a whole number >= 1, got {looks!r}")
        return np.arange(1, int(looks) + 1) / int(looks)
    if isinstance(looks, bool) or isinstance(looks, (str, float)):
        raise TrialError(f"looks must be a count or a sequence of information fractions, got {looks!r}")
    t = _check_fractions(looks)
    if t[-1] != 1.0:
        raise TrialError(f"the last look must be the planned maximum (fraction 1.0), got {t[-1]!r}")
    return t


class _Recursion:
    """Armitage, McPherson & Rowe (1969): the density of the score on the continuation region.

    The score B(t) = Z(t) sqrt(t) is Brownian motion with drift ``drift`` in information time;
    the sub-density of B at each look, given no earlier crossing, is carried on a grid by
    Simpson's rule (Jennison & Turnbull 2000, chapter 19).
    """

    def __init__(self, fractions: np.ndarray, drift: float) -> None:
        self.t = fractions
        self.drift = drift
        steps = np.diff(np.concatenate([[0.0], fractions]))
        self.spacing = float(np.sqrt(steps.min())) / 16.0
        self.grid: np.ndarray | None = None
        self.weighted: np.ndarray | None = None  # Simpson weight times density on the grid

    def crossing(self, look: int, bound_z: float) -> float:
        """Chance of first crossing ``bound_z`` at ``look`` (0-based), given the looks before."""
        from scipy.stats import norm

        t = self.t[look]
        b = bound_z * math.sqrt(t)
        if look == 0:
            return float(norm.sf((b - self.drift * t) / math.sqrt(t)))
        assert self.grid is not None and self.weighted is not None
        step = t - self.t[look - 1]
        z = (b - self.grid - self.drift * step) / math.sqrt(step)
        return float(np.sum(self.weighted * norm.sf(z)))

    def advance(self, look: int, bound_z: float) -> None:
        """Carry the density past ``look`` with bound ``bound_z`` (inf: no stopping there)."""
        from scipy.stats import norm

        t = self.t[look]
        mean, sd = self.drift * t, math.sqrt(t)
        top = min(bound_z * sd, mean + 9.0 * sd)
        bottom = min(mean - 9.0 * sd, top - sd)
        intervals = max(2 * math.ceil((top - bottom) / (2.0 * self.spacing)), 2)
        grid = np.linspace(bottom, top, intervals + 1)
        weights = np.full(grid.size, 2.0)
        weights[1::2] = 4.0
        weights[0] = weights[-1] = 1.0
        weights *= (grid[1] - grid[0]) / 3.0
        if look == 0:
            density = norm.pdf(grid, mean, sd)
        else:
            assert self.grid is not None and self.weighted is not None
            step = t - self.t[look - 1]
            kernel = norm.pdf(grid[:, None], self.grid[None, :] + self.drift * step, math.sqrt(step))
            density = kernel @ self.weighted
        self.grid, self.weighted = grid, weights * density


def crossing_probabilities(
    bounds: Sequence[float] | np.ndarray, fractions: Sequence[float] | np.ndarray, drift: float = 0.0
) -> np.ndarray:
    """Chance of first crossing each upper boundary (z scale) at each look.

    ``drift`` is the mean of Z at the last look (fraction 1): theta * sqrt(I_max).
    """
    t = _check_fractions(fractions)
    z = np.asarray(bounds, dtype=np.float64)
    if z.shape != t.shape or np.any(np.isnan(z)):
        raise TrialError(f"give one boundary per look: {z.size} boundaries for {t.size} looks")
    recursion = _Recursion(t, float(drift))
    out = np.empty(t.size)
    for look in range(t.size):  # a loop over looks, not over trials
        out[look] = recursion.crossing(look, float(z[look]))
        if look + 1 < t.size:
            recursion.advance(look, float(z[look]))
    return out


@dataclass(frozen=True)
class GroupSequentialDesign:
    """One-sided boundaries for planned looks, and what they cost and save.

    ``bounds`` are on the z scale (PASS when the standardised distance from the edge reaches the
    bound); ``inflation`` is the maximum count over the fixed count of equal power; the expected
    fractions are the average count over the fixed count, with the effect the design is powered
    for and with none.
    """

    fractions: tuple[float, ...]
    alpha: float
    shape: str
    power: float
    bounds: tuple[float, ...]
    spent: tuple[float, ...]
    drift: float
    inflation: float
    expected_fraction: float
    expected_fraction_null: float

    def expected_fraction_at(self, effect: float) -> float:
        """Average count over the fixed count when the effect is ``effect`` times the planned one."""
        return expected_fraction(self.bounds, self.fractions, self.drift * effect) * self.inflation

    def look_counts(self, fixed_n: int) -> tuple[int, ...]:
        """Trial counts at each look for a check whose fixed design needs ``fixed_n`` trials."""
        if isinstance(fixed_n, bool) or not isinstance(fixed_n, (int, np.integer)) or fixed_n < 2:
            raise TrialError(f"fixed_n must be a whole number of trials >= 2, got {fixed_n!r}")
        top = math.ceil(self.inflation * fixed_n)
        return tuple(max(2, math.ceil(f * top)) for f in self.fractions)


def expected_fraction(
    bounds: Sequence[float] | np.ndarray, fractions: Sequence[float] | np.ndarray, drift: float
) -> float:
    """Average information fraction used: stop at the first crossing, else at the last look."""
    t = np.asarray(fractions, dtype=np.float64)
    crossed = crossing_probabilities(bounds, t, drift)
    return float(np.sum(t[:-1] * crossed[:-1]) + t[-1] * (1.0 - np.sum(crossed[:-1])))


def inflation_factor(
    bounds: Sequence[float] | np.ndarray,
    fractions: Sequence[float] | np.ndarray,
    *,
    alpha: float,
    power: float,
) -> tuple[float, float]:
    """(drift, R): the drift at which the looks reach ``power``, and R = (drift / (z_a + z_b))^2.

    R is the maximum count over the fixed count of the same level and power (Jennison &
    Turnbull 2000, section 2.5).
    """
    from scipy.optimize import brentq
    from scipy.stats import norm

    if not (0.0 < power < 1.0) or not (0.0 < alpha < 1.0):
        raise TrialError(f"alpha and power must lie strictly between 0 and 1, got {alpha!r}, {power!r}")
    t = _check_fractions(fractions)
    fixed = float(norm.isf(alpha) + norm.ppf(power))
    drift = brentq(lambda d: float(crossing_probabilities(bounds, t, d).sum()) - power, 0.0, 3.0 * fixed,
                   xtol=1e-10)
    return float(drift), float((drift / fixed) ** 2)


def group_sequential_design(
    looks: int | Sequence[float] = 5,
    *,
    confidence: float = 0.95,
    shape: str = "obrien-fleming",
    power: float = 0.9,
) -> GroupSequentialDesign:
    """Lan-DeMets boundaries for a one-sided check at level 1 - C with ``looks`` planned looks.

    ``looks`` is a count (equally spaced) or the information fractions, the last 1.0. Each
    boundary spends the increment of the spending function (Lan & DeMets 1983), solved by the
    recursive integration of Armitage, McPherson & Rowe (1969).
    """
    from scipy.optimize import brentq

    level = check_confidence(confidence)
    if not (0.0 < power < 1.0):
        raise TrialError(f"power must lie strictly between 0 and 1, got {power!r}")
    t = _as_fractions(looks)
    alpha = 1.0 - level
    cumulative = spending(t, alpha, shape)
    increments = np.diff(np.concatenate([[0.0], cumulative]))
    recursion = _Recursion(t, 0.0)
    bounds = np.empty(t.size)
    for look in range(t.size):  # a loop over looks
        target = float(increments[look])
        if target < 1e-15:
            bounds[look] = math.inf
        else:
            bounds[look] = brentq(lambda c, j=look, p=target: recursion.crossing(j, c) - p, -8.0, 40.0,
                                  xtol=1e-10)
        if look + 1 < t.size:
            recursion.advance(look, float(bounds[look]))
    drift, inflation = inflation_factor(bounds, t, alpha=alpha, power=power)
    return GroupSequentialDesign(
        fractions=tuple(float(v) for v in t),
        alpha=alpha,
        shape=shape,
        power=float(power),
        bounds=tuple(float(v) for v in bounds),
        spent=tuple(float(v) for v in increments),
        drift=float(drift),
        inflation=float(inflation),
        expected_fraction=expected_fraction(bounds, t, drift) * inflation,
        expected_fraction_null=expected_fraction(bounds, t, 0.0) * inflation,
    )



def planned_look(
    values: Iterable[float] | np.ndarray,
    low: float | None,
    high: float | None,
    design: GroupSequentialDesign,
    look: int,
    *,
    confidence: float,
) -> StopDecision:
    """The verdict at planned look ``look`` (0-based) of ``design`` on the trials so far.

    Each edge is judged at the look's boundary: the t statistic of the distance from the edge,
    against the t quantile of n - 1 degrees of freedom at the boundary's nominal one-sided
    probability 1 - Phi(z_k) (the small-sample adaptation of Jennison & Turnbull 2000, section
    11.4). PASS when every finite edge is cleared on the inside, FAIL when the mean lies beyond
    an edge by as much, UNDECIDED otherwise (at the last look too: the data did not decide).
    ``design`` is one-sided at the level each edge gets: 1 - C for a budget, (1 - C) / 2 per
    edge of a two-sided band.
    """
    from scipy.stats import norm
    from scipy.stats import t as student_t

    level = check_confidence(confidence)
    low_v, high_v, side = _band_edges(low, high)
    if isinstance(look, bool) or not 0 <= look < len(design.bounds):
        raise TrialError(f"look {look!r} is not one of the design's {len(design.bounds)} looks")
    x = as_sample(values, minimum=2)
    mean, sd = location_scale(x)
    n = x.size
    sem = sd / math.sqrt(n)
    bound = design.bounds[look]
    critical = (math.inf if math.isinf(bound)
                else float(student_t.isf(norm.sf(bound), n - 1)))
    reach = critical * sem if sem > 0 else 0.0
    lower, upper = mean - reach, mean + reach
    verdict = str(_three_state(np.array([lower]), np.array([upper]), low_v, high_v, side)[0])
    interval = Interval(
        mean, -math.inf if side == "upper" else lower, math.inf if side == "lower" else upper,
        level, side, n, float(n - 1), sd, sem, "group-sequential", critical, "mean",
    )
    counter = None
    if side != "two-sided":
        opposite = "lower" if side == "upper" else "upper"
        counter = Interval(
            mean, -math.inf if opposite == "upper" else lower,
            math.inf if opposite == "lower" else upper, level, opposite, n, float(n - 1), sd,
            sem, "group-sequential", critical, "mean",
        )
    return StopDecision(verdict, n, n, interval, counter)
