"""Gates on the timings users have: every figure of the independent study, before and after.

One script for the six findings on skewed budgets, slow paths in comparisons, delivered power,
following the notes, notes on normal data, and baselines with unequal counts. "Before" is the
code at commit 66ba121 (the last one before this work), unpacked from git into a temporary
folder and imported in a subprocess; "after" is the code in this checkout. Each part prints its
cells side by side with the study's figure and the stated rate.

Parts 1, 2 and 6 are computed here; parts 3 and 4-5 run ``suggested_power.py`` and
``note_false_alarms.py`` with ``--before``. Fixed seeds; Monte-Carlo SE printed.

Run: ``nice -n 19 .venv/bin/python studies/timing_gates.py [--quick]`` (a few minutes; --quick a
quarter of that). Output kept in ``studies/timing_gates.out.txt``. The part studies run on their
own with more repetitions (their outputs: ``*.out.txt`` beside them).
"""

from __future__ import annotations

import argparse
import math
import subprocess
import sys
import tempfile
import time
from pathlib import Path

import numpy as np

HERE = Path(__file__).resolve().parent
ROOT = HERE.parent
BEFORE = "66ba121"
sys.path.insert(0, str(HERE))


def unpack_before(folder: Path) -> Path:
    """The package as it was at ``BEFORE``, from git (works in any clone of the repository)."""
    archive = subprocess.run(["git", "-C", str(ROOT), "archive", BEFORE, "plugin"],
                             capture_output=True, check=True).stdout
    subprocess.run(["tar", "-x", "-C", str(folder)], input=archive, check=True)
    return folder / "plugin"


def rate(hits: np.ndarray) -> tuple[float, float]:
    p = float(np.mean(hits))
    return 100 * p, 100 * math.sqrt(max(p * (1 - p), 1e-12) / hits.size)


# -- part 1: budgets on skewed timings -------------------------------------------------------


def timing_default_bounds(x: np.ndarray, confidence: float, side: str
                          ) -> tuple[np.ndarray, np.ndarray]:
    """The default interval of a fixed-n timing check whose method nobody set, row by row: t,
    or batch means where the package falls back for lag-1 r in doubt
    (``stats.notes.batch_means_fallback``)."""
    from meanband.stats.diagnostics import lag1_autocorrelation
    from meanband.stats.methods import mean_interval
    from meanband.stats.notes import FALLBACK_METHOD, batch_means_fallback
    from skewed_budgets import t_bounds

    low, high = t_bounds(x, confidence, side)
    d = x - x.mean(axis=1, keepdims=True)
    lag1 = np.sum(d[:, 1:] * d[:, :-1], axis=1) / np.sum(d * d, axis=1)  # NIST StRD's r(1)
    for i in np.flatnonzero([batch_means_fallback(float(r), x.shape[1]) is not None
                             for r in lag1]):
        row = x[i]
        assert abs(lag1[i] - lag1_autocorrelation(row, float(row.mean()))) < 1e-9
        interval = mean_interval(row, confidence, side=side, method=FALLBACK_METHOD)
        low[i], high[i] = interval.low, interval.high
    return low, high


def part_1(reps: int) -> list[str]:
    from skewed_budgets import cox_bounds, scenarios, t_bounds

    by_name = {s.name: s for s in scenarios()}
    rng = np.random.default_rng(20_261_203)
    out = ["PART 1. Budgets on skewed timings: true mean on the budget, false PASS % (MC SE)",
           f"{reps} samples a cell; before: t (the default then); after: the default of a "
           "fixed-n timing check now (t, batch means when lag-1 r is in doubt from 30 trials)",
           f"{'cell':52} {'study':>7} {'before':>13} {'after':>13} {'stated':>7}"]
    cells = [
        ("lognormal s=0.5", 10, 0.95, "upper", "t", 10.9, 5.0),
        ("lognormal s=0.5", 30, 0.95, "upper", "t", 9.0, 5.0),
        ("lognormal s=0.5", 10, 0.99, "upper", "t", 4.5, 1.0),
        ("lognormal s=0.5", 30, 0.99, "upper", "t", 3.2, 1.0),
        ("lognormal s=0.5", 10, 0.95, "two-sided", "t", 7.4, 2.5),
        ("lognormal s=0.5", 30, 0.95, "two-sided", "t", 5.2, 2.5),
        ("lognormal s=0.5", 10, 0.95, "upper", "cox", 6.9, 5.0),
        ("lognormal s=0.5", 30, 0.95, "upper", "cox", 6.3, 5.0),
        ("lognormal s=0.5", 10, 0.99, "upper", "cox", 1.8, 1.0),
        ("lognormal s=0.5", 30, 0.99, "upper", "cox", 1.7, 1.0),
    ]
    for name, n, confidence, side, method, study, stated in cells:
        scenario = by_name[name]
        x = scenario.draw(rng, reps, n)
        before = (t_bounds if method == "t" else cox_bounds)(x, confidence, side)[1]
        after = (timing_default_bounds if method == "t" else cox_bounds)(x, confidence, side)[1]
        what = f"{name} n={n} C={confidence} {method}{' high edge' if side != 'upper' else ''}"
        b, a = rate(before < scenario.mean), rate(after < scenario.mean)
        out.append(f"{what:52} {study:>6.1f}% {b[0]:>6.1f} ({b[1]:.2f}) {a[0]:>6.1f} ({a[1]:.2f}) "
                   f"{stated:>6.1f}%")
    out.append("")
    out.append(f"{'upper bound covers, n = 30, C = 0.95':52} {'study':>7} {'before':>13} "
               f"{'after':>13} {'stated':>7}")
    for name, study in (("lognormal s=1", 84.6), ("two modes 1/4", 86.9),
                        ("two modes 1/10", 86.9), ("pareto a=3", 86.5)):
        scenario = by_name[name]
        x = scenario.draw(rng, reps, 30)
        b = rate(t_bounds(x, 0.95, "upper")[1] >= scenario.mean)
        a = rate(timing_default_bounds(x, 0.95, "upper")[1] >= scenario.mean)
        out.append(f"{name:52} {study:>6.1f}% {b[0]:>6.1f} ({b[1]:.2f}) {a[0]:>6.1f} ({a[1]:.2f}) "
                   f"{95.0:>6.1f}%")
    out.append("The recommended method for skewed trials from 20 up (bootstrap-t) and the other "
               "candidates: docs/skewed-budgets.md")
    return out


# -- part 2: slow paths in the in-run comparison ---------------------------------------------


def part_2(reps: int) -> list[str]:
    done = subprocess.run([sys.executable, str(HERE / "slow_path_compare.py"), str(reps)],
                          capture_output=True, text=True, check=True)
    return ["PART 2. The in-run comparison and a slow path on some calls (study: 100% PASS at "
            "n = 20 and 60)", *done.stdout.splitlines()]


# -- part 6: baselines with skewed, non-log-normal timings and unequal counts -----------------


PART_6_CELLS = ((10, 40, 1.05, "3.9-4.4%"), (10, 40, 1.0, "2.8%"), (20, 20, 1.05, ""),
                (30, 20, 1.05, ""))


def measure_part_6(reps: int) -> list[dict[str, object]]:
    """compare_check on a floor plus an exponential tail, and the gate's count rule where the
    package has one (``unequal_counts``; the plugin applies it before comparing)."""
    from meanband.stats import regression

    rule = getattr(regression, "unequal_counts", None)
    rng = np.random.default_rng(20_261_204)
    cells = []
    for spread in (0.3, 1.0):
        for n_base, n_cur, ratio, _study in PART_6_CELLS:
            hits = 0
            for _ in range(reps):
                base = 1.0 + spread * rng.exponential(1.0, n_base)
                cur = ratio * (1.0 + spread * rng.exponential(1.0, n_cur))
                result = regression.compare_check(cur, base, unit="s", source="time",
                                                  baseline_unit="s")
                hits += result.get("status") == "regressed"
            refused = rule is not None and rule(n_cur, n_base, "the baseline") is not None
            cells.append({"rate": 0.0 if refused else hits / reps, "refused": refused,
                          "compared": hits / reps})
    return cells


def part_6(reps: int, before: Path) -> list[str]:
    old, new = (_measured(["--measure-part-6", str(reps)], tree) for tree in (before, None))
    out = ["PART 6. Baselines, skewed non-log-normal timings (floor + exponential, tail 0.3 and "
           "1.0), 'regressed' % at a true ratio (limit 1.05, stated at most 2.5% at the limit)",
           f"{reps} comparisons a cell; 'refused': the counts are more than 2x apart and the "
           "gate does not compare them, with advice to equalise",
           f"{'cell':40} {'study':>9} {'before':>13} {'after':>13} {'refused':>8} "
           f"{'if compared':>11}"]
    cells = [(spread, *cell) for spread in (0.3, 1.0) for cell in PART_6_CELLS]
    for (spread, n_base, n_cur, ratio, study), b, a in zip(cells, old, new, strict=True):
        se_b = 100 * math.sqrt(max(b["rate"] * (1 - b["rate"]), 1e-12) / reps)
        se_a = 100 * math.sqrt(max(a["rate"] * (1 - a["rate"]), 1e-12) / reps)
        what = f"tail {spread:g}, {n_cur} against {n_base}, ratio {ratio:g}"
        out.append(f"{what:40} {study:>9} {100 * b['rate']:>6.1f} ({se_b:.2f}) "
                   f"{100 * a['rate']:>6.1f} ({se_a:.2f}) {'yes' if a['refused'] else 'no':>8} "
                   f"{100 * a['compared']:>10.1f}%")
    return out


def _measured(args: list[str], tree: Path | None) -> list[dict[str, object]]:
    """Run one measurement of this script in a subprocess, importing meanband from ``tree``
    (None: this checkout), and read its JSON."""
    import json

    command = [sys.executable, str(Path(__file__).resolve()), *args]
    if tree is not None:
        command += ["--meanband-path", str(tree)]
    done = subprocess.run(command, capture_output=True, text=True, check=True)
    return list(json.loads(done.stdout))


# -- parts 3 to 5: the helpers' studies -------------------------------------------------------


def external(script: str, before: Path, extra: list[str], title: str) -> list[str]:
    path = HERE / script
    if not path.exists():
        return [title, f"({script} is missing)"]
    done = subprocess.run([sys.executable, str(path), "--before", str(before), *extra],
                          capture_output=True, text=True, check=False)
    lines = [title, *done.stdout.splitlines()]
    if done.returncode != 0:
        lines += [f"({script} failed with status {done.returncode})", *done.stderr.splitlines()[-5:]]
    return lines


def main(argv: list[str] | None = None) -> int:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--quick", action="store_true",
                        help="A quarter of the repetitions, for a look (about 1 min)")
    parser.add_argument("--meanband-path", type=Path, default=None, help=argparse.SUPPRESS)
    parser.add_argument("--measure-part-6", type=int, default=None, help=argparse.SUPPRESS)
    args = parser.parse_args(argv)
    if args.meanband_path is not None:
        sys.path.insert(0, str(args.meanband_path))
    if args.measure_part_6 is not None:
        import json

        print(json.dumps(measure_part_6(args.measure_part_6)))
        return 0
    started = time.perf_counter()
    scale = 0.25 if args.quick else 1.0  # the default takes about 4 minutes on one idle core
    with tempfile.TemporaryDirectory(prefix="meanband-before-") as folder:
        before = unpack_before(Path(folder))
        sections = [
            part_1(int(20_000 * scale)),
            part_2(int(500 * scale)),
            external("suggested_power.py", before, ["--pilots", str(int(160 * scale))],
                     "PARTS 3. Suggested counts and the power they deliver"),
            external("note_false_alarms.py", before, ["--reps", str(int(500 * scale))],
                     "PARTS 4 AND 5. Following the notes; notes on normal, independent data"),
            part_6(int(500 * scale), before),
        ]
    for lines in sections:
        print("\n".join(lines))
        print()
    print(f"(run time {time.perf_counter() - started:.0f} s)")
    return 0


if __name__ == "__main__":
    raise SystemExit(main())
