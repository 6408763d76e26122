"""Does the report pipeline grow linearly? Write, merge and print 500 and 5,000 checks.

Each check carries 1,000 trials. For each size the script times, in one process:
writing the JSON report of two shards, merging them into one file, and loading that file
to print the terminal summary. It prints the ratio of the time for 5,000 checks to ten
times the time for 500: 1.0 is perfectly linear; the target is at most 1.2.

Scenario (invented): a route-planning service's endpoint latencies, each checked against a
budget, split over two CI machines.

    .venv/bin/python benchmarks/bench_report.py [--small 500] [--trials 1000] [--repeat 3]
"""

from __future__ import annotations

import argparse
import io
import statistics
import sys
import tempfile
import time
from pathlib import Path

import numpy as np
from meanband.report.merge import merge_reports
from meanband.report.terminal import format_summary
from meanband.stats.bands import make_band
from meanband.stats.decision import decide
from meanband.stats.notes import assumption_notes
from meanband.store import report_json

TEMPLATES = 40  # distinct decisions; rows reuse them with their own trials


def make_rows(count: int, trials: int, seed: int) -> list[dict]:
    """``count`` rows with distinct node ids and trials, in the recorded row shape."""
    rng = np.random.default_rng(seed)
    budget = make_band(high="2ms", unit="s")
    templates = []
    for i in range(TEMPLATES):
        values = rng.normal(1.2e-3 + 2e-5 * i, 2e-4, trials)
        decision = decide(values, budget)
        templates.append((decision.to_dict(), assumption_notes(decision.diagnostics)))
    values = rng.normal(1.3e-3, 2e-4, (count, trials))
    warmup = rng.normal(2.2e-3, 3e-4, (count, 3))
    rows = []
    for i in range(count):
        decision, notes = templates[i % TEMPLATES]
        rows.append({
            "nodeid": f"tests/test_routes.py::test_endpoint_latency[route-{i:05d}]",
            "series": "",
            "kind": "check",
            "unit": "s",
            "source": "time",
            "values": values[i].tolist(),
            "warmup": warmup[i].tolist(),
            "decision": decision,
            "notes": notes,
            "settings": {"confidence": 0.95, "method": "t", "n": trials, "min_n": 10},
            "timing": None,
        })
    return rows


def pipeline(rows: list[dict], directory: Path) -> tuple[float, float]:
    """Wall-clock and CPU seconds to write two shard reports, merge them, print the summary."""
    environment = report_json.environment()
    configuration = {"args": [], "options": {}}
    half = len(rows) // 2
    start, cpu = time.perf_counter(), time.process_time()
    shards = []
    for index, part in enumerate((rows[:half], rows[half:])):
        report = report_json.build_report(part, environment=environment,
                                          configuration=configuration)
        shards.append(report_json.write_report(report, directory / f"shard-{index}.json"))
    loaded = [(str(path), report_json.load_report(path)) for path in shards]
    merged = report_json.write_report(merge_reports(loaded), directory / "all.json")
    lines = format_summary(report_json.load_report(merged)["rows"], 0)
    print("\n".join(lines), file=io.StringIO())
    return time.perf_counter() - start, time.process_time() - cpu


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--small", type=int, default=500, help="checks in the small run")
    parser.add_argument("--trials", type=int, default=1000, help="trials per check")
    parser.add_argument("--repeat", type=int, default=3, help="timed repeats of each size")
    args = parser.parse_args(argv)
    large = 10 * args.small
    small_rows = make_rows(args.small, args.trials, seed=1)
    large_rows = make_rows(large, args.trials, seed=2)
    with tempfile.TemporaryDirectory() as tmp:
        directory = Path(tmp)
        pipeline(small_rows, directory)  # warm the imports and caches
        small = [pipeline(small_rows, directory) for _ in range(args.repeat)]
        big = [pipeline(large_rows, directory) for _ in range(args.repeat)]
    print(f"report pipeline (write 2 shards, merge, load and print the summary), "
          f"{args.trials} trials per check, median of {args.repeat} runs per size")
    ratios = {}
    for label, column in (("cpu", 1), ("wall-clock", 0)):
        small_time = statistics.median(t[column] for t in small)
        large_time = statistics.median(t[column] for t in big)
        ratios[label] = large_time / (10 * small_time)
        print(f"  {label:>10}: time({large}) / (10 x time({args.small})) = "
              f"{ratios[label]:.3f}  (target <= 1.2)")
    print("  (CPU time is the figure of merit: wall-clock also counts other work on the machine)")
    ratio = ratios["cpu"]
    return 0 if ratio <= 1.2 else 1


if __name__ == "__main__":
    sys.exit(main())
