"""Progress of long series taken one value at a time: trials.sample and instruments."""

from __future__ import annotations

import itertools

import pytest
from meanband.collect import progress as progress_module
from meanband.collect.progress import take_with_progress


def test_progress_comes_between_values_once_the_series_is_long() -> None:
    ticks = itertools.count(0.0, 0.5)  # every value takes half a second on this clock
    heard: list[tuple[int, int]] = []
    out = take_with_progress(lambda i: i * 10, 12, lambda done, n, s: heard.append((done, n)),
                             clock=lambda: next(ticks))
    assert out == [i * 10 for i in range(12)]
    # Quiet for the first 2 s, then about every 2 s, then once at the end.
    assert heard[0][0] >= 4 and heard[-1] == (12, 12)
    assert all(b - a >= 3 for (a, _), (b, _) in itertools.pairwise(heard[:-1]))
    quick: list[tuple[int, int]] = []
    take_with_progress(lambda i: i, 3, lambda done, n, s: quick.append((done, n)),
                       clock=lambda: 0.0)
    assert quick == []  # a short series says nothing


SUITE = """
import time

def test_read_level(trials):
    trials.sample(lambda: (time.sleep(0.001), 1.0)[1], n=10, unit="m")
    trials.check(high=2.0)
"""


@pytest.fixture
def eager(monkeypatch: pytest.MonkeyPatch) -> None:
    """Report from the first value on, so a test need not run for seconds."""
    monkeypatch.setattr(progress_module, "PROGRESS_AFTER", 0.0)
    monkeypatch.setattr(progress_module, "PROGRESS_EVERY", 0.0)


def test_a_long_sample_reports_its_progress(pytester: pytest.Pytester, run_suite, eager) -> None:
    pytester.makepyfile(test_levels=SUITE)
    result = run_suite()
    lines = [x for x in result.outlines if x.startswith("meanband: test_levels.py::")]
    assert any(" of 10 trials taken, " in x and x.endswith("s so far") for x in lines)
    assert lines[-1].startswith("meanband: test_levels.py::test_read_level: 10 of 10 trials "
                                "taken") and lines[-1].endswith("s done")
    quiet = run_suite("-q")
    assert "trials taken" not in quiet.stdout.str()
