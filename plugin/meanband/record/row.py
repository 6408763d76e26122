"""The result row: one record per check (or per series never checked), its one definition.

A row is plain JSON data, a ``dict`` at run time, so that it crosses from pytest-xdist workers
inside pytest's own reports, is written to JSON and SQLite as it is, and can carry a key that
another plugin adds. Its keys are declared here, once, as ``TypedDict`` definitions; the JSON
Schema shipped with the package (``store/report.schema.json``) declares the same keys, and a
test holds the two together. :func:`build_row` is the one place that makes a row.
"""

from __future__ import annotations

import os
from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any, TypedDict

from meanband.errors import hide_plugin_frames

if TYPE_CHECKING:
    import numpy as np

    from meanband.stats.decision import Decision

__all__ = [
    "OPTIONAL_ROW_KEYS",
    "ROW_KEYS",
    "BandRecord",
    "BaselineRecord",
    "ComparisonRecord",
    "DecisionRecord",
    "InstrumentRecord",
    "IntervalRecord",
    "NoteRecord",
    "PooledRecord",
    "ResultRow",
    "RuleRecord",
    "SequentialRecord",
    "SettingsRecord",
    "SuggestionRecord",
    "TimingRecord",
    "TwoStageRecord",
    "UncertaintyRecord",
    "build_row",
    "decision_record",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

class BandRecord(TypedDict):
    """``Band.to_dict()``: an open edge is -inf or +inf."""

    low: float
    high: float
    unit: str | None


class _IntervalCore(TypedDict):
    mean: float
    low: float
    high: float
    confidence: float
    side: str
    n: int
    df: float
    sd: float
    sem: float
    method: str


class IntervalRecord(_IntervalCore, total=False):
    """``Interval.to_dict()``: the interval (or one-sided bound) of the mean."""

    critical: float
    estimand: str


class _NoteCore(TypedDict):
    code: str
    text: str


class NoteRecord(_NoteCore, total=False):
    """A remark on a check: a stable ``code``, ``text`` for people, and the interval method it
    recommends, if any."""

    recommend: str


class _DecisionCore(TypedDict):
    verdict: str
    band: BandRecord
    interval: IntervalRecord
    counter: IntervalRecord | None
    diagnostics: dict[str, Any]
    suggested_n: int | None
    unit: str | None


class DecisionRecord(_DecisionCore, total=False):
    """The decision of a check (``Decision.to_dict()`` less its uncertainty and rule, which the
    row carries under keys of their own); ``power`` is that of ``suggested_n``."""

    power: float


class _SettingsCore(TypedDict):
    confidence: float
    method: str


class SettingsRecord(_SettingsCore, total=False):
    """``Settings.to_dict()``; ``n`` is ``"auto"`` for a two-stage count."""

    n: int | str
    warmup: int | str
    min_n: int
    normality_alpha: float
    power: float
    min_trial_time: float | None
    clock: str
    gc: bool
    time_limit: float | None
    max_n: int | None


class TimingRecord(TypedDict, total=False):
    """How the trials were timed: the engine's ``Timing.to_dict()`` (plus ``calls``, the number
    of timing calls on the series), or, for an in-run comparison, its clock, calls per trial,
    ``interleaved`` and ``repeats``."""

    clock: str
    source: str
    resolution_ns: float
    read_cost_ns: float
    k: int
    min_trial_time: float
    trials: int
    requested: int
    warmup_trials: int
    stopped_early: bool
    time_limit: float | None
    gc_enabled: bool
    setup: bool
    calibration: list[list[float]]
    elapsed: float
    drift: dict[str, Any] | None
    calls: int
    interleaved: bool
    repeats: int


class _UncertaintyCore(TypedDict):
    mean: float
    n: int
    sd: float
    type_a: float
    type_a_df: float | None
    type_b: float
    type_b_df: float | None
    combined: float
    effective_df: float | None
    coverage_factor: float
    expanded: float
    confidence: float
    side: str


class UncertaintyRecord(_UncertaintyCore, total=False):
    """``UncertaintyBudget.to_dict()``: an infinite df is None; ``calibration`` is the
    instrument's calibration record (instrument, certificate, calibrated, due), when given."""

    calibration: dict[str, Any] | None


class _RuleCore(TypedDict):
    rule: str
    verdict: str
    guard_band: float
    acceptance_low: float | None
    acceptance_high: float | None
    conformance_probability: float | None
    false_accept_probability: float | None
    false_reject_probability: float | None


class RuleRecord(_RuleCore, total=False):
    """``RuleOutcome.to_dict()``: an open acceptance edge is None; ``statement`` is the ILAC-G8
    statement of a rule given as a value (``"guarded:0.5"``, ``"specific-risk:0.01"``);
    ``risks`` the rule's global risks (``GlobalRisks.to_dict()``) for a stated process;
    ``uncertainty_ratio`` the test uncertainty ratio (tolerance / 2U), where it is defined."""

    statement: str
    risks: dict[str, Any]
    uncertainty_ratio: float


class TwoStageRecord(TypedDict):
    """``StagePlan.to_dict()`` of an ``n="auto"`` check."""

    pilot_n: int
    pilot_mean: float
    pilot_sd: float
    margin: float
    second_n: int
    requested_n: int | None
    max_n: int
    capped: bool
    power: float


class ComparisonRecord(TypedDict):
    """An in-run comparison: both callables' seconds per call, pair by pair, and the ratio."""

    new: str
    old: str
    new_values: list[float]
    old_values: list[float]
    new_first: int
    ratio: dict[str, Any]
    at_most: float | None
    at_least: float | None


class _BaselineCore(TypedDict):
    status: str
    run: int
    label: str


class BaselineRecord(_BaselineCore, total=False):
    """The check against its baseline: the stored run it was compared with, the status, and for
    a comparison made, the ratio interval, the allowed range and the means."""

    started: str
    commit: str | None
    reason: str
    timing: bool
    ratio: dict[str, Any]
    limit_low: float | None
    limit_high: float
    current_mean: float
    baseline_mean: float
    n_current: int
    n_baseline: int
    suggested_n: int | None
    note: str
    runs: list[int]
    adjustment: str
    comparisons: int
    p_value: float
    threshold: float
    noise: dict[str, Any]
    found_at_end: bool


class _SuggestionCore(TypedDict):
    n: int | None
    reason: str
    direction: str
    current_n: int
    power: float
    power_now: float | None


class SuggestionRecord(_SuggestionCore, total=False):
    """``Suggestion.to_dict()``, and the line the summary prints for it (``text``)."""

    saves_seconds: float
    max_n: int
    text: str


class _SequentialCore(TypedDict):
    stopped_at: int
    looks: int
    block: int
    max_n: int
    first_look: int
    tightest_at: int
    reason: str


class SequentialRecord(_SequentialCore, total=False):
    """An ``n="until-decided"`` check: where collection stopped, after how many looks, in blocks
    of how many trials, the cap, the first look, the sequence's tuning, and why it ended
    (``decided``, ``max_n`` or ``time limit``). Planned looks (``n="looks:K"``) add the mode,
    the planned counts, the spending shape and the z boundaries; a rerun that continued an earlier
    try's sequence says which run and how many of its trials (``continued``)."""

    mode: str
    planned: list[int]
    shape: str
    bounds: list[float]
    continued: dict[str, int]


class InstrumentRecord(TypedDict):
    """The instrument a series was read from (``trials.sample(dmm, query=...)``): its VISA
    resource, its ``*IDN?`` answer, the query, the timeout in ms and its error-queue entries."""

    resource: str
    identity: str | None
    query: str
    timeout_ms: float | None
    errors: list[str]


class PooledRecord(TypedDict):
    """Where a pooled row's trials came from: run indexes, trials per run, and the keys of
    per-run results that the pool did not recompute."""

    runs: list[int]
    counts: list[int]
    dropped: list[str]


class _RowCore(TypedDict):
    nodeid: str
    series: str
    kind: str
    unit: str | None
    source: str | None
    values: list[float] | None
    warmup: list[float] | None
    decision: DecisionRecord | None
    notes: list[NoteRecord]
    settings: SettingsRecord
    timing: TimingRecord | None


class ResultRow(_RowCore, total=False):
    """One check (``kind="check"``) or one series recorded but never checked (``"unchecked"``).

    ``values`` and ``warmup`` are None only in a JSON report written without its trials.
    The optional keys belong to features: the check's uncertainty budget and decision rule, an
    ``n="auto"`` plan, an in-run comparison, the baseline comparison, the suggested count, the
    run a report row came from, and a merge's pooling.
    """

    uncertainty: UncertaintyRecord | None
    rule: RuleRecord | None
    two_stage: TwoStageRecord
    sequential: SequentialRecord
    comparison: ComparisonRecord
    baseline: BaselineRecord
    suggestion: SuggestionRecord | None
    instrument: InstrumentRecord
    times: list[float]
    run: int
    pooled: PooledRecord
    load: float | None


#: Keys every row has, and keys a row may have.
ROW_KEYS = frozenset(_RowCore.__annotations__)
OPTIONAL_ROW_KEYS = frozenset(ResultRow.__annotations__) - ROW_KEYS


def decision_record(
    decision: Decision,
) -> tuple[DecisionRecord, UncertaintyRecord | None, RuleRecord | None]:
    """A decision as the row holds it: the decision proper, its uncertainty and its rule."""
    full = decision.to_dict()
    uncertainty = full.pop("uncertainty")
    rule = full.pop("rule")
    risks = full.pop("risks")
    if risks is not None:
        rule = {**rule, "risks": risks}
    return full, uncertainty, rule  # type: ignore[return-value]


def build_row(
    *,
    nodeid: str,
    series: str,
    unit: str | None,
    source: str | None,
    values: Sequence[float] | np.ndarray,
    warmup: Sequence[float] | np.ndarray = (),
    decision: Decision | DecisionRecord | None = None,
    notes: Sequence[Mapping[str, str]] = (),
    settings: Mapping[str, Any] | None = None,
    timing: Mapping[str, Any] | None = None,
    **extra: Any,
) -> ResultRow:
    """The one way to make a row: a check when ``decision`` is given, else an unchecked series.

    ``decision`` is a :class:`~meanband.stats.decision.Decision` (its uncertainty and rule go to
    the row's own keys) or a ready :class:`DecisionRecord` (e.g. an in-run comparison's).
    ``extra`` holds the optional keys (``two_stage=...``, ``comparison=...``); any other name is
    a :class:`TypeError`, so a new key must be declared above first.
    """
    unknown = sorted(set(extra) - OPTIONAL_ROW_KEYS)
    if unknown:
        raise TypeError(f"unknown result-row key(s) {', '.join(unknown)}; declare them in ResultRow")
    row: dict[str, Any] = {
        "nodeid": nodeid,
        "series": series,
        "kind": "unchecked" if decision is None else "check",
        "unit": unit,
        "source": source,
        "values": _floats(values),
        "warmup": _floats(warmup),
        "decision": None,
        "notes": [dict(note) for note in notes],
        "settings": dict(settings or {}),
        "timing": None if timing is None else dict(timing),
    }
    if decision is not None:
        if isinstance(decision, Mapping):
            row["decision"] = dict(decision)
        else:
            record, uncertainty, rule = decision_record(decision)
            row["decision"] = record
            if uncertainty is not None:
                row["uncertainty"] = uncertainty
            if rule is not None:
                row["rule"] = rule
    row.update(extra)
    return row  # type: ignore[return-value]


def _floats(values: Sequence[float] | np.ndarray) -> list[float]:
    """Builtin floats: a numpy scalar would break pytest-xdist's report transport."""
    import numpy  # not at module level: the plugin imports this module and must stay cheap

    return numpy.asarray(values, dtype=numpy.float64).tolist()  # type: ignore[no-any-return]


def plain_value(value: Any, where: str) -> Any:
    """``value`` as plain JSON data: numpy scalars and arrays become builtins, paths strings.

    Anything else that is not None, bool, int, float, str, a list or a dict with string keys is
    a :class:`TypeError` naming ``where``: rows cross from xdist workers and go into JSON files.
    """
    if value is None or isinstance(value, (bool, int, float, str)):
        return value
    if isinstance(value, Mapping):
        out = {}
        for key, item in value.items():
            if not isinstance(key, str):
                raise TypeError(f"{where} has the key {key!r} of type {type(key).__name__}; "
                                "row keys must be strings")
            out[key] = plain_value(item, f"{where}[{key!r}]")
        return out
    if isinstance(value, (list, tuple)):
        return [plain_value(item, f"{where}[{i}]") for i, item in enumerate(value)]
    if isinstance(value, os.PathLike):
        return os.fspath(value)
    tolist = getattr(value, "tolist", None)  # numpy scalars and arrays, without importing numpy
    if callable(tolist) and type(value).__module__ == "numpy":
        return plain_value(tolist(), where)
    raise TypeError(f"{where} holds a {type(value).__name__} ({value!r:.60}), which is not plain "
                    "JSON data; store a number, a string, a list or a dict instead")


def plain_row(row: Mapping[str, Any]) -> tuple[ResultRow, list[str]]:
    """The row as plain JSON data, and one message per key that was refused (and dropped)."""
    clean: dict[str, Any] = {}
    refused: list[str] = []
    for key, value in row.items():
        try:
            clean[key] = plain_value(value, f"row key {key!r} of {row.get('nodeid', '?')}")
        except TypeError as exc:
            refused.append(f"{exc}; the key was left out")
    return clean, refused  # type: ignore[return-value]
