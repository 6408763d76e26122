"""Bench readings over VISA, against pyvisa-sim: a real VISA stack with a simulated multimeter
described in tests/data/bench_dmm.yaml (an invented maker's bench DMM)."""

from __future__ import annotations

import pytest
import pyvisa
from conftest import DATA
from meanband.collect.instrument import read_series
from meanband.errors import TrialError
from meanband.store.report_json import load_report

DEVICE_FILE = DATA / "bench_dmm.yaml"
IDENTITY = "Quillon Instruments,QDM-6,SN0417,1.2"


@pytest.fixture
def dmm():
    manager = pyvisa.ResourceManager(f"{DEVICE_FILE}@sim")
    resource = manager.open_resource("ASRL1::INSTR", read_termination="\n", write_termination="\n")
    yield resource
    resource.close()
    manager.close()


def test_a_series_reads_the_query_and_records_the_identity(dmm) -> None:
    values, reading = read_series(dmm, "MEAS:VOLT:DC?", 25)
    assert values.shape == (25,) and ((11.97 <= values) & (values <= 12.03)).all()
    assert len(set(values.tolist())) > 1  # the simulated meter scatters its readings
    assert reading.identity == IDENTITY and reading.resource == "ASRL1::INSTR"
    assert reading.errors == () and reading.query == "MEAS:VOLT:DC?"


def test_a_long_series_reports_its_progress_between_readings(dmm, monkeypatch) -> None:
    from meanband.collect import progress

    monkeypatch.setattr(progress, "PROGRESS_AFTER", 0.0)
    monkeypatch.setattr(progress, "PROGRESS_EVERY", 0.0)
    heard: list[tuple[int, int]] = []
    values, _ = read_series(dmm, "MEAS:VOLT:DC?", 6,
                            progress=lambda done, n, seconds: heard.append((done, n)))
    assert values.size == 6
    assert heard == [(1, 6), (2, 6), (3, 6), (4, 6), (5, 6), (6, 6)]


def test_the_error_queue_is_read_after_the_series(dmm) -> None:
    dmm.write("CONF:VOLT:DC:RANGE 10")  # a command this meter does not know: -113 is queued
    _, reading = read_series(dmm, "MEAS:VOLT:DC?", 3)
    assert reading.errors == ('-113,"Undefined header"',)
    _, again = read_series(dmm, "MEAS:VOLT:DC?", 3)
    assert again.errors == ()  # reading the queue empties it


def test_the_timeout_is_honoured_and_named(dmm) -> None:
    with pytest.raises(TrialError, match=r"ASRL1::INSTR did not answer 'MEAS:CURR:DC\?' within its timeout \(40 ms\)"):
        read_series(dmm, "MEAS:CURR:DC?", 3, timeout_ms=40)
    assert dmm.timeout == 40


def test_an_answer_that_is_not_a_number_names_the_instrument_and_reading(dmm) -> None:
    with pytest.raises(TrialError, match=r"ASRL1::INSTR answered 'OVLD' to 'MEAS:TEMP\?' \(reading 0\)"):
        read_series(dmm, "MEAS:TEMP?", 5)


@pytest.mark.parametrize(
    ("resource", "query", "n", "timeout", "message"),
    [
        (object(), "MEAS:VOLT:DC?", 3, None, "has no query"),
        ("dmm", "", 3, None, "query= must be"),
        ("dmm", "MEAS:VOLT:DC?", 0, None, "n=0"),
        ("dmm", "MEAS:VOLT:DC?", 3, -5, "timeout=-5"),
    ],
)
def test_bad_arguments_are_clear_errors(dmm, resource, query, n, timeout, message) -> None:
    with pytest.raises(TrialError, match=message):
        read_series(dmm if resource == "dmm" else resource, query, n, timeout_ms=timeout)


SUITE = f"""
import pytest
import pyvisa

@pytest.fixture
def dmm():
    manager = pyvisa.ResourceManager({str(DEVICE_FILE)!r} + "@sim")
    resource = manager.open_resource("ASRL1::INSTR", read_termination="\\n",
                                     write_termination="\\n")
    yield resource
    resource.close()
    manager.close()

def test_rail(trials, dmm):
    trials.sample(dmm, query="MEAS:VOLT:DC?", n=30, unit="V", timeout=500)
    trials.check(center=12.0, tolerance=0.1)

def test_rail_after_a_bad_command(trials, dmm):
    dmm.write("CONF:VOLT:DC:RANGE 10")
    trials.sample(dmm, query="MEAS:VOLT:DC?", n=10, unit="V")
    trials.check(center=12.0, tolerance=0.1)

def test_extra_arguments_are_refused(trials, dmm):
    trials.sample(dmm, 3, query="MEAS:VOLT:DC?", n=10, unit="V")
"""


def test_the_fixture_samples_an_instrument_and_records_it(run_suite, pytester) -> None:
    pytester.makepyfile(test_bench_rail=SUITE)
    result = run_suite("--meanband-report", "out/rail.json")
    result.assert_outcomes(passed=1, failed=2)
    result.stdout.fnmatch_lines([
        "*instrument ASRL1::INSTR reported 1 error(s) in its error queue after the series: "
        '-113,"Undefined header"; the 10 readings are recorded but not checked*',
        "*with query= the instrument ASRL1::INSTR is asked the query itself*",
    ])
    report = load_report(pytester.path / "out" / "rail.json")  # validates against the schema
    rows = {row["nodeid"].split("::")[-1]: row for row in report["rows"]}
    rail = rows["test_rail"]
    assert rail["decision"]["verdict"] == "PASS" and len(rail["values"]) == 30
    assert rail["instrument"] == {"resource": "ASRL1::INSTR", "identity": IDENTITY,
                                  "query": "MEAS:VOLT:DC?", "timeout_ms": 500.0, "errors": []}
    bad = rows["test_rail_after_a_bad_command"]
    assert bad["kind"] == "unchecked" and len(bad["values"]) == 10  # nothing recorded is lost
    assert bad["instrument"]["errors"] == ['-113,"Undefined header"']
