"""The metrology features as a user runs them: instrument uncertainty, rules, bench logs."""

from __future__ import annotations

import json
import math

import numpy as np
import pytest
from meanband import mean_interval
from meanband.stats.rules import conformance_probability
from meanband.stats.uncertainty import uncertainty_budget

RNG = np.random.default_rng(8080)


def _exact(mean: float, sd: float, n: int) -> np.ndarray:
    """Normal-looking data whose sample mean and sd are exactly ``mean`` and ``sd``."""
    z = RNG.normal(size=n)
    return mean + sd * (z - z.mean()) / z.std(ddof=1)


LOOP = _exact(12.001, 0.006, 30)  # a 4-20 mA loop reading near 12 mA
RAIL = _exact(3.296, 0.004, 20)  # a 3.3 V rail read just under its limit

ROW_DUMP = """
import json

def pytest_meanband_result(config, row):
    with open("rows.jsonl", "a") as out:
        out.write(json.dumps(row) + "\\n")
"""


def _rows(pytester: pytest.Pytester) -> dict[str, dict]:
    lines = (pytester.path / "rows.jsonl").read_text().splitlines()
    return {json.loads(line)["nodeid"].split("::")[1]: json.loads(line) for line in lines}


def _write_suite(pytester: pytest.Pytester) -> None:
    pytester.makeconftest(ROW_DUMP)
    pytester.makepyfile(test_rig=f"""
import pytest
from meanband import BandViolation

LOOP = {LOOP.tolist()!r}
RAIL = {RAIL.tolist()!r}

def test_loop_plain(trials):
    trials.extend(LOOP, unit="mA")
    trials.check(center=12.0, tolerance=0.02)

def test_loop_instrument(trials):
    trials.extend(LOOP, unit="mA")
    trials.check(center=12.0, tolerance=(0.015, 0.02), instrument_uncertainty=(0.004, 12))

def test_loop_instrument_too_coarse(trials):
    trials.extend(LOOP, unit="mA")
    trials.check(center=12.0, tolerance=0.02, instrument_uncertainty=0.02)

def test_rail_simple(trials):
    trials.extend(RAIL, unit="V")
    trials.check(high=3.297, rule="simple")

def test_rail_guarded(trials):
    trials.extend(RAIL, unit="V")
    trials.check(high=3.297)
""")


@pytest.mark.parametrize("workers", [(), ("-n", "2")])
def test_rows_carry_uncertainty_and_rule(run_suite, pytester, workers) -> None:
    _write_suite(pytester)
    result = run_suite(*workers, subprocess=bool(workers))
    result.assert_outcomes(passed=3, failed=2)
    rows = _rows(pytester)

    plain = rows["test_loop_plain"]
    # No instrument: the interval is the plain t interval and the budget says u_B = 0.
    iv = mean_interval(LOOP, 0.95)
    assert plain["decision"]["interval"]["low"] == pytest.approx(iv.low, rel=1e-14)
    assert plain["uncertainty"]["type_b"] == 0.0
    assert plain["rule"]["rule"] == "guarded"

    combined = rows["test_loop_instrument"]
    budget = uncertainty_budget(LOOP, 0.95, "two-sided", (0.004, 12))
    assert combined["uncertainty"]["expanded"] == pytest.approx(budget.expanded, rel=1e-12)
    assert combined["uncertainty"]["effective_df"] == pytest.approx(budget.effective_df)
    assert combined["decision"]["interval"]["method"] == "t+instrument"
    assert combined["decision"]["band"] == {"low": 11.985, "high": 12.02, "unit": "mA"}
    expected_pc = conformance_probability(
        budget.mean, budget.combined, budget.effective_df, 11.985, 12.02
    )
    assert combined["rule"]["conformance_probability"] == pytest.approx(expected_pc, rel=1e-12)
    assert combined["decision"]["verdict"] == "PASS"

    assert rows["test_loop_instrument_too_coarse"]["decision"]["verdict"] == "UNDECIDED"
    assert rows["test_loop_instrument_too_coarse"]["decision"]["suggested_n"] is None

    simple, guarded = rows["test_rail_simple"], rows["test_rail_guarded"]
    assert simple["rule"]["rule"] == "simple" and simple["decision"]["verdict"] == "PASS"
    assert guarded["decision"]["verdict"] == "UNDECIDED"
    assert 0 < simple["rule"]["false_accept_probability"] < 0.5


def test_summary_and_failure_message_speak_metrology(run_suite, pytester) -> None:
    _write_suite(pytester)
    result = run_suite()
    text = result.stdout.str()
    assert "measurement uncertainty and decision rule:" in text
    section = text.split("measurement uncertainty and decision rule:")[1]
    lines = {line.split(":")[2].strip(): line for line in section.splitlines()
             if line.startswith("  test_rig.py::")}
    # Only checks with an instrument part or simple acceptance are listed at default verbosity.
    assert set(lines) == {"test_loop_instrument", "test_loop_instrument_too_coarse",
                          "test_rail_simple"}
    assert "u_B 0.00400 mA (df 12)" in lines["test_loop_instrument"]
    assert "more trials will not decide it" in lines["test_loop_instrument_too_coarse"]
    assert "more trials will not decide it" not in lines["test_loop_instrument"]
    assert "probability of false acceptance" in lines["test_rail_simple"]
    assert "simple acceptance (w = 0)" in lines["test_rail_simple"]
    # The failure message of the coarse instrument says that more trials will not help.
    assert "more trials will not decide it" in text
    assert "u_B 0.02000 mA (df inf)" in text
    verbose = run_suite("-v").stdout.str()
    assert "test_rig.py::test_loop_plain: U = " in verbose


def test_bad_instrument_uncertainty_fails_the_test_clearly(run_suite, pytester) -> None:
    pytester.makepyfile(test_bad="""
def test_negative(trials):
    trials.extend([1.0, 1.1, 0.9], unit="V")
    trials.check(high=2.0, instrument_uncertainty=-0.1)

def test_rule(trials):
    trials.extend([1.0, 1.1, 0.9], unit="V")
    trials.check(high=2.0, rule="loose")
""")
    result = run_suite()
    result.assert_outcomes(failed=2)
    result.stdout.fnmatch_lines([
        "*TrialError: the instrument's standard uncertainty must be a finite number >= 0*",
        "*TrialError: unknown decision rule 'loose'*",
    ])


def test_extend_from_reads_a_log_and_keeps_the_series_on_a_bad_row(run_suite, pytester) -> None:
    good = "# plate probe, rig 2\nelapsed_s,plate_degC\n" + "".join(
        f"{i * 0.5},{float(v)!r}\n" for i, v in enumerate(_exact(85.1, 0.05, 25))
    )
    (pytester.path / "good.csv").write_text(good)
    (pytester.path / "bad.csv").write_text("elapsed_s,plate_degC\n0.5,85.1\n1.0,eighty\n")
    pytester.makeconftest(ROW_DUMP)
    pytester.makepyfile(test_logs="""
import pytest
from meanband import TrialError

def test_good(trials):
    values = trials.extend_from("good.csv", "plate_degC", unit="degC")
    assert values.size == 25
    trials.check(center=85.0, tolerance=(0.3, 0.5))

def test_bad_keeps_what_was_recorded(trials):
    trials.extend([85.0, 85.2], unit="degC")
    with pytest.raises(TrialError, match="bad.csv, line 3: column 'plate_degC' holds 'eighty'"):
        trials.extend_from("bad.csv", "plate_degC")
    assert trials.values.tolist() == [85.0, 85.2]

def test_bad_unchecked(trials):
    trials.extend_from("bad.csv", 1, unit="degC")
""")
    result = run_suite()
    result.assert_outcomes(passed=2, failed=1)
    result.stdout.fnmatch_lines(["*TrialError: *bad.csv, line 3: column 'plate_degC' holds 'eighty'*"])
    rows = _rows(pytester)
    assert rows["test_good"]["decision"]["verdict"] == "PASS"
    assert rows["test_good"]["unit"] == "degC"
    assert len(rows["test_good"]["values"]) == 25
    assert math.isclose(rows["test_good"]["decision"]["interval"]["mean"], 85.1, rel_tol=1e-12)
    # The failed read left the series as it was: its two trials show as recorded, unchecked.
    assert rows["test_bad_keeps_what_was_recorded"]["values"] == [85.0, 85.2]
    assert "test_bad_unchecked" not in rows


def test_a_huge_nu_eff_is_written_as_many() -> None:
    # Before: "nu_eff 781483" from the Welch-Satterthwaite formula (JCGM 100 G.4.1): with that
    # many degrees of freedom k equals the normal quantile to 0.2% (scipy.stats.t.ppf).
    from meanband.record.message import budget_words
    from scipy.stats import norm, t

    assert abs(t.ppf(0.975, 1000) / norm.ppf(0.975) - 1) < 2e-3
    budget = {"expanded": 0.0393, "coverage_factor": 1.96, "effective_df": 781483.0,
              "type_a": 0.0017, "type_a_df": 39, "type_b": 0.02, "type_b_df": None,
              "combined": 0.0201}
    text = budget_words(budget, "mA", None, 3)
    assert "nu_eff > 1000" in text and "781483" not in text
    assert "nu_eff 39" in budget_words({**budget, "effective_df": 39.0}, "mA", None, 3)
