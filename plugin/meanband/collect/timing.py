"""The timing engine: calibrated, warmed-up, GC-quiet trials of a callable, in seconds per call."""

from __future__ import annotations

import contextlib
import functools
import gc
import inspect
import math
import os
from array import array
from collections.abc import Callable, Iterator, Mapping, Sequence
from dataclasses import dataclass
from itertools import repeat
from typing import Any

import numpy as np

from meanband.collect.clock import Clock, ClockInfo, get_clock, measure
from meanband.errors import TrialError, hide_plugin_frames
from meanband.stats.diagnostics import DriftTest, drift_test
from meanband.stats.sample import ArrayEquality
from meanband.units import SECONDS, format_value, parse_duration

__all__ = [
    "DEFAULT_MIN_TRIAL_TIME",
    "PROGRESS_AFTER",
    "PROGRESS_EVERY",
    "Note",
    "Progress",
    "SetupRunner",
    "Timing",
    "bind_call",
    "calibrate",
    "default_min_trial_time",
    "parse_warmup",
    "quiet_gc",
    "time_calls",
    "trial_ns",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

#: A clock read: integer nanoseconds from a fixed origin.
Reader = Callable[[], int]

#: Floor of the automatic minimum trial time (seconds).
DEFAULT_MIN_TRIAL_TIME = 1e-3
#: The automatic minimum trial time is also at least this many clock reads and clock steps, so
#: the read around a trial and the clock's step are each at most 0.1% of the trial ...
_TRIAL_OVER_CLOCK = 1000
#: ... but never more than this (seconds): a very coarse clock gets a note instead of trials
#: that each last seconds.
MAX_AUTOMATIC_MIN_TRIAL_TIME = 0.1
#: Most calls one trial may make; calibration stops here even if the trial is still short.
MAX_LOOPS = 1 << 26
#: Calibration grows k at most tenfold per step: an early trial includes first-call costs.
_MAX_GROWTH = 10
#: Aim this much past the minimum trial time, so jitter does not leave the next trial short.
_OVERSHOOT = 1.1
#: Level of the drift test. Low, because the note is raised for every timed series.
DRIFT_ALPHA = 0.01
#: Fewest trials the drift test looks at; most points it tests (longer runs become block means).
DRIFT_MIN_N = 8
DRIFT_MAX_POINTS = 2000
#: Note thresholds: a clock step above 1% of the trial, a read above 1% of a one-call trial.
COARSE_STEP_SHARE = 0.01
READ_COST_SHARE = 0.01


@dataclass(frozen=True, slots=True)
class Note:
    """A remark on how trustworthy the trials are; ``code`` is stable, ``text`` is for people."""

    code: str
    text: str

    def to_dict(self) -> dict[str, str]:
        """The row form of a note."""
        return {"code": self.code, "text": self.text}


@dataclass(frozen=True, eq=False)
class Timing(ArrayEquality):
    """The trials of one timing call and how they were taken."""

    #: Seconds per call, one value per kept trial, in the order taken.
    values: np.ndarray
    #: Seconds per call of the warm-up trials (discarded from the statistics).
    warmup: np.ndarray
    #: Calls per trial (k).
    loops: int
    clock: ClockInfo
    min_trial_time: float
    requested: int
    stopped_early: bool
    time_limit: float | None
    gc_enabled: bool
    setup: bool
    #: (k, seconds per call) of each calibration trial.
    calibration: tuple[tuple[int, float], ...]
    #: Clock time of the whole call: calibration, warm-up, trials and bookkeeping (seconds).
    elapsed: float
    drift: DriftTest | None
    notes: tuple[Note, ...]

    @property
    def trials(self) -> int:
        """Number of kept trials."""
        return int(self.values.size)

    def to_dict(self) -> dict[str, Any]:
        """The row's ``"timing"`` entry: builtin types only."""
        return {
            "clock": self.clock.clock,
            "source": self.clock.source,
            "resolution_ns": float(self.clock.resolution_ns),
            "read_cost_ns": float(self.clock.read_cost_ns),
            "k": int(self.loops),
            "min_trial_time": float(self.min_trial_time),
            "trials": self.trials,
            "requested": int(self.requested),
            "warmup_trials": int(self.warmup.size),
            "stopped_early": bool(self.stopped_early),
            "time_limit": None if self.time_limit is None else float(self.time_limit),
            "gc_enabled": bool(self.gc_enabled),
            "setup": bool(self.setup),
            "calibration": [[int(k), float(s)] for k, s in self.calibration],
            "elapsed": float(self.elapsed),
            "drift": None if self.drift is None else self.drift.to_dict(),
        }


def default_min_trial_time(info: ClockInfo) -> float:
    """1 ms, or 1000 clock reads or clock steps if that is longer, up to 0.1 s (seconds)."""
    wanted = max(
        DEFAULT_MIN_TRIAL_TIME,
        _TRIAL_OVER_CLOCK * info.read_cost_ns * 1e-9,
        _TRIAL_OVER_CLOCK * info.resolution_ns * 1e-9,
    )
    return min(wanted, MAX_AUTOMATIC_MIN_TRIAL_TIME)


def parse_warmup(value: int | str | None) -> tuple[int, float]:
    """(trials, seconds) of warm-up from ``5``, ``"5"`` or a duration such as ``"200ms"``."""
    if value is None:
        return 0, 0.0
    if isinstance(value, bool) or not isinstance(value, (int, str)):
        raise TrialError(
            f"warmup={value!r} is neither a trial count nor a duration; write warmup=5 for five "
            "trials or warmup='200ms' for as many trials as fit in 200 ms"
        )
    if isinstance(value, str) and value.strip().isdigit():
        value = int(value.strip())
    if isinstance(value, int):
        if value < 0:
            raise TrialError(f"warmup={value} is negative; use 0 for no warm-up")
        return value, 0.0
    try:
        seconds = parse_duration(value)
    except TrialError as error:
        raise TrialError(f"warmup={value!r}: {error}") from None
    if seconds < 0:
        raise TrialError(f"warmup={value!r} is negative; use '0ms' for no warm-up")
    return 0, seconds


def time_calls(
    fn: Callable[..., Any],
    args: Sequence[Any] = (),
    kwargs: Mapping[str, Any] | None = None,
    *,
    n: int,
    warmup: int | str | None = 0,
    setup: Callable[[], Any] | None = None,
    clock: str | Clock = "wall",
    clock_info: ClockInfo | None = None,
    min_trial_time: float | None = None,
    time_limit: float | None = None,
    gc_enabled: bool = False,
    loops: int | None = None,
    min_trials: int = 2,
    drift_alpha: float = DRIFT_ALPHA,
    environ: Mapping[str, str] | None = None,
    progress: Progress | None = None,
) -> Timing:
    """Time ``fn(*args, **kwargs)`` in ``n`` trials of k calls each; values are seconds per call.

    - calibration: k grows (at most tenfold per step) until one trial lasts ``min_trial_time``
      (default :func:`default_min_trial_time`), so the clock's read cost and step are small
      against the trial; ``loops`` fixes k and skips calibration;
    - warm-up: ``warmup`` trials (an int) or trials for a duration (``"200ms"``), at the
      calibrated k, kept apart from the values;
    - ``setup``: called once per call, outside the timed region, for all k calls of a trial
      before its clock starts; a value it returns is passed to ``fn`` as the first argument (so
      work that consumes its input gets a fresh one every call), ``None`` passes nothing;
    - garbage collection: the young generations are collected before the trials and the
      collector is disabled during calibration, warm-up and trials unless ``gc_enabled``; its
      state is restored even when ``fn`` or ``setup`` raises;
    - ``time_limit`` (seconds, for the whole call): once passed, trials stop, but never before
      ``min_trials`` have been kept;
    - notes: xdist worker (from ``environ``, default ``os.environ``), drift (Mann-Kendall),
      coarse clock, one call per trial with a trial near the read cost, stopped early;
    - ``progress(done, wanted, seconds)`` is called between trials about every
      ``PROGRESS_EVERY`` seconds once a run has lasted ``PROGRESS_AFTER``, and once at its end
      if it was called before: a long run is not silent. Without it the trials run in one loop.
    """
    if not callable(fn):
        raise TrialError(f"time() needs a callable, got {fn!r}; pass the function, not its result")
    if inspect.iscoroutinefunction(fn):
        raise TrialError(
            f"{getattr(fn, '__qualname__', fn)!r} is a coroutine function: calling it only makes "
            "a coroutine and does none of the work; time a plain function that runs it, e.g. "
            "lambda: loop.run_until_complete(fn())"
        )
    if setup is not None and not callable(setup):
        raise TrialError(f"setup={setup!r} is not callable; pass a function that returns the input")
    n = _count("n", n, minimum=1)
    min_trials = min(_count("min_trials", min_trials, minimum=1), n)
    warm_count, warm_seconds = parse_warmup(warmup)
    if loops is not None:
        loops = _count("loops", loops, minimum=1)
    if min_trial_time is not None and not (math.isfinite(min_trial_time) and min_trial_time >= 0):
        raise TrialError(
            f"min_trial_time={min_trial_time!r} must be a finite number of seconds >= 0"
        )
    if time_limit is not None and not (math.isfinite(time_limit) and time_limit > 0):
        raise TrialError(
            f"time_limit={time_limit!r} must be a positive number of seconds; omit it for no limit"
        )
    the_clock = get_clock(clock)
    info = clock_info if clock_info is not None else measure(the_clock)
    if min_trial_time is None:
        min_trial_time = default_min_trial_time(info)
    read = the_clock.read
    bound = _bind(fn, args, kwargs)
    runner = SetupRunner(fn, tuple(args), dict(kwargs or {}), setup) if setup else None

    start = read()
    deadline = None if time_limit is None else start + int(time_limit * 1e9)
    with quiet_gc(gc_enabled):
        if loops is None:
            k, calibration = _calibrate(bound, runner, read, min_trial_time * 1e9, deadline)
        else:
            k, calibration = loops, []
        warm = _warm_up(bound, runner, k, read, warm_count, warm_seconds, deadline)
        out = _durations(n)

        def run(first: int, stop: int) -> int:
            if runner is not None:
                return runner.run(k, out, first, stop, read, deadline, min_trials)
            sure = min(max(min_trials - first, 0), stop - first)  # kept whatever the limit
            reached = _run(bound, k, out, first, first + sure, read, None)
            if reached < stop and (deadline is None or read() <= deadline):
                reached = _run(bound, k, out, reached, stop, read, deadline)
            return reached

        taken = run(0, n) if progress is None else _reporting(run, n, read, start, progress)

    per_call = 1e-9 / k
    values = np.frombuffer(out, dtype=np.int64, count=taken) * per_call
    warm_values = np.asarray(warm, dtype=np.float64) * per_call
    drift = _drift(values)
    stopped_early = taken < n or (deadline is not None and len(warm) < warm_count)
    notes = _notes(
        values=values,
        warm_count=len(warm),
        warm_wanted=warm_count,
        k=k,
        calibrated=loops is None,
        info=info,
        min_trial_time=min_trial_time,
        requested=n,
        stopped_early=stopped_early,
        time_limit=time_limit,
        drift=drift,
        drift_alpha=drift_alpha,
        environ=os.environ if environ is None else environ,
    )
    return Timing(
        values=values,
        warmup=warm_values,
        loops=k,
        clock=info,
        min_trial_time=float(min_trial_time),
        requested=n,
        stopped_early=stopped_early,
        time_limit=time_limit,
        gc_enabled=gc_enabled,
        setup=setup is not None,
        calibration=tuple((ck, ns * 1e-9 / ck) for ck, ns in calibration),
        elapsed=(read() - start) * 1e-9,
        drift=drift,
        notes=tuple(notes),
    )


# --- the timed loops -------------------------------------------------------------------------


@contextlib.contextmanager
def quiet_gc(keep_enabled: bool = False) -> Iterator[None]:
    """Garbage collection off while trials run (unless ``keep_enabled``), restored afterwards
    even when the timed code raises.

    The young generations are collected first: they hold what the test just made. A full pass
    costs tens of milliseconds in a process with scipy loaded and frees little more.
    """
    was_enabled = gc.isenabled()
    if not keep_enabled:
        gc.collect(1)
        gc.disable()
    try:
        yield
    finally:
        if was_enabled and not gc.isenabled():
            gc.enable()


def trial_ns(
    call: Callable[[], Any], k: int, read: Callable[[], int], runner: SetupRunner | None = None
) -> int:
    """Nanoseconds of one trial: ``k`` calls of ``call`` between two clock reads (with a
    ``runner``, its setup runs for each call before the clock starts)."""
    return _one(call, runner, k, read)


def calibrate(
    call: Callable[[], Any], read: Callable[[], int], target_ns: float, *,
    max_loops: int = MAX_LOOPS, runner: SetupRunner | None = None,
) -> int:
    """Calls per trial so that a trial of ``call`` lasts at least ``target_ns``, at most
    ``max_loops`` (default ``MAX_LOOPS``; the engine's own calibration, see :func:`time_calls`)."""
    return _calibrate(call, runner, read, target_ns, None, max_loops)[0]


def bind_call(
    fn: Callable[..., Any], args: Sequence[Any] = (), kwargs: Mapping[str, Any] | None = None,
    setup: Callable[[], Any] | None = None,
) -> tuple[Callable[[], Any], SetupRunner | None]:
    """``fn`` bound to its arguments, and the runner of its per-call ``setup`` (None without),
    as :func:`trial_ns` and :func:`calibrate` take them."""
    if setup is not None and not callable(setup):
        raise TrialError(f"setup={setup!r} is not callable; pass a function that returns the input")
    runner = SetupRunner(fn, tuple(args), dict(kwargs or {}), setup) if setup else None
    return _bind(fn, args, kwargs), runner


def _bind(
    fn: Callable[..., Any], args: Sequence[Any], kwargs: Mapping[str, Any] | None
) -> Callable[[], Any]:
    if not args and not kwargs:
        return fn
    return functools.partial(fn, *args, **(kwargs or {}))


def _run(
    call: Callable[[], Any], k: int, out: array[int], first: int, stop: int, read: Reader,
    deadline: int | None,
) -> int:
    """Fill ``out[first:stop]`` with trial durations (ns); return the index after the last one.

    Kept as lean as a bare loop of two clock reads around the call: locals only, results into a
    preallocated array, no objects kept per trial. After ``deadline`` (ns) it stops early.
    """
    if k == 1:
        if deadline is None:
            for i in range(first, stop):
                t0 = read()
                call()
                out[i] = read() - t0
            return stop
        for i in range(first, stop):
            t0 = read()
            call()
            t1 = read()
            out[i] = t1 - t0
            if t1 > deadline:
                return i + 1
        return stop
    for i in range(first, stop):
        t0 = read()
        for _ in repeat(None, k):
            call()
        t1 = read()
        out[i] = t1 - t0
        if deadline is not None and t1 > deadline:
            return i + 1
    return stop


def _drift(values: np.ndarray) -> DriftTest | None:
    """The core trend test (``diagnostics.drift_test``) on at most ``DRIFT_MAX_POINTS`` points.

    Long runs are tested on means of consecutive blocks: the cost stays fixed however many
    trials are taken (it must not grow the per-trial overhead), and block means keep the power
    against a trend while they average away the jitter of single trials.
    """
    n = values.size
    if n < DRIFT_MIN_N:
        return None
    points = values
    if n > DRIFT_MAX_POINTS:
        size = -(-n // DRIFT_MAX_POINTS)
        usable = (n // size) * size
        points = values[:usable].reshape(-1, size).mean(axis=1)
    return drift_test(points)


class SetupRunner:
    """Trials with a per-call setup, run before the trial's clock starts."""

    def __init__(
        self, fn: Callable[..., Any], args: tuple[Any, ...], kwargs: dict[str, Any],
        setup: Callable[[], Any],
    ) -> None:
        self.fn = fn
        self.args = args
        self.kwargs = kwargs
        self.setup = setup

    def prepare(self, k: int) -> tuple[list[Any], bool]:
        setup = self.setup
        inputs = [setup() for _ in repeat(None, k)]
        nones = inputs.count(None)
        if nones not in (0, k):
            raise TrialError(
                f"setup returned None for {nones} of {k} calls and a value for the others; "
                "return the input every time, or None every time"
            )
        return inputs, nones == 0

    def run(
        self, k: int, out: array[int], first: int, stop: int, read: Reader,
        deadline: int | None, min_trials: int = 0,
    ) -> int:
        fn, args, kwargs = self.fn, self.args, self.kwargs
        for i in range(first, stop):
            inputs, given = self.prepare(k)
            if given:
                if args or kwargs:
                    inputs = [(value, *args) for value in inputs]
                    t0 = read()
                    for packed in inputs:
                        fn(*packed, **kwargs)
                    t1 = read()
                else:
                    t0 = read()
                    for value in inputs:
                        fn(value)
                    t1 = read()
            else:
                t0 = read()
                for _ in inputs:
                    fn(*args, **kwargs)
                t1 = read()
            out[i] = t1 - t0
            if deadline is not None and t1 > deadline and i + 1 >= min_trials:
                return i + 1
        return stop


#: What reports a long run's progress: (trials done, trials wanted, seconds so far).
Progress = Callable[[int, int, float], None]
#: A run reports its progress once it has lasted this many seconds, then about this often.
PROGRESS_AFTER = 2.0
PROGRESS_EVERY = 2.0


def _reporting(
    run: Callable[[int, int], int], n: int, read: Reader, start: int, progress: Progress
) -> int:
    """``run`` over ``n`` trials in chunks of about a tenth of ``PROGRESS_EVERY``, calling
    ``progress`` between chunks when due (never inside a trial's timed region)."""
    done, chunk = 0, 1
    due = start + int(PROGRESS_AFTER * 1e9)
    reported = False
    while done < n:
        t0 = read()
        stop = min(n, done + chunk)
        reached = run(done, stop)
        now = read()
        per_trial = (now - t0) / max(reached - done, 1)
        done = reached
        if reached < stop:  # the time limit stopped it
            break
        chunk = max(1, min(n, int(PROGRESS_EVERY * 1e8 / max(per_trial, 1.0))))
        if now >= due and done < n:
            progress(done, n, (now - start) / 1e9)
            reported = True
            due = now + int(PROGRESS_EVERY * 1e9)
    if reported:
        progress(done, n, (read() - start) / 1e9)
    return done


def _durations(count: int) -> array[int]:
    """A preallocated array of signed 64-bit nanosecond counts: storing into it makes no object."""
    return array("q", bytes(8 * count))


def _one(call: Callable[[], Any], runner: SetupRunner | None, k: int, read: Reader) -> int:
    buffer = _durations(1)
    if runner is not None:
        runner.run(k, buffer, 0, 1, read, None)
    else:
        _run(call, k, buffer, 0, 1, read, None)
    return buffer[0]


def _calibrate(
    call: Callable[[], Any], runner: SetupRunner | None, read: Reader, target_ns: float,
    deadline: int | None, max_loops: int | None = None,
) -> tuple[int, list[tuple[int, int]]]:
    """Smallest k found (growing geometrically) whose trial lasts ``target_ns``.

    If an earlier step ran more than 10% faster per call (the last one was slowed by an
    interruption), k is raised so that a trial at that speed still lasts ``target_ns``.
    """
    if max_loops is None:
        max_loops = MAX_LOOPS
    k = 1
    history: list[tuple[int, int]] = []
    while True:
        elapsed = _one(call, runner, k, read)
        history.append((k, elapsed))
        if elapsed >= target_ns or k >= max_loops:
            earlier = min((ns / loops for loops, ns in history[:-1] if ns > 0), default=None)
            if earlier is not None and elapsed / k > _OVERSHOOT * earlier:
                k = max(k, min(math.ceil(_OVERSHOOT * target_ns / earlier), max_loops))
            return k, history
        if deadline is not None and read() > deadline:
            return k, history
        growth = _MAX_GROWTH if elapsed <= 0 else min(_OVERSHOOT * target_ns / elapsed, _MAX_GROWTH)
        k = min(max(math.ceil(k * growth), k + 1), max_loops)


def _warm_up(
    call: Callable[[], Any], runner: SetupRunner | None, k: int, read: Reader, count: int,
    seconds: float, deadline: int | None,
) -> list[int]:
    warm: list[int] = []
    if count:
        durations = _durations(count)
        if runner is not None:
            done = runner.run(k, durations, 0, count, read, deadline)
        else:
            done = _run(call, k, durations, 0, count, read, deadline)
        return durations[:done].tolist()
    if seconds > 0:
        until = read() + int(seconds * 1e9)
        while True:
            warm.append(_one(call, runner, k, read))
            now = read()
            if now >= until or (deadline is not None and now > deadline):
                break
    return warm


# --- notes -----------------------------------------------------------------------------------


def _notes(
    *,
    values: np.ndarray,
    warm_count: int,
    warm_wanted: int,
    k: int,
    calibrated: bool,
    info: ClockInfo,
    min_trial_time: float,
    requested: int,
    stopped_early: bool,
    time_limit: float | None,
    drift: DriftTest | None,
    drift_alpha: float,
    environ: Mapping[str, str],
) -> list[Note]:
    notes: list[Note] = []
    trial_ns = _median(values) * k * 1e9 if values.size else math.nan
    trial_text = format_value(trial_ns * 1e-9, SECONDS, 3)
    if stopped_early:
        limit = format_value(float(time_limit or 0.0), SECONDS, 3)
        warm = (
            f" (warm-up cut to {warm_count} of {warm_wanted} trials)"
            if warm_count < warm_wanted
            else ""
        )
        notes.append(
            Note(
                "time-limit",
                f"time limit {limit} reached: took {values.size} of {requested} trials{warm}; "
                "raise the limit or lower n for the full count",
            )
        )
    worker = environ.get("PYTEST_XDIST_WORKER")
    if worker:
        count = environ.get("PYTEST_XDIST_WORKER_COUNT", "several")
        notes.append(
            Note(
                "xdist-worker",
                f"timed inside xdist worker {worker} (of {count}): trials compete with the other "
                "workers for cores and caches, so times are longer and noisier than in a run "
                "without -n",
            )
        )
    if drift is not None and drift.rejects(drift_alpha):
        from meanband.stats.notes import drift_words

        direction = "upward (slowing)" if drift.statistic > 0 else "downward (speeding up)"
        notes.append(
            Note(
                "drift",
                f"trials trend {direction} across the run: {drift_words(drift, SECONDS)} "
                f"({drift.method} tau={drift.statistic:.2f}, p={drift.pvalue:.2g}): warm-up too "
                "short, a throttling CPU or a busy neighbour; the t interval assumes independent "
                "trials",
            )
        )
    if math.isfinite(trial_ns) and info.resolution_ns > COARSE_STEP_SHARE * trial_ns:
        notes.append(
            Note(
                "coarse-clock",
                f"the {info.clock} clock steps by "
                f"{format_value(info.resolution_ns * 1e-9, SECONDS, 3)}, more than "
                f"{COARSE_STEP_SHARE:.0%} of a trial ({trial_text}); raise the minimum trial "
                "time (--meanband-min-trial-time) so each trial spans many steps",
            )
        )
    if k == 1 and math.isfinite(trial_ns) and info.read_cost_ns > READ_COST_SHARE * trial_ns:
        remedy = (
            "raise the minimum trial time (--meanband-min-trial-time) so calibration runs "
            "several calls per trial"
            if calibrated
            else "let calibration choose k"
        )
        notes.append(
            Note(
                "read-cost",
                f"each trial makes one call and lasts {trial_text}, only "
                f"{trial_ns / max(info.read_cost_ns, 1e-9):.0f} times the clock's read cost "
                f"({format_value(info.read_cost_ns * 1e-9, SECONDS, 3)}), which inflates the "
                f"mean; {remedy}",
            )
        )
    if calibrated and k >= MAX_LOOPS and trial_ns < min_trial_time * 1e9:
        notes.append(
            Note(
                "loop-limit",
                f"calibration stopped at {MAX_LOOPS} calls per trial before a trial lasted "
                f"{format_value(min_trial_time, SECONDS, 3)}; the callable may do nothing",
            )
        )
    return notes


def _median(x: np.ndarray) -> float:
    """Median, of an evenly spaced subsample when there are many values: a median of trials is
    bookkeeping, and must not cost more per trial than the timed loop itself."""
    if x.size > DRIFT_MAX_POINTS:
        x = x[:: -(-x.size // DRIFT_MAX_POINTS)]
    return float(np.median(x))


def _count(name: str, value: Any, *, minimum: int) -> int:
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise TrialError(f"{name}={value!r} must be a whole number >= {minimum}")
    return int(value)


