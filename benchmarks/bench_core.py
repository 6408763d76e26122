"""Speed of the statistics core against plain numpy on the same trials, as a ratio.

Builds 1,000,000 seeded trials (an invented scenario: per-call latencies of a message broker
around 2 ms, log-normal) and times, in the same run and on the same array:

- meanband: ``mean_interval(x)`` followed by ``diagnose(x)`` (interval, normality, lag-1 r,
  skewness);
- baseline: ``numpy.mean(x)`` followed by ``numpy.std(x, ddof=1)``.

Each is timed with ``time.perf_counter``, in interleaved rounds, and the best of the rounds is
kept, so a noisy machine inflates neither side. The printed ratio (meanband / baseline) is the
figure to watch; absolute times depend on the machine and are shown only for context. On a
machine busy with other work the combined call, being the longest, is the one most often cut by
the scheduler; the ratio of the separately timed parts is printed beside it for that reason.

Run: ``.venv/bin/python benchmarks/bench_core.py [--n N] [--repeats R]``
"""

from __future__ import annotations

import argparse
import math
import time
from collections.abc import Callable

import meanband
import numpy as np


def best_of(fn: Callable[[], object], repeats: int) -> float:
    """Smallest wall time of ``repeats`` calls to ``fn``, in seconds."""
    best = math.inf
    for _ in range(repeats):
        start = time.perf_counter()
        fn()
        best = min(best, time.perf_counter() - start)
    return best


def build_trials(n: int, seed: int = 20261201) -> np.ndarray:
    """Seeded latencies in seconds: log-normal around 2 ms with a 10% spread."""
    rng = np.random.default_rng(seed)
    return rng.lognormal(mean=math.log(2e-3), sigma=0.1, size=n)


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--n", type=int, default=1_000_000, help="Number of trials (default 1e6)")
    parser.add_argument(
        "--repeats", type=int, default=30, help="Timed rounds, best kept (default 30)"
    )
    args = parser.parse_args(argv)
    if args.n < 2 or args.repeats < 1:
        parser.error("--n must be at least 2 and --repeats at least 1")

    x = build_trials(args.n)

    def core() -> tuple[meanband.Interval, meanband.Diagnostics]:
        return meanband.mean_interval(x), meanband.diagnose(x)

    def baseline() -> tuple[float, float]:
        return float(np.mean(x)), float(np.std(x, ddof=1))

    # One untimed call each: scipy's import and numpy's first-touch costs are not the subject.
    interval, diagnostics = core()
    mean, sd = baseline()
    # The comparison is only fair if both sides compute the same numbers.
    if not (math.isclose(interval.mean, mean, rel_tol=1e-12)
            and math.isclose(interval.sd, sd, rel_tol=1e-9)):
        raise SystemExit(
            f"mismatch: meanband {interval.mean!r}, {interval.sd!r}; numpy {mean!r}, {sd!r}"
        )

    # Interleaved: each round times every candidate once, so a burst of load elsewhere on the
    # machine hits all of them alike; the best of the rounds is kept for each.
    candidates = {
        "baseline": baseline,
        "interval": lambda: meanband.mean_interval(x),
        "diagnose": lambda: meanband.diagnose(x),
        "core": core,
    }
    best = dict.fromkeys(candidates, math.inf)
    for _ in range(args.repeats):
        for name, fn in candidates.items():
            best[name] = min(best[name], best_of(fn, 1))
    t_base, t_interval, t_diagnose, t_core = (best[k] for k in candidates)

    print(f"trials: {args.n:,} (seeded), best of {args.repeats} repeats, same run, same array")
    print(f"normality test used: {diagnostics.normality.method}")
    print(f"baseline  numpy.mean + numpy.std(ddof=1)   {t_base * 1e3:9.3f} ms   1.00x")
    print(f"meanband  mean_interval                    {t_interval * 1e3:9.3f} ms "
          f"{t_interval / t_base:6.2f}x")
    print(f"meanband  diagnose                         {t_diagnose * 1e3:9.3f} ms "
          f"{t_diagnose / t_base:6.2f}x")
    print(f"meanband  mean_interval + diagnose         {t_core * 1e3:9.3f} ms "
          f"{t_core / t_base:6.2f}x")
    print(f"ratio (mean_interval + diagnose) / baseline: {t_core / t_base:.2f} "
          f"(from the separately timed parts: {(t_interval + t_diagnose) / t_base:.2f})")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
