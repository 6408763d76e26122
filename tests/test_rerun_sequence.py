"""A retried CI job continues the n="until-decided" sequence of its earlier try."""

from __future__ import annotations

import json
import subprocess

import pytest

SUITE = """
import numpy as np

def test_valve_lift(trials):
    rng = np.random.default_rng({seed})
    trials.sample(lambda: float(rng.normal(2.0, 0.3)), n="until-decided", unit="mm",
                  band=dict(high=2.05), max_n={cap})
    trials.check()
"""


@pytest.fixture
def checkout(pytester: pytest.Pytester) -> pytest.Pytester:
    """The suite in a git checkout with one commit: a retry is of the same commit."""
    for args in (["init", "-q"], ["config", "user.email", "bench@example.invalid"],
                 ["config", "user.name", "bench"], ["commit", "-q", "--allow-empty", "-m", "x"]):
        subprocess.run(["git", *args], cwd=pytester.path, check=True, capture_output=True)
    return pytester


def test_a_retry_continues_the_earlier_trials(checkout: pytest.Pytester, run_suite,
                                             monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("MEANBAND_PIPELINE", "bench-pipeline-77")
    checkout.makepyfile(test_valves=SUITE.format(seed=1, cap=20))
    first = run_suite("--meanband-record=ci", "--meanband-continue-sequence",
                      "--meanband-report=first.json")
    first.assert_outcomes(failed=1)  # a mean on the edge: UNDECIDED at the cap
    first.stdout.fnmatch_lines(["meanband: no earlier try in this pipeline "
                                "(MEANBAND_PIPELINE=bench-pipeline-77): no store yet"])
    earlier = json.loads((checkout.path / "first.json").read_text())["rows"][0]["values"]
    assert len(earlier) == 20
    # The retry raises the cap; its sequence starts with the 20 trials already taken.
    checkout.makepyfile(test_valves=SUITE.format(seed=2, cap=60))
    retry = run_suite("--meanband-record=ci", "--meanband-continue-sequence",
                      "--meanband-report=retry.json", "-n", "2")
    retry.stdout.fnmatch_lines([
        "meanband: n='until-decided' checks continue the sequences of run 1 (the same commit, "
        "MEANBAND_PIPELINE=bench-pipeline-77): 1 series",
    ])
    row = json.loads((checkout.path / "retry.json").read_text())["rows"][0]
    assert row["values"][:20] == earlier and len(row["values"]) > 20
    assert row["sequential"]["continued"] == {"run": 1, "trials": 20}
    assert any("continued the sequence of run 1" in note["text"] for note in row["notes"])


def test_another_pipeline_starts_afresh(checkout: pytest.Pytester, run_suite,
                                        monkeypatch: pytest.MonkeyPatch) -> None:
    monkeypatch.setenv("MEANBAND_PIPELINE", "bench-pipeline-77")
    checkout.makepyfile(test_valves=SUITE.format(seed=1, cap=20))
    run_suite("--meanband-record=ci")
    monkeypatch.setenv("MEANBAND_PIPELINE", "bench-pipeline-78")
    again = run_suite("--meanband-continue-sequence", "--meanband-report=again.json")
    again.stdout.fnmatch_lines(["meanband: no earlier try of this commit in this pipeline "
                                "(MEANBAND_PIPELINE=bench-pipeline-78)*"])
    row = json.loads((checkout.path / "again.json").read_text())["rows"][0]
    assert "continued" not in row["sequential"]
    monkeypatch.delenv("MEANBAND_PIPELINE")
    for name in ("GITHUB_RUN_ID", "CI_PIPELINE_ID", "BUILDKITE_BUILD_ID", "CIRCLE_WORKFLOW_ID",
                 "BUILD_BUILDID"):
        monkeypatch.delenv(name, raising=False)
    outside = run_suite("--meanband-continue-sequence")
    outside.stdout.fnmatch_lines(["meanband: no CI pipeline id in the environment (set "
                                  "MEANBAND_PIPELINE)*"])


def test_a_retry_continues_from_a_postgresql_store(checkout: pytest.Pytester, run_suite,
                                                   monkeypatch: pytest.MonkeyPatch,
                                                   postgres_url: str) -> None:
    # The team's shared history: the earlier try is found in PostgreSQL, not a local file.
    monkeypatch.setenv("MEANBAND_PIPELINE", "bench-pipeline-91")
    store = ("--meanband-store", postgres_url)
    checkout.makepyfile(test_valves=SUITE.format(seed=1, cap=20))
    first = run_suite("--meanband-record=ci", "--meanband-continue-sequence",
                      "--meanband-report=first.json", *store)
    first.assert_outcomes(failed=1)
    first.stdout.fnmatch_lines(["meanband: no earlier try in this pipeline "
                                "(MEANBAND_PIPELINE=bench-pipeline-91): the database holds no "
                                "history yet"])
    earlier = json.loads((checkout.path / "first.json").read_text())["rows"][0]["values"]
    checkout.makepyfile(test_valves=SUITE.format(seed=2, cap=60))
    retry = run_suite("--meanband-record=ci", "--meanband-continue-sequence",
                      "--meanband-report=retry.json", *store)
    retry.stdout.fnmatch_lines(["meanband: n='until-decided' checks continue the sequences of "
                                "run 1 (the same commit, *"])
    row = json.loads((checkout.path / "retry.json").read_text())["rows"][0]
    assert row["values"][:20] == earlier and row["sequential"]["continued"]["trials"] == 20
    assert not (checkout.path / ".meanband").exists()  # nothing went to a local file
