"""Decision rules as values, their specific and global risks, and the test uncertainty ratio.

Sources: JCGM 106:2012 (clauses 7-9) and ILAC-G8:09/2019 (clause 4). Sub-clause numbers cited
in this module were recalled from memory.
"""

from __future__ import annotations

import dataclasses
import math
from dataclasses import dataclass
from typing import TYPE_CHECKING, Any, ClassVar

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.rules import (
    conformance_probability,
)
from meanband.stats.rules import (
    distribution as _distribution,
)
from meanband.stats.rules import (
    finite_or_none as _finite_or_none,
)
from meanband.stats.rules import (
    outside_probability as _outside_probability,
)

if TYPE_CHECKING:
    from meanband.stats.uncertainty import UncertaintyBudget

__all__ = [
    "BINARY",
    "CONDITIONAL_FAIL",
    "CONDITIONAL_PASS",
    "FAIL",
    "NON_BINARY",
    "PASS",
    "STATEMENTS",
    "STATEMENT_MODES",
    "TUR_THRESHOLD",
    "UNDECIDED",
    "VERDICT_OF_STATEMENT",
    "ConformityOutcome",
    "DecisionRule",
    "GlobalRiskCurve",
    "GlobalRisks",
    "GuardedAcceptance",
    "Measurement",
    "ProcessPrior",
    "SimpleAcceptance",
    "SpecificRiskAcceptance",
    "UncertaintyRatio",
    "apply_decision_rule",
    "as_decision_rule",
    "global_risk_curve",
    "global_risks",
    "measurement_capability",
    "process_capability",
    "specific_risk_guard_band",
    "uncertainty_ratio",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: meanband's verdicts (the values of :class:`meanband.Verdict`).
PASS, FAIL, UNDECIDED = "PASS", "FAIL", "UNDECIDED"

#: Binary statement (ILAC-G8:2019, 4.2.1 and 4.2.2): "pass" or "fail" only.
BINARY = "binary"
#: Non-binary statement with guard band (ILAC-G8:2019, 4.2.3): four outcomes.
NON_BINARY = "non-binary"
STATEMENT_MODES = (BINARY, NON_BINARY)

#: The four outcomes of ILAC-G8:2019, 4.2.3, in the order of a measured value moving outwards.
STATEMENT_PASS = "pass"
CONDITIONAL_PASS = "conditional pass"
CONDITIONAL_FAIL = "conditional fail"
STATEMENT_FAIL = "fail"
STATEMENTS = (STATEMENT_PASS, CONDITIONAL_PASS, CONDITIONAL_FAIL, STATEMENT_FAIL)

#: How each ILAC-G8 outcome maps onto meanband's three verdicts. Both conditional outcomes
#: mean that the evidence does not decide the check at the stated risk: UNDECIDED (the test
#: fails, and says how many trials would likely decide it).
VERDICT_OF_STATEMENT = {
    STATEMENT_PASS: PASS,
    CONDITIONAL_PASS: UNDECIDED,
    CONDITIONAL_FAIL: UNDECIDED,
    STATEMENT_FAIL: FAIL,
}

#: Default test uncertainty ratio below which a check gets a note (4:1, common practice).
TUR_THRESHOLD = 4.0

# Half-width, in prior standard deviations, of the range integrated for the global risks:
# the normal mass beyond 12 sd (about 4e-33) is far below any risk worth reporting.
_PRIOR_SPAN = 12.0


# --------------------------------------------------------------------------------------------
# The measurement a rule decides on


@dataclass(frozen=True, slots=True)
class Measurement:
    """A measured mean y with standard uncertainty u, its degrees of freedom and coverage factor.

    The true mean given y follows y + u * t(df) (a normal when ``df`` is infinite), as in
    :func:`meanband.stats.rules.conformance_probability`; the expanded uncertainty is U = k u
    (JCGM 100:2008, 6.2.1).
    """

    value: float
    standard_uncertainty: float
    df: float = math.inf
    coverage_factor: float = 2.0

    def __post_init__(self) -> None:
        value = _number(self.value, "the measured value")
        if not math.isfinite(value):
            raise TrialError(f"the measured value must be finite, got {self.value!r}")
        u = _number(self.standard_uncertainty, "the standard uncertainty")
        if not (math.isfinite(u) and u >= 0):
            raise TrialError(
                f"the standard uncertainty must be finite and >= 0, got {self.standard_uncertainty!r}"
            )
        df = _number(self.df, "the degrees of freedom")
        if math.isnan(df) or df <= 0:
            raise TrialError(f"degrees of freedom must be > 0 (or inf), got {self.df!r}")
        k = _number(self.coverage_factor, "the coverage factor")
        if not (math.isfinite(k) and k > 0):
            raise TrialError(
                f"the coverage factor must be finite and > 0 (k = 2 is usual), got {self.coverage_factor!r}"
            )
        for name, number in (("value", value), ("standard_uncertainty", u), ("df", df),
                             ("coverage_factor", k)):
            object.__setattr__(self, name, number)

    @property
    def expanded(self) -> float:
        """U = k u."""
        return self.coverage_factor * self.standard_uncertainty

    @classmethod
    def from_budget(cls, budget: UncertaintyBudget) -> Measurement:
        """The mean, u_c, nu_eff and k of a GUM budget (:func:`meanband.uncertainty_budget`)."""
        return cls(budget.mean, budget.combined, budget.effective_df, budget.coverage_factor)


# --------------------------------------------------------------------------------------------
# Decision rules


@dataclass(frozen=True, slots=True)
class GuardedAcceptance:
    """Guarded acceptance with guard band w = r U (JCGM 106:2012, 8.3.2; ILAC-G8:2019, 4.2.2).

    Acceptance zone [T_L + w, T_U - w]; a value beyond a limit by more than w is rejected
    (guarded rejection with the same w, JCGM 106:2012, 8.3.3). r = 1 is meanband's default
    rule (the interval mean +/- U must lie inside the band); r = 0 is simple acceptance.
    """

    factor: float = 1.0
    statement: str = NON_BINARY
    name: ClassVar[str] = "guarded"

    def __post_init__(self) -> None:
        r = _number(self.factor, "the guard-band factor r")
        if not (math.isfinite(r) and r >= 0):
            raise TrialError(
                f"the guard-band factor r (w = r U) must be finite and >= 0, got {self.factor!r}; "
                "r = 1 is the usual guarded acceptance, r = 0 simple acceptance"
            )
        object.__setattr__(self, "factor", r)
        _check_statement_mode(self.statement)

    def guard_bands(self, measurement: Measurement, low: float, high: float) -> tuple[float, float]:
        """(acceptance guard band, rejection guard band), both r U."""
        w = self.factor * measurement.expanded
        return w, w

    def describe(self) -> str:
        """The rule as a report states it (ISO/IEC 17025 asks that it be stated)."""
        return f"guarded acceptance, w = {self.factor:g} U (JCGM 106:2012 8.3; ILAC-G8:2019 4.2.2)"

    def apply(self, measurement: Measurement, low: float, high: float) -> ConformityOutcome:
        """Decide one check; see :func:`apply_decision_rule`."""
        return apply_decision_rule(self, measurement, low, high)


@dataclass(frozen=True, slots=True)
class SimpleAcceptance:
    """Simple acceptance, w = 0 (JCGM 106:2012, 8.2; ILAC-G8:2019, 4.2.1): accept when the
    measured value lies in the tolerance. The specific false-accept risk reaches 1/2 on a limit."""

    statement: str = NON_BINARY
    name: ClassVar[str] = "simple"

    def __post_init__(self) -> None:
        _check_statement_mode(self.statement)

    def guard_bands(self, measurement: Measurement, low: float, high: float) -> tuple[float, float]:
        """No guard band on either side."""
        return 0.0, 0.0

    def describe(self) -> str:
        """The rule as a report states it."""
        return "simple acceptance, w = 0 (JCGM 106:2012 8.2; ILAC-G8:2019 4.2.1)"

    def apply(self, measurement: Measurement, low: float, high: float) -> ConformityOutcome:
        """Decide one check; see :func:`apply_decision_rule`."""
        return apply_decision_rule(self, measurement, low, high)


@dataclass(frozen=True, slots=True)
class SpecificRiskAcceptance:
    """Guard band solved from a target specific risk (JCGM 106:2012, 9.3; ILAC-G8:2019, 4.2.2).

    The acceptance zone is the largest one in which a PASS has specific false-accept risk
    1 - p_c <= ``target`` (p_c from the t or normal distribution of the true mean given y);
    likewise a value outside the tolerance is rejected once its specific false-reject risk
    p_c <= ``target``. See :func:`specific_risk_guard_band`.
    """

    target: float
    statement: str = NON_BINARY
    name: ClassVar[str] = "specific-risk"

    def __post_init__(self) -> None:
        p = _number(self.target, "the target specific risk")
        if not (0.0 < p <= 0.5):
            raise TrialError(
                f"the target specific risk must lie in (0, 0.5], got {self.target!r}; e.g. 0.025. "
                "A target above 1/2 would accept values outside the tolerance"
            )
        object.__setattr__(self, "target", p)
        _check_statement_mode(self.statement)

    def guard_bands(self, measurement: Measurement, low: float, high: float) -> tuple[float, float]:
        """(acceptance, rejection) guard bands that meet the target risk at their limits."""
        u, df = measurement.standard_uncertainty, measurement.df
        return (
            specific_risk_guard_band(self.target, u, df, low, high),
            specific_risk_guard_band(self.target, u, df, low, high, reject=True),
        )

    def describe(self) -> str:
        """The rule as a report states it."""
        return (
            f"guarded acceptance, w for specific risk <= {self.target:g} at the acceptance limit "
            "(JCGM 106:2012 9.3; ILAC-G8:2019 4.2.2)"
        )

    def apply(self, measurement: Measurement, low: float, high: float) -> ConformityOutcome:
        """Decide one check; see :func:`apply_decision_rule`."""
        return apply_decision_rule(self, measurement, low, high)


DecisionRule = GuardedAcceptance | SimpleAcceptance | SpecificRiskAcceptance
_RULE_TYPES = (GuardedAcceptance, SimpleAcceptance, SpecificRiskAcceptance)


@dataclass(frozen=True, slots=True)
class ConformityOutcome:
    """What a decision rule made of one check.

    ``zone`` is the ILAC-G8:2019 (4.2.3) outcome the measured value falls in; ``statement`` is
    what the rule's statement mode says (a binary statement says "fail" for both conditional
    zones); ``verdict`` is meanband's, from :data:`VERDICT_OF_STATEMENT`. ``specific_risk``
    is the probability that the statement is wrong (JCGM 106:2012, 9.3): 1 - p_c ("false
    accept") for a value inside the tolerance, p_c ("false reject") for one outside.
    An empty acceptance zone has ``acceptance_low > acceptance_high``.
    """

    rule: DecisionRule
    verdict: str
    statement: str
    zone: str
    guard_band: float
    rejection_guard_band: float
    acceptance_low: float
    acceptance_high: float
    conformance_probability: float
    specific_risk: float
    risk_kind: str

    @property
    def acceptance_zone_empty(self) -> bool:
        """True when no measured value could pass (the guard bands meet)."""
        return self.acceptance_low > self.acceptance_high

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; an open or empty edge is written as None."""
        return {
            "rule": self.rule.name,
            "rule_statement": self.rule.describe(),
            "statement_mode": self.rule.statement,
            "verdict": self.verdict,
            "statement": self.statement,
            "zone": self.zone,
            "guard_band": _finite_or_none(self.guard_band),
            "rejection_guard_band": _finite_or_none(self.rejection_guard_band),
            "acceptance_low": _finite_or_none(self.acceptance_low),
            "acceptance_high": _finite_or_none(self.acceptance_high),
            "acceptance_zone_empty": self.acceptance_zone_empty,
            "conformance_probability": float(self.conformance_probability),
            "specific_risk": float(self.specific_risk),
            "risk_kind": self.risk_kind,
        }


def apply_decision_rule(
    rule: DecisionRule | str | None, measurement: Measurement, low: float, high: float
) -> ConformityOutcome:
    """Decide a check of ``measurement`` against the tolerance [low, high] under ``rule``.

    An open edge is -inf / +inf (a one-sided limit). With acceptance guard band w and
    rejection guard band w' the zones are (ILAC-G8:2019, 4.2.3):
    pass when y - w >= T_L and y + w <= T_U; fail when y + w' < T_L or y - w' > T_U;
    conditional pass inside the tolerance otherwise; conditional fail outside it otherwise.
    The comparisons are written as in :func:`meanband.stats.rules.apply_rule` (interval edges
    y -/+ w against the limits), so w = U reproduces its verdicts exactly.
    """
    chosen = as_decision_rule(rule)
    if not isinstance(measurement, Measurement):
        raise TrialError(
            f"apply a decision rule to a Measurement(value, standard_uncertainty, df, coverage_factor), "
            f"got {type(measurement).__name__}"
        )
    low, high = _check_tolerance(low, high)
    y = measurement.value
    w_accept, w_reject = chosen.guard_bands(measurement, low, high)
    if y - w_accept >= low and y + w_accept <= high:
        zone = STATEMENT_PASS
    elif y + w_reject < low or y - w_reject > high:
        zone = STATEMENT_FAIL
    elif low <= y <= high:
        zone = CONDITIONAL_PASS
    else:
        zone = CONDITIONAL_FAIL
    u, df = measurement.standard_uncertainty, measurement.df
    p_c = conformance_probability(y, u, df, low, high)
    inside = zone in (STATEMENT_PASS, CONDITIONAL_PASS)
    if inside:
        risk, kind = _outside_probability(y, u, df, low, high), "false accept"
    else:
        risk, kind = p_c, "false reject"
    if chosen.statement == BINARY:
        statement = STATEMENT_PASS if zone == STATEMENT_PASS else STATEMENT_FAIL
    else:
        statement = zone
    return ConformityOutcome(
        rule=chosen,
        verdict=VERDICT_OF_STATEMENT[zone],
        statement=statement,
        zone=zone,
        guard_band=w_accept,
        rejection_guard_band=w_reject,
        acceptance_low=low + w_accept if math.isfinite(low) else -math.inf,
        acceptance_high=high - w_accept if math.isfinite(high) else math.inf,
        conformance_probability=p_c,
        specific_risk=risk,
        risk_kind=kind,
    )


def specific_risk_guard_band(
    target: float,
    standard_uncertainty: float,
    df: float,
    low: float,
    high: float,
    *,
    reject: bool = False,
) -> float:
    """The guard band w at whose limit the specific risk equals ``target`` (JCGM 106:2012, 9.3).

    Acceptance (default): the smallest w such that a value on T_U - w (or T_L + w) has
    1 - p_c <= target. One limit: w = u F^-1(1 - target), F the t distribution with ``df``
    degrees of freedom (normal when infinite); with normal statistics and target = 1 - C this
    is the one-sided guarded band U = z_C u. Two limits: solved by Brent's method (the risk
    falls monotonically as the value moves towards the centre). ``math.inf`` when even a
    value at the centre of the tolerance has risk above the target: nothing can be accepted.

    ``reject=True``: the smallest w such that a value on T_U + w (or T_L - w) has
    p_c <= target (guarded rejection at the same risk).
    """
    from scipy.optimize import brentq

    p = _number(target, "the target specific risk")
    if not (0.0 < p <= 0.5):
        raise TrialError(f"the target specific risk must lie in (0, 0.5], got {target!r}")
    u = _number(standard_uncertainty, "the standard uncertainty")
    if not (math.isfinite(u) and u >= 0):
        raise TrialError(f"the standard uncertainty must be finite and >= 0, got {standard_uncertainty!r}")
    df = _number(df, "the degrees of freedom")
    if math.isnan(df) or df <= 0:
        raise TrialError(f"degrees of freedom must be > 0 (or inf), got {df!r}")
    low, high = _check_tolerance(low, high)
    if u == 0.0:
        return 0.0
    dist = _distribution(df)
    one_limit = float(dist.isf(p))  # in units of u
    if not (math.isfinite(low) and math.isfinite(high)):
        return one_limit * u
    width = (high - low) / u  # in units of u
    if reject:
        # p_c at T_U + s u = F(-s) - F(-s - width): falls from its value at s = 0.
        def excess(s: float) -> float:
            return float(dist.cdf(-s) - dist.cdf(-s - width)) - p

        if excess(0.0) <= 0.0:
            return 0.0
        if excess(one_limit) >= 0.0:  # the far limit's share underflows: one limit's answer
            return one_limit * u
        return float(brentq(excess, 0.0, one_limit, xtol=1e-13, rtol=1e-12)) * u
    # 1 - p_c at T_U - s u = sf(s) + cdf(s - width): falls until the centre s = width / 2.
    def risk_excess(s: float) -> float:
        return float(dist.sf(s) + dist.cdf(s - width)) - p

    centre = width / 2.0
    if risk_excess(centre) > 0.0:
        return math.inf
    if risk_excess(0.0) <= 0.0:
        return 0.0
    return float(brentq(risk_excess, 0.0, centre, xtol=1e-13, rtol=1e-12)) * u


def as_decision_rule(spec: DecisionRule | str | None, *, statement: str | None = None) -> DecisionRule:
    """A rule from a user's spec: a rule object, None (the default, guarded w = U), or a string:
    ``"guarded"``, ``"guarded:0.5"`` (w = 0.5 U), ``"simple"``, ``"specific-risk:0.01"``.

    ``statement`` ("binary" or "non-binary"), when given, replaces the rule's statement mode.
    """
    rule: DecisionRule
    if spec is None:
        rule = GuardedAcceptance()
    elif isinstance(spec, _RULE_TYPES):
        rule = spec
    elif isinstance(spec, str):
        rule = _parse_rule(spec)
    else:
        raise TrialError(
            f"a decision rule is a string such as 'guarded', 'guarded:0.5', 'simple' or "
            f"'specific-risk:0.01', or a rule object (GuardedAcceptance, SimpleAcceptance, "
            f"SpecificRiskAcceptance); got {spec!r}"
        )
    if statement is not None:
        _check_statement_mode(statement)
        rule = dataclasses.replace(rule, statement=statement)
    return rule


def _parse_rule(text: str) -> DecisionRule:
    name, sep, argument = text.strip().lower().partition(":")
    name, argument = name.strip(), argument.strip()
    choices = "'guarded', 'guarded:R' (w = R U), 'simple' or 'specific-risk:P' (target risk P)"
    if name == "simple" and not sep:
        return SimpleAcceptance()
    if name == "guarded" and not sep:
        return GuardedAcceptance()
    if name in ("guarded", "specific-risk") and sep:
        try:
            number = float(argument)
        except ValueError:
            raise TrialError(
                f"decision rule {text!r}: {argument!r} is not a number; write e.g. "
                + ("'guarded:0.5'" if name == "guarded" else "'specific-risk:0.01'")
            ) from None
        return GuardedAcceptance(number) if name == "guarded" else SpecificRiskAcceptance(number)
    raise TrialError(f"unknown decision rule {text!r}; choose {choices}")


# --------------------------------------------------------------------------------------------
# Global risks (JCGM 106:2012, clause 9)


@dataclass(frozen=True, slots=True)
class ProcessPrior:
    """Normal prior of the true values the production process makes: mean y0 and sd u_p
    (JCGM 106:2012, 9.4-9.5)."""

    mean: float
    sd: float

    def __post_init__(self) -> None:
        mean = _number(self.mean, "the process mean")
        sd = _number(self.sd, "the process standard deviation")
        if not math.isfinite(mean):
            raise TrialError(f"the process mean must be finite, got {self.mean!r}")
        if not (math.isfinite(sd) and sd > 0):
            raise TrialError(
                f"the process standard deviation must be finite and > 0, got {self.sd!r}; "
                "take it from the spread of true values across units (a capability study)"
            )
        object.__setattr__(self, "mean", mean)
        object.__setattr__(self, "sd", sd)


@dataclass(frozen=True, slots=True)
class GlobalRisks:
    """Global risks of one acceptance zone (JCGM 106:2012, 9.4-9.5).

    ``consumer_risk`` R_C = P(true value outside the tolerance and measured value accepted);
    ``producer_risk`` R_P = P(true value inside and measured value not accepted). Both are
    joint probabilities over all units made. ``conforming_rejected_share`` = R_P / P(conforming)
    is the share of good units that the gate turns away; ``accepted_nonconforming_share`` =
    R_C / P(accepted) the share of bad units among those it passes (None when undefined).
    Under meanband's rules "not accepted" is FAIL or UNDECIDED: both fail the test.
    """

    guard_band: float
    acceptance_low: float
    acceptance_high: float
    consumer_risk: float
    producer_risk: float
    conforming_probability: float
    acceptance_probability: float

    @property
    def conforming_rejected_share(self) -> float | None:
        """R_P / P(conforming)."""
        if self.conforming_probability <= 0.0:
            return None
        return min(self.producer_risk / self.conforming_probability, 1.0)

    @property
    def accepted_nonconforming_share(self) -> float | None:
        """R_C / P(accepted)."""
        if self.acceptance_probability <= 0.0:
            return None
        return min(self.consumer_risk / self.acceptance_probability, 1.0)

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; an open edge is written as None."""
        return {
            "guard_band": _finite_or_none(self.guard_band),
            "acceptance_low": _finite_or_none(self.acceptance_low),
            "acceptance_high": _finite_or_none(self.acceptance_high),
            "consumer_risk": float(self.consumer_risk),
            "producer_risk": float(self.producer_risk),
            "conforming_probability": float(self.conforming_probability),
            "acceptance_probability": float(self.acceptance_probability),
            "conforming_rejected_share": self.conforming_rejected_share,
            "accepted_nonconforming_share": self.accepted_nonconforming_share,
        }


@dataclass(frozen=True, slots=True)
class GlobalRiskCurve:
    """Global risks over a grid of guard bands, to choose one knowingly (arrays, one per w)."""

    low: float
    high: float
    guard_bands: np.ndarray
    consumer_risk: np.ndarray
    producer_risk: np.ndarray
    conforming_probability: float
    acceptance_probability: np.ndarray

    def at(self, index: int) -> GlobalRisks:
        """The risks of the ``index``-th guard band."""
        w = float(self.guard_bands[index])
        return GlobalRisks(
            guard_band=w,
            acceptance_low=self.low + w if math.isfinite(self.low) else -math.inf,
            acceptance_high=self.high - w if math.isfinite(self.high) else math.inf,
            consumer_risk=float(self.consumer_risk[index]),
            producer_risk=float(self.producer_risk[index]),
            conforming_probability=self.conforming_probability,
            acceptance_probability=float(self.acceptance_probability[index]),
        )


def global_risks(
    prior: ProcessPrior,
    standard_uncertainty: float,
    low: float,
    high: float,
    guard_band: float | DecisionRule = 0.0,
    *,
    coverage_factor: float = 2.0,
    df: float = math.inf,
) -> GlobalRisks:
    """Consumer's and producer's risk of the acceptance zone [T_L + w, T_U - w] for units drawn
    from ``prior`` and measured with a normal error of sd u (JCGM 106:2012, 9.4-9.5):

        R_C = int_{eta not in C} g0(eta) P(y in A | eta) d eta,
        R_P = int_{eta in C} g0(eta) P(y not in A | eta) d eta,

    g0 the normal prior, P(y in A | eta) = Phi((A_U - eta)/u) - Phi((A_L - eta)/u), integrated
    by adaptive quadrature (scipy.integrate.quad_vec). ``guard_band`` is a number or a rule,
    whose acceptance guard band is taken with ``coverage_factor`` and ``df`` (the risks
    themselves use the normal measurement model of JCGM 106:2012, 9.5, whatever ``df`` is).
    """
    low, high = _check_tolerance(low, high)
    if isinstance(guard_band, _RULE_TYPES):
        probe = Measurement(_probe_value(low, high), standard_uncertainty, df, coverage_factor)
        w = guard_band.guard_bands(probe, low, high)[0]
    else:
        w = _number(guard_band, "the guard band")
    return global_risk_curve(prior, standard_uncertainty, low, high, [w]).at(0)


def global_risk_curve(
    prior: ProcessPrior,
    standard_uncertainty: float,
    low: float,
    high: float,
    guard_bands: np.ndarray | list[float],
) -> GlobalRiskCurve:
    """:func:`global_risks` for many guard bands at once: one vector-valued quadrature."""
    from scipy.integrate import quad_vec
    from scipy.stats import norm

    if not isinstance(prior, ProcessPrior):
        raise TrialError(f"the process prior must be a ProcessPrior(mean, sd), got {prior!r}")
    low, high = _check_tolerance(low, high)
    u = _number(standard_uncertainty, "the standard uncertainty")
    if not (math.isfinite(u) and u >= 0):
        raise TrialError(f"the standard uncertainty must be finite and >= 0, got {standard_uncertainty!r}")
    w = np.atleast_1d(np.asarray(guard_bands, dtype=np.float64))
    if w.ndim != 1 or w.size == 0 or np.isnan(w).any():
        raise TrialError("give the guard bands as a non-empty 1-D list of numbers (inf allowed)")
    if (w < 0).any():
        raise TrialError(
            f"guard bands must be >= 0 (a negative w widens acceptance beyond the tolerance), "
            f"got {w[w < 0].tolist()}"
        )
    accept_low = np.where(np.isfinite(low), low + w, -np.inf)
    accept_high = np.where(np.isfinite(high), high - w, np.inf)
    empty = accept_low > accept_high
    y0, sd = prior.mean, prior.sd
    z_low, z_high = (low - y0) / sd, (high - y0) / sd
    conforming = float(norm.cdf(z_high) - norm.cdf(z_low)) if z_low < 0 else float(
        norm.sf(z_low) - norm.sf(z_high)
    )
    # y = eta + e is normal with sd sqrt(sd^2 + u^2): P(accepted) in closed form.
    sd_y = math.hypot(sd, u)
    accepted = np.where(
        empty, 0.0, norm.cdf((accept_high - y0) / sd_y) - norm.cdf((accept_low - y0) / sd_y)
    )

    if u == 0.0:
        # A perfect measurement accepts exactly the units whose true value lies in A.
        a_low, a_high = np.maximum(accept_low, low), np.minimum(accept_high, high)
        kept = np.where(empty, 0.0, norm.cdf((a_high - y0) / sd) - norm.cdf((a_low - y0) / sd))
        return GlobalRiskCurve(low, high, w, np.zeros_like(w), np.maximum(conforming - kept, 0.0),
                               conforming, accepted)

    def p_accept(eta: float) -> np.ndarray:
        with np.errstate(over="ignore"):  # a huge zone over a tiny u: the cdf is 0 or 1 anyway
            return np.where(empty, 0.0, norm.cdf((accept_high - eta) / u)
                            - norm.cdf((accept_low - eta) / u))

    def p_reject(eta: float) -> np.ndarray:
        # The two tails directly, so a tiny rejection probability keeps its digits.
        with np.errstate(over="ignore"):
            return np.where(empty, 1.0, norm.cdf((accept_low - eta) / u)
                            + norm.sf((accept_high - eta) / u))

    def integrate(f: Any, a: float, b: float) -> np.ndarray:
        a, b = max(a, -_PRIOR_SPAN), min(b, _PRIOR_SPAN)
        if not a < b:
            return np.zeros_like(w)
        # The inner probability turns around each acceptance limit on the scale of u, which
        # may be far finer than the prior's: break the range there at a ladder of widths.
        limits = np.concatenate([accept_low, accept_high])
        centres = (limits[np.isfinite(limits)] - y0) / sd
        ladder = (u / sd) * np.array([-16.0, -8.0, -4.0, -2.0, -1.0, 0.0, 1.0, 2.0, 4.0, 8.0, 16.0])
        candidates = np.concatenate([(centres[:, None] + ladder[None, :]).ravel(), [0.0]])
        breaks = sorted({float(z) for z in candidates if a < z < b})
        value, _ = quad_vec(
            lambda z: norm.pdf(z) * f(y0 + sd * z), a, b, epsabs=1e-15, epsrel=1e-10,
            norm="max", points=breaks or None,
        )
        return np.asarray(value, dtype=np.float64)

    producer = integrate(p_reject, z_low, z_high)
    consumer = integrate(p_accept, -math.inf, z_low) + integrate(p_accept, z_high, math.inf)
    return GlobalRiskCurve(
        low=low,
        high=high,
        guard_bands=w,
        consumer_risk=np.clip(consumer, 0.0, 1.0),
        producer_risk=np.clip(producer, 0.0, 1.0),
        conforming_probability=conforming,
        acceptance_probability=accepted,
    )


def process_capability(low: float, high: float, process_sd: float) -> float:
    """C_p = (T_U - T_L) / (6 u_p) (JCGM 106:2012, 9.5; from memory)."""
    low, high = _check_two_limits(low, high, "process capability")
    return (high - low) / (6.0 * _positive(process_sd, "the process standard deviation"))


def measurement_capability(low: float, high: float, standard_uncertainty: float) -> float:
    """C_m = (T_U - T_L) / (4 u_m), i.e. the tolerance over 2U with U = 2 u_m
    (JCGM 106:2012, 9.5; from memory)."""
    low, high = _check_two_limits(low, high, "measurement capability")
    return (high - low) / (4.0 * _positive(standard_uncertainty, "the standard uncertainty"))


# --------------------------------------------------------------------------------------------
# Test uncertainty ratio


@dataclass(frozen=True, slots=True)
class UncertaintyRatio:
    """Test uncertainty ratio of one check against a threshold (4:1 by default, common practice).

    ``ratio`` is None when undefined (a single limit with no nominal value); ``basis`` says
    how it was formed.
    """

    ratio: float | None
    threshold: float
    basis: str

    @property
    def below_threshold(self) -> bool:
        """True when the ratio is defined and below the threshold."""
        return self.ratio is not None and self.ratio < self.threshold

    def note(self) -> str | None:
        """A line for the report when the ratio is below the threshold, else None."""
        if not self.below_threshold:
            return None
        return (
            f"test uncertainty ratio {self.ratio:.2g}:1 is below {self.threshold:g}:1 (common "
            "practice): the uncertainty takes a large share of the tolerance"
        )

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only; an infinite or undefined ratio is written as None."""
        ratio = None if self.ratio is None else _finite_or_none(self.ratio)
        return {"ratio": ratio, "threshold": self.threshold, "basis": self.basis,
                "below_threshold": self.below_threshold}


def uncertainty_ratio(
    low: float,
    high: float,
    expanded: float,
    *,
    nominal: float | None = None,
    threshold: float = TUR_THRESHOLD,
) -> UncertaintyRatio:
    """TUR of a check: (T_U - T_L) / (2U) for two limits (equal to C_m when U = 2u).

    A single limit has no width: with a ``nominal`` (design) value on its conforming side the
    ratio is |T - nominal| / U, the same half-tolerance over U; without one it is undefined
    (None) and raises no note.
    """
    low, high = _check_tolerance(low, high)
    big_u = _number(expanded, "the expanded uncertainty")
    if not (math.isfinite(big_u) and big_u >= 0):
        raise TrialError(f"the expanded uncertainty must be finite and >= 0, got {expanded!r}")
    limit_ratio = _positive(threshold, "the TUR threshold")
    if math.isfinite(low) and math.isfinite(high):
        if nominal is not None:
            raise TrialError("a nominal value is only used for a single limit; drop it for a band")
        span = (high - low) / 2.0
        basis = "(T_U - T_L) / 2U"
    elif nominal is None:
        return UncertaintyRatio(None, limit_ratio, "undefined: a single limit and no nominal value")
    else:
        centre = _number(nominal, "the nominal value")
        limit = high if math.isfinite(high) else low
        if not math.isfinite(centre) or not (low < centre < high):
            raise TrialError(
                f"the nominal value {nominal!r} must lie on the conforming side of the limit {limit!r}"
            )
        span = abs(limit - centre)
        basis = "|T - nominal| / U"
    ratio = math.inf if big_u == 0.0 else span / big_u
    return UncertaintyRatio(ratio, limit_ratio, basis)


# --------------------------------------------------------------------------------------------
# Helpers


def _check_statement_mode(mode: str) -> None:
    if mode not in STATEMENT_MODES:
        raise TrialError(
            f"unknown statement mode {mode!r}; choose 'binary' (pass/fail, ILAC-G8:2019 4.2.1-4.2.2) "
            "or 'non-binary' (pass/conditional pass/conditional fail/fail, ILAC-G8:2019 4.2.3)"
        )


def _check_tolerance(low: float, high: float) -> tuple[float, float]:
    lo, hi = _number(low, "the low limit"), _number(high, "the high limit")
    if math.isnan(lo) or math.isnan(hi):
        raise TrialError(
            f"tolerance limits must be numbers (-inf/inf for an open edge), got {low!r}, {high!r}"
        )
    if lo > hi:
        raise TrialError(f"the tolerance's low limit {low!r} lies above its high limit {high!r}")
    if math.isinf(lo) and math.isinf(hi):
        raise TrialError("give at least one finite tolerance limit (low, high or both)")
    if lo == math.inf or hi == -math.inf:
        raise TrialError(f"an open low edge is -inf and an open high edge +inf, got {low!r}, {high!r}")
    return lo, hi


def _check_two_limits(low: float, high: float, what: str) -> tuple[float, float]:
    lo, hi = _check_tolerance(low, high)
    if not (math.isfinite(lo) and math.isfinite(hi)) or lo == hi:
        raise TrialError(f"{what} needs two distinct finite limits T_L < T_U, got {low!r}, {high!r}")
    return lo, hi


def _number(value: Any, what: str) -> float:
    if isinstance(value, bool):
        raise TrialError(f"{what} must be a number, not {value!r}")
    try:
        return float(value)
    except (TypeError, ValueError):
        raise TrialError(f"{what} must be a number, got {value!r}") from None


def _positive(value: Any, what: str) -> float:
    number = _number(value, what)
    if not (math.isfinite(number) and number > 0):
        raise TrialError(f"{what} must be finite and > 0, got {value!r}")
    return number


def _probe_value(low: float, high: float) -> float:
    """Any finite value: the guard bands of these rules do not depend on y."""
    if math.isfinite(low) and math.isfinite(high):
        return (low + high) / 2.0
    return low if math.isfinite(low) else high


def rule_spec(rule: DecisionRule) -> str:
    """The rule as its string spec (the inverse of :func:`as_decision_rule` for the rule kind):
    ``"guarded"``, ``"guarded:0.5"``, ``"simple"`` or ``"specific-risk:0.01"``."""
    if isinstance(rule, SimpleAcceptance):
        return "simple"
    if isinstance(rule, SpecificRiskAcceptance):
        return f"specific-risk:{rule.target:g}"
    return "guarded" if rule.factor == 1.0 else f"guarded:{rule.factor:g}"
