"""The object the ``trials`` fixture hands a test: collect trials, then check their mean."""

from __future__ import annotations

import os
from collections.abc import Callable, Iterable
from typing import Any

import numpy as np

from meanband.collect.clock import get_clock
from meanband.collect.progress import take_with_progress
from meanband.collect.timing import time_calls
from meanband.errors import BandViolation, TrialError, hide_plugin_frames
from meanband.record import adaptive, sequential
from meanband.record.check import decide_with_notes, drop_immaterial_drift, timing_method
from meanband.record.message import describe
from meanband.record.row import ResultRow, build_row
from meanband.record.settings import Settings
from meanband.stats.bands import Band, Edge, Tolerance, make_band
from meanband.stats.decision import Decision
from meanband.stats.decision_rules import DecisionRule, ProcessPrior
from meanband.stats.interval import Interval
from meanband.stats.methods import mean_interval
from meanband.stats.rules import GUARDED
from meanband.stats.sample import as_sample
from meanband.stats.uncertainty import InstrumentSpec
from meanband.units import SECONDS, duration_scale

__all__ = ["Recorder", "Series"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

class Series:
    """One named stream of trials in a test, with the checks made on it."""

    def __init__(self, name: str, settings: Settings, nodeid: str = "") -> None:
        self.name = name
        self.settings = settings
        self.nodeid = nodeid
        self.unit: str | None = None
        self.source: str | None = None
        self._values = np.empty(0, dtype=np.float64)
        self._warmup = np.empty(0, dtype=np.float64)
        self._timing: dict[str, Any] | None = None
        self._timing_notes: list[dict[str, str]] = []
        self._test_timing = SharedTiming()
        self._rows: list[ResultRow] = []
        self._adaptive: adaptive.AdaptiveRun | None = None  # set by n="auto"
        self._instrument: dict[str, Any] | None = None  # set by sample(..., query=...)
        self._sequential: sequential.SequentialRun | None = None  # set by n="until-decided"
        self._times: list[float] | None = None  # reading times, set by extend_from(time=...)
        # Trials of this series taken by an earlier try of the same commit in the same CI
        # pipeline: n="until-decided" continues their sequence instead of looking afresh.
        self.earlier: sequential.Earlier | None = None
        # Whether a marker, option, ini key or plan set the interval method: timings whose
        # method nobody chose fall back to batch means when lag-1 r is in doubt.
        self.method_chosen = False

    # -- collecting -------------------------------------------------------------------------

    def time(
        self, fn: Callable[..., Any], *args: Any, n: int | str | None = None,
        warmup: int | str | None = None, setup: Callable[[], Any] | None = None,
        max_n: int | None = None, band: dict[str, Edge] | Band | None = None,
        pilot: int | None = None, block: int | None = None, **kwargs: Any,
    ) -> np.ndarray:
        """Run ``n`` timed trials of ``fn(*args, **kwargs)``; each value is seconds per call.

        Each trial makes k calls, k calibrated so a trial lasts the minimum trial time.
        ``setup`` runs before every call, outside the timed region; a value it returns (not
        None) is passed to ``fn`` as the first argument. See docs/timing.md.
        ``n="auto"`` picks the count by Stein's two-stage rule for ``band`` (``adaptive.py``);
        ``n="until-decided"`` times ``block`` trials at a time (default 10) until an anytime-valid
        interval decides ``band``, at most ``max_n`` (``sequential.py``).
        """
        if sequential.is_sequential(n):
            settings = self.settings.merged(warmup=warmup)
            self._claim(SECONDS, "time")
            warm_first = [settings.warmup]

            def take(count: int) -> np.ndarray:
                return self._timed(
                    fn, args, kwargs, settings, count, warm_first.pop() if warm_first else 0, setup
                )

            self._refuse_pilot(pilot)
            return self._until_decided(take, settings, max_n=max_n, band=band, block=block,
                                       default_block=10, mode=str(n))
        _refuse_block(block)
        if n == "auto":
            settings = self.settings.merged(warmup=warmup)
            self._claim(SECONDS, "time")
            warm = [settings.warmup]

            def collect(count: int) -> np.ndarray:
                if count == 0:
                    return np.empty(0, dtype=np.float64)
                values = self._timed(
                    fn, args, kwargs, settings, count, warm.pop() if warm else 0, setup
                )
                if values.size < count:
                    raise TrialError(
                        f"the time limit stopped n='auto' after {values.size} of the {count} "
                        "trials its two-stage rule asks for; raise --meanband-time-limit or set "
                        "a fixed n for this test"
                    )
                return values

            return self._auto(collect, settings, max_n=max_n, band=band, pilot=pilot)
        adaptive.refuse_options(max_n, band, pilot)
        settings = self.settings.merged(n=n, warmup=warmup)
        self._claim(SECONDS, "time")
        values = self._timed(fn, args, kwargs, settings, settings.n, settings.warmup, setup)
        self._append(values)
        return values

    def _timed(
        self, fn: Callable[..., Any], args: tuple[Any, ...], kwargs: dict[str, Any],
        settings: Settings, n: int, warmup: int | str, setup: Callable[[], Any] | None,
    ) -> np.ndarray:
        """One run of the timing engine; keeps its warm-up, details and notes on the series."""
        shared = self._test_timing
        clock = get_clock(settings.clock)
        run = time_calls(
            fn, args, kwargs, n=n, warmup=warmup, setup=setup, clock=clock,
            clock_info=shared.clock_info(clock), min_trial_time=settings.min_trial_time,
            time_limit=shared.time_left(settings.time_limit), gc_enabled=settings.gc,
            environ=shared.environ,
            progress=shared.progress(f"{self.nodeid}{f' [{self.name}]' if self.name else ''}"),
        )
        shared.spent += run.elapsed
        self._warmup = np.concatenate([self._warmup, run.warmup])
        calls = 1 if self._timing is None else int(self._timing.get("calls", 1)) + 1
        self._timing = {**run.to_dict(), "calls": calls}
        for note in run.notes:
            if note.to_dict() not in self._timing_notes:
                self._timing_notes.append(note.to_dict())
        return run.values

    def sample(
        self, fn: Callable[..., Any], *args: Any, n: int | str | None = None,
        unit: str | None = None, max_n: int | None = None,
        band: dict[str, Edge] | Band | None = None, pilot: int | None = None,
        query: str | None = None, timeout: float | None = None, block: int | None = None,
        **kwargs: Any,
    ) -> np.ndarray:
        """Record ``n`` values returned by ``fn(*args, **kwargs)``, in ``unit``.

        With ``query=``, ``fn`` is an instrument (a PyVISA resource) and each value is its answer
        to the query, e.g. ``trials.sample(dmm, query="MEAS:VOLT:DC?", n=30, unit="V")``: its
        ``*IDN?`` goes into the record, ``timeout`` (milliseconds) sets its VISA timeout, and its
        error queue is read after the series (see ``collect/instrument.py``).
        ``n="auto"`` picks the count by Stein's two-stage rule for ``band`` (``adaptive.py``);
        ``n="until-decided"`` takes ``block`` values at a time (default 1) until an anytime-valid
        interval decides ``band``, at most ``max_n`` (``sequential.py``).
        """
        if query is not None:
            return self._sample_instrument(fn, args, kwargs, n, unit, max_n, band, pilot, query,
                                           timeout, block)
        if timeout is not None:
            raise TrialError("timeout= goes with query= (an instrument's VISA timeout, in ms)")

        def collect(count: int) -> np.ndarray:
            collected = take_with_progress(lambda _: fn(*args, **kwargs), count,
                                           self._progress("taken"))
            try:
                return as_sample(collected, minimum=1)
            except TrialError as exc:
                raise TrialError(f"{_callable_name(fn)} returned bad values: {exc}") from None

        return self._sample_with(collect, n, unit, max_n, band, pilot, block)

    def _sample_with(
        self, collect: Callable[[int], np.ndarray], n: int | str | None, unit: str | None,
        max_n: int | None, band: dict[str, Edge] | Band | None, pilot: int | None,
        block: int | None = None,
    ) -> np.ndarray:
        if sequential.is_sequential(n):
            self._claim(unit, "sample")
            self._refuse_pilot(pilot)
            return self._until_decided(collect, self.settings, max_n=max_n, band=band,
                                       block=block, default_block=1, mode=str(n))
        _refuse_block(block)
        if n == "auto":
            self._claim(unit, "sample")
            return self._auto(collect, self.settings, max_n=max_n, band=band, pilot=pilot)
        adaptive.refuse_options(max_n, band, pilot)
        settings = self.settings.merged(n=n)
        self._claim(unit, "sample")
        values = collect(settings.n)
        self._append(values)
        return values

    def _sample_instrument(
        self, instrument: Any, args: tuple[Any, ...], kwargs: dict[str, Any],
        n: int | str | None, unit: str | None, max_n: int | None,
        band: dict[str, Edge] | Band | None, pilot: int | None, query: str,
        timeout: float | None, block: int | None,
    ) -> np.ndarray:
        from meanband.collect.instrument import read_series, resource_name

        if args or kwargs:
            raise TrialError(
                f"with query= the instrument {resource_name(instrument)} is asked the query "
                "itself; drop the extra arguments"
            )
        readings: list[Any] = []

        def collect(count: int) -> np.ndarray:
            values, reading = read_series(instrument, query, count, timeout_ms=timeout,
                                          progress=self._progress("read"))
            readings.append(reading)
            self._instrument = reading.to_dict()
            return values

        values = self._sample_with(collect, n, unit, max_n, band, pilot, block)
        errors = [e for reading in readings for e in reading.errors]
        if errors:
            # The readings stay recorded (and in the summary), but they are not trusted.
            raise TrialError(
                f"instrument {readings[-1].resource} reported {len(errors)} error(s) in its "
                f"error queue after the series: {'; '.join(errors[:3])}"
                f"{' ...' if len(errors) > 3 else ''}; the {values.size} readings are recorded "
                "but not checked: fix the setup and measure again"
            )
        return values

    def _auto(
        self, take: Callable[[int], np.ndarray], settings: Settings, *, max_n: int | None,
        band: dict[str, Edge] | Band | None, pilot: int | None,
    ) -> np.ndarray:
        self._adaptive = adaptive.collect(
            take, held=self._values.size, label=self._label(), unit=self.unit, band=band,
            settings=settings, max_n=max_n, pilot=pilot,
        )
        self._append(self._adaptive.values)
        return self._adaptive.values

    def _until_decided(
        self, take: Callable[[int], np.ndarray], settings: Settings, *, max_n: int | None,
        band: dict[str, Edge] | Band | None, block: int | None, default_block: int,
        mode: str = sequential.UNTIL_DECIDED,
    ) -> np.ndarray:
        self._sequential = sequential.collect(
            take, held=self._values.size, label=self._label(), unit=self.unit, band=band,
            settings=settings, max_n=max_n, block=block, default_block=default_block,
            mode=mode, earlier=self.earlier,
        )
        self._append(self._sequential.values)
        return self._sequential.values

    @staticmethod
    def _refuse_pilot(pilot: int | None) -> None:
        if pilot is not None:
            raise TrialError("pilot= goes with n='auto' only; n='until-decided' needs no pilot")

    def add(self, value: float, *, unit: str | None = None) -> None:
        """Record one value measured elsewhere."""
        self.extend([value], unit=unit)

    def extend(self, values: Iterable[float] | np.ndarray, *, unit: str | None = None) -> None:
        """Record values measured elsewhere; nothing is recorded if any value is bad."""
        clean = as_sample(values, minimum=0)
        time_unit = unit if unit is not None else self.unit
        if duration_scale(time_unit) is not None and clean.size and clean.min() < 0:
            bad = int(np.count_nonzero(clean < 0))
            raise TrialError(
                f"{bad} of {clean.size} timings are negative (smallest {clean.min():.4g} "
                f"{time_unit}); a "
                "duration cannot be below zero, so the clock or the subtraction that made them "
                "is wrong: fix it before checking a budget"
            )
        self._claim(unit, "values")
        self._append(clean)

    def extend_from(
        self, path: str | os.PathLike[str], column: str | int | None = None, *,
        unit: str | None = None, delimiter: str | None = None, header: bool | None = None,
        time: str | int | None = None,
    ) -> np.ndarray:
        """Record one column of a bench log (CSV or whitespace-separated; ``#`` comments).

        ``column`` is a header name or a 0-based index. A bad row raises TrialError with its
        line number, and the series keeps exactly what it held before. ``time`` names the
        column of reading times (seconds, or ISO 8601): the run chart plots against it, and
        readings out of order or gaps in the log are notes.
        """
        from meanband.collect.benchlog import log_time_notes, read_column, read_timed_column

        if time is None:
            values = read_column(path, column, delimiter=delimiter, header=header)
            self.extend(values, unit=unit)
            return values
        if self._values.size:
            raise TrialError(
                "a log with a time column starts a series: this one already holds "
                f"{self._values.size} trials; use trials.series('name') for the log"
            )
        values, times = read_timed_column(path, column, time, delimiter=delimiter, header=header)
        self.extend(values, unit=unit)
        self._times = times.tolist()
        self._timing_notes.extend(log_time_notes(times, os.fspath(path)))
        return values

    @property
    def values(self) -> np.ndarray:
        """The trials recorded so far (warm-up excluded), read-only."""
        view = self._values.view()
        view.flags.writeable = False
        return view  # type: ignore[no-any-return]

    @property
    def warmup_values(self) -> np.ndarray:
        """Warm-up trials: timed, kept for charts, left out of the statistics."""
        view = self._warmup.view()
        view.flags.writeable = False
        return view  # type: ignore[no-any-return]

    # -- analysing and checking -------------------------------------------------------------

    def interval(
        self, confidence: float | None = None, side: str = "two-sided", method: str | None = None
    ) -> Interval:
        """The confidence interval of the mean of the trials so far."""
        settings = self.settings.merged(confidence=confidence, method=method)
        return mean_interval(self._values, settings.confidence, side, settings.method)

    def check(
        self,
        low: Edge = None,
        high: Edge = None,
        *,
        center: Edge = None,
        tolerance: Tolerance = None,
        confidence: float | None = None,
        method: str | None = None,
        instrument_uncertainty: InstrumentSpec = None,
        rule: str | DecisionRule = GUARDED,
        process: ProcessPrior | tuple[float, float] | None = None,
    ) -> Decision:
        """Pass only if the interval of the mean lies inside the band; raise BandViolation if not.

        Two edges: the two-sided interval must lie inside. One edge (a budget): the one-sided
        bound must lie on the right side of it. ``tolerance=(below, above)`` is asymmetric.
        ``instrument_uncertainty`` (standard uncertainty in the trials' unit, or ``(u, df)``)
        widens the interval to mean +/- U (JCGM 100); ``rule="simple"`` compares the mean alone.
        """
        settings = self.settings.merged(confidence=confidence, method=method)
        extra: dict[str, Any] = {}
        if self._sequential is not None:
            if instrument_uncertainty is not None or rule != GUARDED or process is not None:
                raise TrialError(
                    f"instrument_uncertainty= and rule= cannot be used with "
                    f"n={self._sequential.mode!r}: its verdict uses the sequential boundaries; "
                    "collect a fixed n for this check"
                )
            decision, notes, extra = self._sequential.check(
                low, high, center, tolerance, held=self._values.size, unit=self.unit,
                settings=settings,
            )
            notes = self._timing_notes + notes
            recorded = {**settings.to_dict(), "n": self._sequential.mode}
        elif self._adaptive is not None:
            if instrument_uncertainty is not None or rule != GUARDED or process is not None:
                raise TrialError(
                    "instrument_uncertainty= and rule= cannot be used with n='auto': the "
                    "two-stage verdict uses Stein's interval; collect a fixed n for this check"
                )
            decision, notes, extra = self._adaptive.check(
                low, high, center, tolerance, held=self._values.size, unit=self.unit,
                settings=settings,
            )
            notes = self._timing_notes + notes
            recorded = {**settings.to_dict(), "n": "auto"}
        else:
            band = make_band(low, high, center=center, tolerance=tolerance, unit=self.unit)
            chosen = self._timing_method(method)
            fallback = None if chosen is None else chosen[1]
            if chosen is not None:
                settings = settings.merged(method=chosen[0])
            decision, notes = decide_with_notes(
                self._values, band, settings.to_dict(),
                instrument_uncertainty=instrument_uncertainty, rule=rule, process=process,
                skip={note["code"] for note in self._timing_notes},
            )
            notes = self._timing_notes + ([fallback] if fallback else []) + notes
            recorded = settings.to_dict()
        notes = drop_immaterial_drift(notes, decision)
        repeated = self._repeats(recorded, decision)
        if repeated:
            notes = [*notes, {
                "code": "repeated-check",
                "text": f"the same {self._values.size} trials were already checked against this "
                        f"band with these settings (check {repeated} of this series): this row "
                        "repeats it; drop one of the checks",
            }]
        row = self._row(recorded, decision, notes, **extra)
        self._rows.append(row)
        overdue = [note for note in notes if note["code"] == "calibration-overdue"]
        if overdue and settings.overdue_calibration == "fail":
            raise TrialError(
                f"{overdue[0]['text']} (overdue_calibration='fail'; the check is recorded)"
            )
        if not decision.passed:
            raise BandViolation(describe(decision, label=self._label(), notes=notes), decision)
        return decision

    def _timing_method(self, method: str | None) -> tuple[str, dict[str, str]] | None:
        """The method (and its note) of timings whose method nobody set: batch means when lag-1
        r is in doubt, bootstrap-t from 20 timings (``record.check.timing_method``)."""
        if method is not None or self.method_chosen:
            return None
        return timing_method(self._values, source=self.source, unit=self.unit)

    def _repeats(self, settings: dict[str, Any], decision: Decision) -> int:
        """The 1-based number of an earlier check of this series on the same trials, band and
        settings (0 when there is none)."""
        band = decision.band.to_dict()
        for number, row in enumerate(self._rows, start=1):
            earlier: dict[str, Any] = dict(row.get("decision") or {})
            if (earlier.get("band") == band and row.get("settings") == settings
                    and (earlier.get("interval") or {}).get("n") == decision.interval.n):
                return number
        return 0

    # -- reporting --------------------------------------------------------------------------

    def rows(self) -> list[ResultRow]:
        """The rows for the summary: one per check, or one "unchecked" row for lone trials."""
        if self._rows:
            return list(self._rows)
        if self._values.size:
            return [self._row(self.settings.to_dict(), None, list(self._timing_notes))]
        return []

    def _row(
        self, settings: dict[str, Any], decision: Decision | None, notes: list[dict[str, str]],
        **extra: Any,
    ) -> ResultRow:
        if self._instrument is not None:
            extra = {**extra, "instrument": self._instrument}
        if self._times is not None and len(self._times) == self._values.size:
            extra = {**extra, "times": self._times}
        return build_row(
            nodeid=self.nodeid, series=self.name, unit=self.unit, source=self.source,
            values=self._values, warmup=self._warmup, decision=decision, notes=notes,
            settings=settings, timing=self._timing, **extra,
        )

    def _progress(self, verb: str) -> Any:
        """This series' progress reporter (None where no line is wanted)."""
        return self._test_timing.progress(
            f"{self.nodeid}{f' [{self.name}]' if self.name else ''}", verb)

    def _label(self) -> str:
        return self.name

    def _claim(self, unit: str | None, source: str) -> None:
        """Keep one unit per series: mixing seconds with volts would make a meaningless mean."""
        if not self._values.size:
            self.unit, self.source = unit, source
        elif unit is not None and unit != self.unit:
            raise TrialError(
                f"series {self.name or '(default)'} holds trials in {self.unit or 'no unit'}; "
                f"cannot add trials in {unit}. Use trials.series('other') for another quantity"
            )

    def _append(self, values: np.ndarray) -> None:
        self._values = np.concatenate([self._values, values])


class Recorder(Series):
    """The ``trials`` fixture: the default series, plus named ones from :meth:`series`."""

    def __init__(
        self, settings: Settings, nodeid: str = "", *,
        series_settings: dict[str, Settings] | None = None, other_series: Settings | None = None,
        timing: Any = None, earlier: dict[str, sequential.Earlier] | None = None,
    ) -> None:
        super().__init__("", settings, nodeid)
        self._earlier = dict(earlier or {})
        self.earlier = self._earlier.get("")
        self._test_timing = SharedTiming(timing)
        self._series: dict[str, Series] = {}
        self._comparisons: list[ResultRow] = []
        # A plan may give named series counts of their own; unplanned series use other_series.
        self._series_settings = dict(series_settings or {})
        self._other_series = settings if other_series is None else other_series

    def series(self, name: str) -> Series:
        """The series called ``name`` (created on first use), e.g. ``trials.series("cold")``."""
        if not isinstance(name, str) or not name:
            raise TrialError(f"a series needs a non-empty name, got {name!r}")
        if name not in self._series:
            settings = self._series_settings.get(name, self._other_series)
            self._series[name] = Series(name, settings, self.nodeid)
            self._series[name]._test_timing = self._test_timing
            self._series[name].earlier = self._earlier.get(name)
            self._series[name].method_chosen = self.method_chosen
        return self._series[name]

    def compare(
        self,
        new: Callable[..., Any],
        old: Callable[..., Any],
        *args: Any,
        at_most: float | None = None,
        at_least: float | None = None,
        n: int | None = None,
        confidence: float | None = None,
        repeats: int = 5,
        warmup: int = 2,
        seed: int | None = None,
        name: str | None = None,
        setup: Callable[[], Any] | None = None,
        **kwargs: Any,
    ) -> Any:
        """Time ``new(*args, **kwargs)`` and ``old(*args, **kwargs)`` in interleaved pairs
        (random order within each pair) and pass only if the interval of the time ratio new/old
        lies inside the limits, e.g. ``trials.compare(parse_v2, parse_v1, LINE, at_most=1.05)``:
        "v2 is at most 5% slower on LINE". ``setup`` runs before every call, outside the timed
        region, and a value it returns (not None) is passed as the first argument, as in
        :meth:`time`. The row is named ``new / old`` from the callables; a lambda has no name,
        so give ``name=``.

        Drift of the machine hits both sides of a pair alike and cancels in the ratio, which
        makes this the robust gate on a noisy CI machine (see ``meanband.collect.paired``).
        """
        from meanband.record.comparison import compare_callables

        settings = self.settings.merged(n=n, confidence=confidence)
        result, row, message = compare_callables(
            new, old, n=settings.n, at_most=at_most, at_least=at_least,
            confidence=settings.confidence, power=settings.power, repeats=repeats, warmup=warmup,
            seed=seed, clock=settings.clock, args=args, kwargs=kwargs, setup=setup,
            name=name, nodeid=self.nodeid, settings=settings.to_dict(),
        )
        self._comparisons.append(row)
        if not result.passed:
            raise BandViolation(message, result)
        return result

    def all_rows(self) -> list[ResultRow]:
        """Rows of the default series and every named series, in creation order."""
        rows = self.rows()
        for named in self._series.values():
            rows.extend(named.rows())
        rows.extend(self._comparisons)
        return rows


class SharedTiming:
    """What the series of one test share when timing: the session's clock measurements and
    worker identity (a ``timing_plugin.TimingSession``, or None outside pytest) and the time
    spent so far against the per-test time limit."""

    def __init__(self, session: Any = None) -> None:
        self.session = session
        self.spent = 0.0

    def clock_info(self, clock: Any) -> Any:
        return None if self.session is None else self.session.clock_info(clock)

    @property
    def environ(self) -> dict[str, str] | None:
        return None if self.session is None else self.session.environ

    def progress(self, label: str, verb: str = "timed") -> Any:
        """Where a long run of ``label`` reports its progress (None: nowhere)."""
        return None if self.session is None else self.session.progress(label, verb)

    def time_left(self, limit: float | None) -> float | None:
        """Seconds left of ``limit``; once spent, a sliver, so the engine takes its minimum."""
        return None if limit is None else max(limit - self.spent, 1e-9)


def _callable_name(fn: Callable[..., Any]) -> str:
    return getattr(fn, "__qualname__", None) or repr(fn)


def _refuse_block(block: int | None) -> None:
    if block is not None:
        raise TrialError("block= goes with n='until-decided' only; drop it or pass that n")
