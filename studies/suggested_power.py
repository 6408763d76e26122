"""Study: do suggested trial counts deliver the power they state?

A suggestion is planned from one run (the pilot): its mean, sd and verdict. This study draws
many pilots in each cell, asks ``meanband.stats.suggest.suggest_trials`` for a count, and
computes the true probability that a fresh run of that count decides correctly (PASS, since
every cell's true mean lies inside its band): the delivered power, averaged over pilots, with
its Monte-Carlo standard error. It also prints the median ratio of the suggested count to the
count truly needed (the smallest count whose true power is at least the planned 90%).

Cells: a mean centred in a narrow two-sided band (normal trials); a one-sided budget on
log-normal trials (sigma 0.5 on the log scale) checked with the t interval, at two pilot sizes
and two effects; a budget whose pilot of 10 was UNDECIDED, at effects 0.25, 0.5 and 1.0 (the
suggestion is only ever asked of such a pilot); a baseline comparison that "cannot tell yet"
(``meanband.stats.regression.compare_samples``), rerun with the suggested count in both runs.

The true power is the study's own: the noncentral t for normal trials (scipy.stats.nct), a
direct integration over the sample sd for the centred band, and a seeded simulation of the
rerun on a grid of counts for the log-normal and baseline cells (interpolated between grid
points). The measurement uses only ``suggest_trials``, ``meanband.trials_needed`` and
``compare_samples``, which the older code has too, so ``--meanband-path DIR`` measures another
copy of the package (``git archive 66ba121 plugin | tar -x -C /tmp/before``), and
``--before DIR`` prints both side by side.

Two more tables, from the current code only: counts planned at k times an UNDECIDED pilot's
effect (why no pilot-only rule serves every effect), and four rules for the pilot's sd.

Run: ``nice -n 19 .venv/bin/python studies/suggested_power.py [--pilots N] [--seed S]
[--before /tmp/before/plugin]`` (300 pilots a cell by default: about four minutes with
``--before`` on a shared two-core machine). Nothing here is asserted; tests/test_suggest.py checks the
properties on a few seeded cases.
"""

from __future__ import annotations

import argparse
import inspect
import json
import math
import subprocess
import sys
from collections.abc import Callable
from typing import Any

CONFIDENCE = 0.95
POWER = 0.9
LOG_SIGMA = 0.5
#: Counts at which the simulated power curves are computed (every count up to 200, then a
#: geometric grid); the curves are interpolated between them.
SIM_MAX = 3000
RERUNS = 2000


def _arguments() -> argparse.Namespace:
    parser = argparse.ArgumentParser(description=__doc__.splitlines()[0])
    parser.add_argument("--meanband-path", help="put this directory first on sys.path")
    parser.add_argument("--before", help="also measure the package in this directory, side by side")
    parser.add_argument("--pilots", type=int, default=300, help="pilots per cell")
    parser.add_argument("--seed", type=int, default=2026)
    parser.add_argument("--json", action="store_true", help="print the figures as JSON")
    return parser.parse_args()


# -- true power of a rerun --------------------------------------------------------------------


def _count_grid() -> Any:
    import numpy as np

    return np.unique(np.concatenate([np.arange(2, 201), np.geomspace(200, SIM_MAX, 40).round()]))


class Curve:
    """True power of a rerun at any count: exact where a formula exists, else simulated."""

    def __init__(self, power_at: Callable[[Any], Any], exact: bool) -> None:
        import numpy as np

        self.exact = exact
        self._power_at = power_at
        if not exact:
            self.grid = _count_grid()
            self.values = np.maximum.accumulate(np.asarray(power_at(self.grid), dtype=float))

    def __call__(self, counts: Any) -> Any:
        import numpy as np

        counts = np.asarray(counts, dtype=float)
        if self.exact:
            return np.asarray(self._power_at(counts), dtype=float)
        clipped = np.clip(counts, 2, SIM_MAX)
        return np.interp(clipped, self.grid, self.values)

    def needed(self) -> int:
        """Smallest count whose power reaches POWER."""
        import numpy as np

        if self.exact:
            n = 2
            while float(self._power_at(np.array([n]))[0]) < POWER:
                n *= 2
            low = n // 2
            while n - low > 1:
                mid = (low + n) // 2
                if float(self._power_at(np.array([mid]))[0]) >= POWER:
                    n = mid
                else:
                    low = mid
            return n
        return int(self.grid[np.argmax(self.values >= POWER)])


def _budget_normal(effect: float) -> Curve:
    """One-sided t test at 1 - C, true mean ``effect`` sd below the budget (noncentral t)."""
    import numpy as np
    from scipy import stats

    def power_at(n: Any) -> Any:
        n = np.asarray(n, dtype=float)
        return stats.nct.sf(stats.t.ppf(CONFIDENCE, n - 1), n - 1, effect * np.sqrt(n))

    return Curve(power_at, exact=True)


def _band_normal(half: float) -> Curve:
    """Two-sided t interval inside a band of +-``half`` sd around the true mean, by integration
    over the chi law of the sample sd (1000 quantile points)."""
    import numpy as np
    from scipy import stats

    u = (np.arange(1000) + 0.5) / 1000

    def power_at(counts: Any) -> Any:
        out = []
        for n in np.asarray(counts, dtype=float):
            c = stats.t.ppf(0.5 + CONFIDENCE / 2, n - 1)
            ratio = np.sqrt(stats.chi2.ppf(u, n - 1) / (n - 1))
            inside = 2 * stats.norm.cdf(np.sqrt(n) * half - c * ratio) - 1
            out.append(float(np.mean(np.clip(inside, 0, None))))
        return np.array(out)

    return Curve(power_at, exact=True)


def _budget_lognormal(budget: float, rng: Any) -> Curve:
    """The t interval's upper bound below ``budget`` on log-normal trials, simulated."""
    import numpy as np
    from scipy import stats

    def power_at(counts: Any) -> Any:
        out = []
        for n in counts:
            n = int(n)
            x = np.exp(rng.normal(0.0, LOG_SIGMA, (RERUNS, n)))
            upper = x.mean(1) + stats.t.ppf(CONFIDENCE, n - 1) * x.std(1, ddof=1) / math.sqrt(n)
            out.append(float(np.mean(upper < budget)))
        return np.array(out)

    return Curve(power_at, exact=False)


def _baseline_rerun(log_ratio: float, limit: float, log_sd: float, rng: Any) -> Curve:
    """Welch's interval on the logs (Welch 1947), n trials in each run: the share of reruns
    that decide correctly (regressed above the limit, no regression below)."""
    import numpy as np
    from scipy import stats

    def power_at(counts: Any) -> Any:
        out = []
        for n in counts:
            n = int(n)
            cur = rng.normal(log_ratio, log_sd, (RERUNS, n))
            base = rng.normal(0.0, log_sd, (RERUNS, n))
            diff = cur.mean(1) - base.mean(1)
            se = np.sqrt((cur.var(1, ddof=1) + base.var(1, ddof=1)) / n)
            va, vb = cur.var(1, ddof=1) / n, base.var(1, ddof=1) / n
            df = (va + vb) ** 2 / (va**2 / (n - 1) + vb**2 / (n - 1))
            reach = stats.t.ppf(0.5 + CONFIDENCE / 2, df) * se
            if log_ratio > math.log(limit):
                out.append(float(np.mean(diff - reach > math.log(limit))))
            else:
                out.append(float(np.mean(diff + reach < math.log(limit))))
        return np.array(out)

    return Curve(power_at, exact=False)


# -- pilots and their suggestions -------------------------------------------------------------


def _t_verdicts(x: Any, low: float, high: float) -> Any:
    """The t interval's verdict for each pilot row (PASS / FAIL / UNDECIDED)."""
    import numpy as np
    from scipy import stats

    n = x.shape[1]
    two = math.isfinite(low) and math.isfinite(high)
    q = 0.5 + CONFIDENCE / 2 if two else CONFIDENCE
    mean, sem = x.mean(1), x.std(1, ddof=1) / math.sqrt(n)
    # As bands.decide: a budget passes on the bound at C and fails on the opposite bound at C.
    lo, hi = mean - stats.t.ppf(q, n - 1) * sem, mean + stats.t.ppf(q, n - 1) * sem
    inside = (lo >= low) & (hi <= high)
    outside = (hi < low) | (lo > high)
    return np.where(inside, "PASS", np.where(outside, "FAIL", "UNDECIDED"))


def _suggest(values: Any, verdict: str, low: float, high: float) -> int | None:
    from meanband.stats.suggest import suggest_trials

    kwargs: dict[str, Any] = dict(
        verdict=verdict, mean=float(values.mean()), sd=float(values.std(ddof=1)),
        n=int(values.size), low=low, high=high, confidence=CONFIDENCE, power=POWER,
    )
    accepted = inspect.signature(suggest_trials).parameters
    if "values" in accepted:  # a version that plans with the trials' shape
        kwargs["values"] = values
        kwargs["method"] = "t"
    s = suggest_trials(**kwargs)
    return None if s is None else s.n


def _summary(curve: Curve, counts: list[int | None], asked: int) -> dict[str, Any]:
    import numpy as np

    given = np.array([c for c in counts if c is not None], dtype=float)
    needed = curve.needed()
    if given.size == 0:
        return {"power": None, "se": None, "ratio": None, "needed": needed, "given": 0,
                "asked": asked}
    powers = curve(given)
    return {
        "power": float(powers.mean()),
        "se": float(powers.std(ddof=1) / math.sqrt(given.size)) if given.size > 1 else None,
        "ratio": float(np.median(given) / needed),
        "needed": needed,
        "given": int(given.size),
        "asked": asked,
    }


def _pilots(rng: Any, draw: Callable[[int], Any], low: float, high: float, want: int,
            only_undecided: bool) -> tuple[Any, Any]:
    """``want`` pilots (rows) and their verdicts; only UNDECIDED ones when asked."""
    import numpy as np

    rows, verdicts = [], []
    total = 0
    while total < want:
        x = draw(max(want, 200))
        v = _t_verdicts(x, low, high)
        keep = v == "UNDECIDED" if only_undecided else v != "FAIL"
        rows.append(x[keep])
        verdicts.append(v[keep])
        total += int(keep.sum())
    return np.concatenate(rows)[:want], np.concatenate(verdicts)[:want]


def measure(pilots: int, seed: int) -> dict[str, Any]:
    """Every cell's figures, as a dict of builtin types."""
    import numpy as np

    rng = np.random.default_rng(seed)
    cells: dict[str, Any] = {}

    for m, half in ((10, 0.6), (30, 0.4)):
        curve = _band_normal(half)
        x, v = _pilots(rng, lambda k, m=m: rng.normal(0.0, 1.0, (k, m)), -half, half, pilots, False)
        counts = [_suggest(x[i], str(v[i]), -half, half) for i in range(len(x))]
        cells[f"centred band +-{half} sd, pilot {m}"] = _summary(curve, counts, len(x))

    mean = math.exp(LOG_SIGMA**2 / 2)
    spread = mean * math.sqrt(math.exp(LOG_SIGMA**2) - 1)
    for m in (10, 30):
        for effect in (0.3, 0.6):
            budget = mean + effect * spread
            curve = _budget_lognormal(budget, rng)
            x, v = _pilots(rng, lambda k, m=m: np.exp(rng.normal(0.0, LOG_SIGMA, (k, m))),
                           -math.inf, budget, pilots, False)
            counts = [_suggest(x[i], str(v[i]), -math.inf, budget) for i in range(len(x))]
            cells[f"log-normal budget, t, effect {effect}, pilot {m}"] = _summary(
                curve, counts, len(x))

    for effect in (0.25, 0.5, 1.0):
        curve = _budget_normal(effect)
        x, v = _pilots(rng, lambda k: rng.normal(0.0, 1.0, (k, 10)), -math.inf, effect,
                       pilots, True)
        counts = [_suggest(x[i], "UNDECIDED", -math.inf, effect) for i in range(len(x))]
        cells[f"UNDECIDED pilot of 10, effect {effect}"] = _summary(curve, counts, len(x))

    cells.update(_baseline_cells(rng, pilots))
    cells["scaled plug-in rule (trials_needed at k x the pilot's effect)"] = _scaled_rule(
        rng, pilots)
    if "sd_df" in inspect.signature(__import__("meanband").trials_needed).parameters:
        cells["rules for the pilot's uncertainty"] = _rules(rng, min(pilots, 200))
    return cells


RULES = ("sd as known", "sd's 80% upper bound", "averaged over the sd", "over the sd and mean")


def _rule_count(name: str, sd: float, upper_sd: float, margin: float, m: int) -> int:
    from meanband import trials_needed

    common: dict[str, Any] = dict(confidence=CONFIDENCE, side="upper", power=POWER,
                                  n_max=100_000)
    if name == "sd's 80% upper bound":
        found = trials_needed(upper_sd, margin=margin, **common)
    elif name == "averaged over the sd":
        found = trials_needed(sd, margin=margin, sd_df=m - 1, **common)
    elif name == "over the sd and mean":
        found = trials_needed(sd, margin=margin, sd_df=m - 1, pilot_n=m, **common)
    else:
        found = trials_needed(sd, margin=margin, **common)
    return 100_000 if found is None else int(found)


def _rules(rng: Any, pilots: int) -> dict[str, Any]:
    """Delivered power and median count ratio of four planning rules on normal budgets, with
    the t interval's normal theory (no shape): the pilot's sd as known; its 80% upper
    confidence bound (Browne 1995); the power averaged over the sd (Julious & Owen 2006); and
    averaged over the sd and the mean (assurance, O'Hagan et al. 2005)."""
    import numpy as np
    from scipy import stats

    out: dict[str, Any] = {}
    settings = [("all pilots of 10", 10, 0.6, False), ("all pilots of 30", 30, 0.6, False),
                ("UNDECIDED pilots of 10", 10, 0.25, True), ("UNDECIDED pilots of 10", 10, 0.5, True),
                ("UNDECIDED pilots of 10", 10, 1.0, True)]
    for label, m, effect, undecided in settings:
        curve = _budget_normal(effect)
        x, _ = _pilots(rng, lambda k, m=m: rng.normal(0.0, 1.0, (k, m)), -math.inf, effect,
                       pilots, undecided)
        margin, sd = np.abs(effect - x.mean(1)), x.std(1, ddof=1)
        upper_sd = sd * math.sqrt((m - 1) / stats.chi2.ppf(0.2, m - 1))
        for name in RULES:
            counts = np.array([
                max(m + 1 if undecided else 2,
                    _rule_count(name, float(sd[i]), float(upper_sd[i]), float(margin[i]), m))
                for i in range(len(x))
            ], dtype=float)
            out[f"{label}, effect {effect}|{name}"] = (
                float(curve(counts).mean()), float(np.median(counts) / curve.needed()))
    return out


def _baseline_cells(rng: Any, pilots: int) -> dict[str, Any]:
    import numpy as np

    try:
        from meanband.stats.regression import CANNOT_TELL, compare_samples
    except ImportError:
        return {}
    out: dict[str, Any] = {}
    limit, log_sd, m = 1.05, 0.1, 12
    for ratio in (1.12, 0.98):
        curve = _baseline_rerun(math.log(ratio), limit, log_sd, rng)
        counts: list[int | None] = []
        tries = 0
        while len(counts) < pilots and tries < 50 * pilots:
            tries += 1
            cur = np.exp(rng.normal(math.log(ratio), log_sd, m))
            base = np.exp(rng.normal(0.0, log_sd, m))
            result = compare_samples(cur, base, timing=True, confidence=CONFIDENCE, power=POWER)
            if result["status"] == CANNOT_TELL:
                counts.append(result.get("suggested_n"))
        out[f"baseline cannot tell yet, ratio {ratio} vs limit {limit}, 12+12"] = _summary(
            curve, counts, len(counts))
    return out


def _scaled_rule(rng: Any, pilots: int) -> dict[str, Any]:
    """Delivered power of counts planned at k times an UNDECIDED pilot's effect (known sd
    rules aside): no single k serves effects 0.25, 0.5 and 1.0 at once."""
    import numpy as np
    from meanband import trials_needed

    out: dict[str, Any] = {}
    for effect in (0.25, 0.5, 1.0):
        curve = _budget_normal(effect)
        x, _ = _pilots(rng, lambda k: rng.normal(0.0, 1.0, (k, 10)), -math.inf, effect,
                       min(pilots, 400), True)
        margin, sd = effect - x.mean(1), x.std(1, ddof=1)
        for k in (0.5, 1.0, 1.5, 2.0, 3.0):
            counts = [
                max(11, trials_needed(float(sd[i]), margin=k * abs(float(margin[i])),
                                      confidence=CONFIDENCE, side="upper", power=POWER,
                                      n_max=100_000) or 100_000)
                for i in range(len(x))
            ]
            given = np.array(counts, dtype=float)
            out[f"effect {effect}, k={k}"] = float(curve(given).mean())
    return out


# -- printing ---------------------------------------------------------------------------------


def _figure(cell: dict[str, Any] | None) -> str:
    if not cell or cell.get("power") is None:
        return "n/a"
    se = f" +-{cell['se']:.3f}" if cell.get("se") is not None else ""
    return f"{cell['power']:.3f}{se} x{cell['ratio']:.2f}"


def _print(columns: dict[str, dict[str, Any]], pilots: int, seed: int) -> None:
    names = list(columns)
    print(f"Delivered power of the suggested count (planned {POWER:.0%}), with its Monte-Carlo SE,")
    print("and the median ratio of the suggested count to the count truly needed (x...).")
    print(f"{pilots} pilots a cell, seed {seed}, C = {CONFIDENCE}, {RERUNS} reruns a simulated count.")
    print()
    cells = [c for c in columns[names[-1]] if not c.startswith(("scaled", "rules"))]
    width = max(len(c) for c in cells)
    print(f"{'cell':<{width}}  " + "  ".join(f"{n:<26}" for n in names) + "  truly needed")
    for cell in cells:
        figures = [_figure(columns[n].get(cell)) for n in names]
        needed = columns[names[-1]][cell]["needed"]
        print(f"{cell:<{width}}  " + "  ".join(f"{f:<26}" for f in figures) + f"  {needed}")
    scaled = columns[names[-1]].get("scaled plug-in rule (trials_needed at k x the pilot's effect)")
    if scaled:
        print()
        print("UNDECIDED pilots of 10: delivered power of counts planned at k times the pilot's")
        print("effect (plug-in sd), for each true effect; one k for all three would be needed.")
        ks = sorted({float(key.split("k=")[1]) for key in scaled})
        print(f"{'true effect':<12}" + "".join(f"  k={k:<6g}" for k in ks))
        for effect in (0.25, 0.5, 1.0):
            row = [scaled[f"effect {effect}, k={k}"] for k in ks]
            print(f"{effect:<12}" + "".join(f"  {p:<8.3f}" for p in row))
    rules = columns[names[-1]].get("rules for the pilot's uncertainty")
    if rules:
        _print_rules(rules)


def _print_rules(rules: dict[str, Any]) -> None:
    print()
    print("Planning rules for the pilot's uncertainty (normal budgets, noncentral t; delivered")
    print("power and median count ratio): what the suggestion's choice rests on.")
    names = list(dict.fromkeys(key.split("|")[1] for key in rules))
    cells = list(dict.fromkeys(key.split("|")[0] for key in rules))
    width = max(len(c) for c in cells)
    print(f"{'pilots':<{width}}  " + "  ".join(f"{n:<20}" for n in names))
    for cell in cells:
        figures = [rules[f"{cell}|{n}"] for n in names]
        print(f"{cell:<{width}}  " + "  ".join(f"{p:.3f} x{r:<13.2f}" for p, r in figures))


def main() -> None:
    args = _arguments()
    if args.meanband_path:
        sys.path.insert(0, args.meanband_path)
    if args.json:
        print(json.dumps(measure(args.pilots, args.seed)))
        return
    columns: dict[str, dict[str, Any]] = {}
    if args.before:
        command = [sys.executable, __file__, "--meanband-path", args.before, "--json",
                   "--pilots", str(args.pilots), "--seed", str(args.seed)]
        done = subprocess.run(command, capture_output=True, text=True, check=True)
        columns["before"] = json.loads(done.stdout)
    import meanband

    label = "after" if args.before else "this code"
    columns[label] = measure(args.pilots, args.seed)
    print(f"(measured code: {meanband.__file__.rsplit('/', 2)[0]})")
    _print(columns, args.pilots, args.seed)


if __name__ == "__main__":
    main()
