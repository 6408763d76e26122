"""A/A calibration: noise floors measured from stored runs, stored with the baseline, used by it."""

from __future__ import annotations

import math
from pathlib import Path
from typing import Any

import numpy as np
import pytest
from meanband.cli import main
from meanband.stats.run_noise import between_runs, run_level
from meanband.store.history import HistoryStore

ENV = {"commit": "0a0a0a0a0a0a", "branch": "main", "hostname": "bench-7", "machine": "x86_64",
       "cpu_count": 2, "platform": "Linux", "implementation": "CPython", "python": "3.11",
       "meanband": "0.1.0"}


def aa_rows(rng: np.random.Generator, run_shift: float, heating: float = 0.0) -> list[dict[str, Any]]:
    """One run of an invented tram-dispatch suite: the route lookup moves with the run; the
    signal timer also slows from the first to the second half of its trials (heating)."""
    route = np.exp(math.log(2e-4) + run_shift + rng.normal(0, 0.02, 30))
    timer = np.exp(math.log(5e-4) + run_shift + np.r_[rng.normal(0, 0.01, 15),
                                                      rng.normal(heating, 0.01, 15)])
    return [
        {"nodeid": "test_tram.py::test_route", "series": "", "kind": "check", "unit": "s",
         "source": "time", "values": route.tolist(), "warmup": []},
        {"nodeid": "test_tram.py::test_timer", "series": "", "kind": "check", "unit": "s",
         "source": "time", "values": timer.tolist(), "warmup": []},
    ]


@pytest.fixture
def aa_store(tmp_path: Path) -> tuple[Path, list[list[dict[str, Any]]]]:
    rng = np.random.default_rng(5)
    store = tmp_path / "history.sqlite"
    runs = [aa_rows(rng, shift, heating=0.04) for shift in (0.0, 0.03, -0.02, 0.05)]
    with HistoryStore(store) as history:
        for rows in runs:
            history.record_run(rows, label="aa", environment=ENV)
        history.record_run(aa_rows(rng, 0.0), label="main", environment=ENV)
    return store, runs


def test_calibrate_prints_and_stores_the_floors(aa_store, capsys: pytest.CaptureFixture[str]) -> None:
    store, runs = aa_store
    code = main(["history", "calibrate", "--label", "aa", "--for", "main", "--store", str(store)])
    out = capsys.readouterr().out
    assert code == 0, out
    assert "A/A calibration from runs 4, 3, 2, 1 'aa'" in out
    with HistoryStore(store, create=False) as history:
        floors = history.noise_floors("main")
        assert history.noise_floors("aa") == {}
    route = floors[("test_tram.py::test_route", "")]
    # Reference: the one-way random-effects ANOVA estimate of the between-run sd (see
    # test_run_noise for its check against statsmodels' mixed model).
    expected = between_runs([run_level(np.asarray(r[0]["values"]), log=True) for r in runs])
    assert expected is not None
    assert route.between_sd == pytest.approx(expected.sd, rel=1e-12)
    assert route.runs == 4 and route.df == 3
    assert f"{route.between_sd:.2%}" in out
    timer = floors[("test_tram.py::test_timer", "")]
    assert timer.position_shift == pytest.approx(0.04, abs=0.01) and timer.position_p < 0.01
    assert "biased" in out and "warm-up" in out
    assert "stored 2 floor(s) for baseline 'main'" in out


def test_dry_run_stores_nothing(aa_store, capsys: pytest.CaptureFixture[str]) -> None:
    store, _ = aa_store
    assert main(["history", "calibrate", "--label", "aa", "--dry-run", "--store", str(store)]) == 0
    assert "dry run: nothing stored" in capsys.readouterr().out
    with HistoryStore(store, create=False) as history:
        assert history.noise_floors("aa") == {}


def test_one_run_is_not_enough(aa_store, capsys: pytest.CaptureFixture[str]) -> None:
    store, _ = aa_store
    assert main(["history", "calibrate", "--label", "main", "--store", str(store)]) == 2
    err = capsys.readouterr().err
    assert "needs at least 2 runs" in err and "--meanband-record=main" in err


SUITE = """
import numpy as np

def test_route(trials):
    rng = np.random.default_rng({seed})
    trials.extend(np.exp(np.log(2e-4) + rng.normal(0, 0.02, 30)), unit="s")
"""


def test_the_floor_is_used_and_shown(pytester: pytest.Pytester, run_suite,
                                     capsys: pytest.CaptureFixture[str]) -> None:
    pytester.makepyfile(test_tram=SUITE.format(seed=1))
    assert run_suite("--meanband-record=main").ret == 0
    store = pytester.path / ".meanband" / "history.sqlite"
    rng = np.random.default_rng(8)
    with HistoryStore(store) as history:  # three A/A runs whose means moved by about 8%
        for shift in (0.0, 0.08, -0.08):
            history.record_run(aa_rows(rng, shift)[:1], label="aa", environment=ENV)
    assert main(["history", "calibrate", "--label", "aa", "--for", "main",
                 "--store", str(store)]) == 0
    capsys.readouterr()
    pytester.makepyfile(test_tram=SUITE.format(seed=2))
    result = run_suite("--meanband-baseline=main")
    line = next(x for x in result.outlines if x.startswith("test_tram.py::test_route "))
    assert "(A/A)" in line  # larger than the 3% assumed for one run
    floor = float(line.split("(A/A)")[0].split()[-1].rstrip("%")) / 100
    assert floor > 0.05
