"""Do baseline comparisons hold up on a noisy machine? False alarms on unchanged code, and the
detection of real slowdowns, with real timings taken by pytest runs of a 12-check suite.

Records BASELINE_RUNS runs of an invented ticket-office suite under the label 'main', then runs
the unchanged suite AA_RUNS times as main's CI would: each run is compared with the newest
BASELINE_RUNS runs of 'main' and then recorded there itself, so the baseline always holds runs
from recent, different moments of the machine. It counts the runs with any false "regressed"
(at the check or by the end-of-run step-down). Then it makes one check 10%, 20% and 30% slower
(more work per call) and counts how often that check is caught against the same rolling
baseline. The same unchanged runs are also judged as meanband did before baselines of several
runs (the newest run alone, Welch's interval of the trials, no run-to-run term, no suite-level
adjustment), for contrast.

Run: .venv/bin/python studies/regression_noise.py [aa_runs] [slow_runs] [baseline_runs]
(defaults 20, 10, 3: about five minutes on a 2-core machine).

``.venv/bin/python studies/regression_noise.py probe [runs]`` instead asks whether the run-to-run
movement is the machine's speed: it runs the unchanged suite ``runs`` times (default 5), times a
fixed pure-Python reference loop right after each check in the same process, and prints each
check's spread of run means before and after dividing by the reference.
"""

from __future__ import annotations

import json
import os
import subprocess
import sys
import tempfile
import textwrap
import time
from pathlib import Path

import numpy as np
from meanband.stats.regression import REGRESSED, compare_samples
from meanband.store.history import HistoryStore
from scipy import stats

_NUMBERS = [a for a in sys.argv[1:] if a.isdigit()]
AA_RUNS = int(_NUMBERS[0]) if _NUMBERS else 20
SLOW_RUNS = int(_NUMBERS[1]) if len(_NUMBERS) > 1 else 10
BASELINE_RUNS = int(_NUMBERS[2]) if len(_NUMBERS) > 2 else 3
SLOWED = "test_office.py::test_fare_table"

SUITE = '''
import os
import pytest

SLOW = float(os.environ.get("TICKET_SLOWDOWN", "1"))


def fare_table(size):
    return sum(i * i % 7 for i in range(size))


def sort_queue(size):
    return sorted((i * 7919) % size for i in range(size))


def seat_map(size):
    return {i: str(i) for i in range(size)}


def receipt(size):
    return ",".join(str(i) for i in range(size))


def refunds(size):
    out = []
    for i in range(size):
        out.append(i // 3)
    return out


def zones(size):
    return len({i % 97 for i in range(size)} | {i % 89 for i in range(size)})


def timetable(size):
    return [divmod(i, 60) for i in range(size)]


def discounts(size):
    return sum(0.9 ** (i % 30) for i in range(size))


def lookup(size):
    table = {i: i for i in range(64)}
    return sum(table[i % 64] for i in range(size))


def barcode(size):
    return sum(int(c) for c in str(10 ** (size // 50) - 1))


def route_names(size):
    return "".join(chr(65 + i % 26) for i in range(size)).lower()


def vouchers(size):
    return any(i < 0 for i in range(size))


CASES = [fare_table, sort_queue, seat_map, receipt, refunds, zones, timetable, discounts,
         lookup, barcode, route_names, vouchers]


@pytest.mark.meanband(n=20)
def test_fare_table(trials):
    trials.time(fare_table, int(3000 * SLOW))


@pytest.mark.meanband(n=20)
@pytest.mark.parametrize("case", CASES[1:], ids=lambda f: f.__name__)
def test_office(trials, case):
    trials.time(case, 3000)
'''


def run(folder: Path, *args: str, slowdown: float = 1.0) -> dict:
    report = folder / "report.json"
    env = {**os.environ, "PYTEST_DISABLE_PLUGIN_AUTOLOAD": "1", "TICKET_SLOWDOWN": str(slowdown)}
    subprocess.run(
        [sys.executable, "-m", "pytest", "-p", "meanband", "-p", "no:cacheprovider", "-q",
         "--meanband-report", str(report), *args],
        cwd=folder, env=env, capture_output=True, text=True, check=False,
    )
    return json.loads(report.read_text(encoding="utf-8"))


def newest_trials(folder: Path) -> dict[str, np.ndarray]:
    with HistoryStore(folder / ".meanband" / "history.sqlite", create=False) as store:
        return {c.nodeid: c.values for c in store.checks(store.find_run("main").id)}


def regressed(report: dict) -> set[str]:
    found = set()
    for row in report["rows"]:
        if (row.get("baseline") or {}).get("status") == REGRESSED:
            found.add(row["nodeid"])
    return found


def not_compared(report: dict) -> int:
    """Checks set aside as "cannot compare" (a busy machine on one side only)."""
    return sum((row.get("baseline") or {}).get("status") == "cannot compare"
               for row in report["rows"])


def old_verdicts(report: dict, newest: dict[str, np.ndarray]) -> set[str]:
    """As before baselines of several runs: the newest run only, trials only, no adjustment."""
    found = set()
    for row in report["rows"]:
        base = newest.get(row["nodeid"])
        if base is not None and row.get("values"):
            result = compare_samples(row["values"], base, timing=True)
            if result["status"] == REGRESSED:
                found.add(row["nodeid"])
    return found


def share(hits: int, total: int) -> str:
    ci = stats.binomtest(hits, total).proportion_ci(0.95) if total else None
    if ci is None:
        return "-"
    return f"{hits}/{total} = {hits / total:.0%} (95% CI {ci.low:.0%}..{ci.high:.0%})"


def main() -> None:
    started = time.monotonic()
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        (folder / "test_office.py").write_text(textwrap.dedent(SUITE), encoding="utf-8")
        for _ in range(BASELINE_RUNS):
            run(folder, "--meanband-record=main")
        load = os.getloadavg()[0]
        any_new, any_old, noise, set_aside, loads = 0, 0, [], 0, []
        keep = f"--meanband-baseline-runs={BASELINE_RUNS}"
        for _ in range(AA_RUNS):
            newest = newest_trials(folder)
            report = run(folder, "--meanband-baseline=main", keep, "--meanband-record=main")
            any_new += bool(regressed(report))
            set_aside += not_compared(report)
            loads += [r["load"] for r in report["rows"] if r.get("load") is not None]
            any_old += bool(old_verdicts(report, newest))
            noise += [r["baseline"]["noise"]["between_sd"] for r in report["rows"]
                      if (r.get("baseline") or {}).get("noise")]
        checks = len(newest)
        caught: dict[float, tuple[int, int]] = {}
        for slowdown in (1.1, 1.2, 1.3):
            hit = false = 0
            for _ in range(SLOW_RUNS):
                report = run(folder, "--meanband-baseline=main", keep, slowdown=slowdown)
                found = regressed(report)
                hit += SLOWED in found
                false += bool(found - {SLOWED})
            caught[slowdown] = (hit, false)
    print(f"{checks} checks per run; rolling baseline of the newest {BASELINE_RUNS} runs; load "
          f"average after the first baseline runs "
          f"{load:.2f} on {os.cpu_count()} CPUs; {time.monotonic() - started:.0f} s in all")
    if noise:
        print(f"run-to-run sd used: median {np.median(noise):.1%}, "
              f"range {min(noise):.1%}..{max(noise):.1%}")
    if loads:
        print(f"load per CPU at the checks of the unchanged runs: median {np.median(loads):.2f}, "
              f"max {max(loads):.2f}; checks set aside as 'cannot compare' (busy on one side): "
              f"{set_aside} of {AA_RUNS * checks}")
    print(f"unchanged code, runs with any false 'regressed': {share(any_new, AA_RUNS)}")
    print(f"  the same runs judged the old way (newest run, trials only, no adjustment): "
          f"{share(any_old, AA_RUNS)}")
    for slowdown, (hit, false) in caught.items():
        print(f"{slowdown - 1:.0%} slower: caught in {share(hit, SLOW_RUNS)}; runs with a false "
              f"'regressed' elsewhere: {false}/{SLOW_RUNS}")


PROBE = '''
import statistics
import time


def _work():
    total = 0
    for i in range(20000):
        total += i * i % 7
    return total


def pytest_runtest_makereport(item, call):
    if call.when != "call":
        return
    for _ in range(3):
        _work()
    times = []
    for _ in range(15):
        start = time.perf_counter_ns()
        _work()
        times.append(time.perf_counter_ns() - start)
    with open("reference.txt", "a", encoding="utf-8") as handle:
        handle.write(f"{item.nodeid} {statistics.median(times) * 1e-9!r}\\n")
'''


def probe(runs: int) -> None:
    with tempfile.TemporaryDirectory() as tmp:
        folder = Path(tmp)
        (folder / "test_office.py").write_text(textwrap.dedent(SUITE), encoding="utf-8")
        (folder / "conftest.py").write_text(PROBE, encoding="utf-8")
        raw, reference = [], []
        for _ in range(runs):
            (folder / "reference.txt").unlink(missing_ok=True)
            report = run(folder)
            ref = dict(line.split() for line in
                       (folder / "reference.txt").read_text(encoding="utf-8").splitlines())
            rows = sorted(report["rows"], key=lambda r: r["nodeid"])
            raw.append([float(np.mean(np.log(r["values"]))) for r in rows])
            reference.append([float(np.log(float(ref[r["nodeid"]]))) for r in rows])
    logs, refs = np.array(raw), np.array(reference)
    print(f"{runs} runs of unchanged code; sd of each check's run mean on the log scale")
    print("  as timed:            " + " ".join(f"{v:.3f}" for v in logs.std(axis=0, ddof=1)))
    print("  over the reference:  " + " ".join(f"{v:.3f}" for v in
                                            (logs - refs).std(axis=0, ddof=1)))
    print("  reference per run:   " + " ".join(f"{np.exp(v) * 1e3:.3f} ms"
                                            for v in refs.mean(axis=1)))


if __name__ == "__main__":
    if len(sys.argv) > 1 and sys.argv[1] == "probe":
        probe(int(sys.argv[2]) if len(sys.argv) > 2 else 5)
    else:
        main()
