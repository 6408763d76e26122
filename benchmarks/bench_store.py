"""Recording and baseline reading on both history backends, as a ratio to SQLite.

Records one run of 1,000 checks x 1,000 trials (8 MB of float64 trials) into a new SQLite file
and into a PostgreSQL database on a throwaway local server (started as in the tests, with the
server's default durability, fsync on), then reads it back as a baseline does (the newest run
with a label, and all its checks with their trials). Prints the median of the repeats for each
backend and its ratio to SQLite measured in the same process. No absolute time is a target:
the ratios are what to compare between machines.

Scenario (invented): a freight-quoting service's suite, each endpoint timed 1,000 times.

    .venv/bin/python benchmarks/bench_store.py [--checks 1000] [--trials 1000] [--repeat 3]
"""

from __future__ import annotations

import argparse
import statistics
import sys
import tempfile
import time
from collections.abc import Callable
from pathlib import Path
from typing import Any

import numpy as np
from meanband.store.history import HistoryStore

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "tests"))
from postgres_server import ServerUnavailable, running_server

ENV = {"commit": "5eed" * 10, "branch": "main", "dirty": False, "hostname": "bench",
       "machine": "x86_64", "cpu_count": 2, "platform": "Linux", "implementation": "CPython",
       "python": "3.11", "meanband": "0.1.0"}


def make_rows(checks: int, trials: int, seed: int) -> list[dict[str, Any]]:
    rng = np.random.default_rng(seed)
    rows = []
    for i in range(checks):
        values = rng.lognormal(np.log(250e-6), 0.2, trials)
        rows.append({
            "nodeid": f"test_quotes.py::test_endpoint[{i:04d}]", "series": "", "kind": "check",
            "unit": "s", "source": "time", "values": values.tolist(), "warmup": values[:3].tolist(),
            "decision": {"verdict": "PASS", "interval": {"mean": float(values.mean()),
                                                         "low": None, "high": 1e-3}},
            "notes": [], "settings": {"confidence": 0.95},
        })
    return rows


def timed(action: Callable[[], Any]) -> float:
    started = time.perf_counter()
    action()
    return time.perf_counter() - started


def measure(new_location: Callable[[int], str | Path], rows: list[dict[str, Any]],
            repeat: int) -> tuple[float, float]:
    record, read = [], []
    for i in range(repeat):
        location = new_location(i)
        with HistoryStore(location):  # creating the schema is not timed
            pass

        def record_once(location: str | Path = location) -> None:
            with HistoryStore(location) as store:
                store.record_run(rows, label="main", environment=ENV)

        def read_once(location: str | Path = location) -> None:
            with HistoryStore(location, create=False, read_only=True) as store:
                run = store.find_run("main")
                checks = store.checks(run.id)
            assert len(checks) == len(rows) and checks[0].values.size == len(rows[0]["values"])

        record.append(timed(record_once))
        read.append(timed(read_once))
    return statistics.median(record), statistics.median(read)


def main() -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--checks", type=int, default=1000)
    parser.add_argument("--trials", type=int, default=1000)
    parser.add_argument("--repeat", type=int, default=3)
    args = parser.parse_args()
    rows = make_rows(args.checks, args.trials, 20261203)
    print(f"one run of {args.checks} checks x {args.trials} trials; median of {args.repeat}")
    with tempfile.TemporaryDirectory() as folder:
        sqlite = measure(lambda i: Path(folder) / f"h{i}.sqlite", rows, args.repeat)
    results = {"SQLite file": sqlite}
    try:
        with running_server(durable=True) as server:
            results["PostgreSQL 127.0.0.1"] = measure(lambda i: server.new_database(), rows,
                                                      args.repeat)
    except ServerUnavailable as exc:
        print(f"PostgreSQL: not measured, no server could be started: {exc}")
    print(f"{'backend':<22} {'record (s)':>11} {'x SQLite':>9} {'read baseline (s)':>18} "
          f"{'x SQLite':>9}")
    for name, (record, read) in results.items():
        print(f"{name:<22} {record:>11.3f} {record / sqlite[0]:>9.2f} {read:>18.3f} "
              f"{read / sqlite[1]:>9.2f}")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
