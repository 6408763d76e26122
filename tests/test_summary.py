"""The summary text is a pure function of rows: check its content without running pytest."""

from __future__ import annotations

import numpy as np
from meanband.report.terminal import format_summary, totals_line
from meanband.stats.bands import make_band
from meanband.stats.decision import decide


def _row(nodeid, values, band, unit=None, series="", notes=()):
    decision = decide(values, band)
    return {
        "nodeid": nodeid, "series": series, "kind": "check", "unit": unit, "source": "values",
        "values": list(values), "warmup": [], "decision": decision.to_dict(),
        "notes": [{"code": "x", "text": t} for t in notes], "settings": {"power": 0.9}, "timing": None,
    }


RNG = np.random.default_rng(3)


def test_totals_count_verdicts_unchecked_and_notes():
    rows = [
        _row("t.py::a", RNG.normal(1.0, 0.01, 20), make_band(0.9, 1.1), notes=["n1"]),
        _row("t.py::b", RNG.normal(2.0, 0.01, 20), make_band(0.9, 1.1)),
        {"nodeid": "t.py::c", "series": "", "kind": "unchecked", "unit": "V", "values": [1.0, 2.0],
         "decision": None, "notes": []},
    ]
    assert totals_line(rows) == "meanband: 2 checks: 1 PASS, 1 FAIL; 1 recorded but never checked; 1 note"
    assert format_summary(rows, -1) == [totals_line(rows)]


def test_timing_rows_share_one_unit_and_budgets_keep_their_own():
    values = RNG.normal(2.5e-6, 1e-8, 30)
    lines = format_summary([_row("t.py::fast", values, make_band(high="3ms", unit="s"), unit="s")])
    row = next(line for line in lines if line.startswith("t.py::fast"))
    assert "µs" in row and "<= 3 ms" in row and "PASS" in row


def test_digits_follow_the_precision_of_the_mean():
    # A mean of 1000.0 known to about 1e-4 must not print as "1000": the digits grow with n.
    values = 1000.0 + RNG.normal(0, 1e-3, 100)
    lines = format_summary([_row("t.py::fine", values, make_band(999.0, 1001.0), unit="V")])
    row = next(line for line in lines if line.startswith("t.py::fine"))
    mean_text = row.split()[2]
    assert len(mean_text.replace(".", "")) >= 7, row


def test_empty_rows_give_no_lines():
    assert format_summary([], 0) == []


def test_verbose_adds_sd_df_and_critical_value():
    lines = format_summary([_row("t.py::a", RNG.normal(1.0, 0.01, 20), make_band(0.9, 1.1))], 1)
    header = next(line for line in lines if line.startswith("test "))
    assert header.split()[-3:] == ["sd", "df", "t"]
    row = next(line for line in lines if line.startswith("t.py::a"))
    assert " 19 " in row and "2.093" in row  # df = n - 1; t(0.975, 19) = 2.093, e-Handbook 1.3.6.7.2 (from memory)


def test_an_auto_row_shows_its_pilot_beside_the_second_stage(pytester, run_suite) -> None:
    # Stein's interval takes its mean from the second stage alone; the pilot is shown beside it,
    # so the summary and `meanband history show` (all trials) no longer seem to disagree.
    pytester.makepyfile(
        """
        import numpy as np

        def test_tank_level(trials):
            rng = np.random.default_rng(1)
            trials.sample(lambda: float(rng.normal(1.0, 0.1)), n="auto", unit="m",
                          band=dict(high=1.2), max_n=200)
            trials.check()
        """
    )
    result = run_suite("--meanband-markdown=out.md")
    line = next(x for x in result.outlines
                if x.startswith("test_an_auto_row_shows_its_pilot_beside_the_second_stage.py::"))
    assert " 2 + 10 pilot " in line, line
    assert "| 2 + 10 pilot |" in (pytester.path / "out.md").read_text()
