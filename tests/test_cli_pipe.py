"""The console command ends quietly when its reader closes the pipe (``... | head``)."""

from __future__ import annotations

import subprocess
import sys
from pathlib import Path

from meanband.store.report_json import build_report, environment, write_report
from report_rows import sample_rows


def test_report_into_a_closed_pipe_ends_quietly(tmp_path: Path) -> None:
    path = write_report(build_report(sample_rows() * 200, environment=environment(None),
                                     configuration={"args": [], "options": {}, "workers": None}),
                        tmp_path / "r.json")
    command = [sys.executable, "-m", "meanband", "report", str(path), "-v"]
    with subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE) as child:
        assert child.stdout is not None and child.stderr is not None
        child.stdout.readline()
        child.stdout.close()  # as head does after its lines
        errors = child.stderr.read().decode()
        status = child.wait(timeout=120)
    assert "Traceback" not in errors and "BrokenPipeError" not in errors, errors
    assert status in (0, 141)


def _into_closed_pipe(command: list[str]) -> tuple[int, str]:
    with subprocess.Popen(command, stdout=subprocess.PIPE, stderr=subprocess.PIPE) as child:
        assert child.stdout is not None and child.stderr is not None
        child.stdout.readline()
        child.stdout.close()  # as head does after its lines
        errors = child.stderr.read().decode()
        return child.wait(timeout=120), errors


def test_plan_into_a_closed_pipe_ends_quietly_not_as_an_error(tmp_path: Path) -> None:
    # The plan command guards its file errors; a closed pipe is not one of them.
    path = write_report(build_report(sample_rows() * 400, environment=environment(None),
                                     configuration={"args": [], "options": {}, "workers": None}),
                        tmp_path / "r.json")
    status, errors = _into_closed_pipe(
        [sys.executable, "-m", "meanband", "plan", "--rows", str(path), "--all"])
    assert errors == "" and status == 141, (status, errors)


def test_report_with_outputs_into_a_closed_pipe_ends_quietly(tmp_path: Path) -> None:
    path = write_report(build_report(sample_rows() * 400, environment=environment(None),
                                     configuration={"args": [], "options": {}, "workers": None}),
                        tmp_path / "r.json")
    status, errors = _into_closed_pipe(
        [sys.executable, "-m", "meanband", "report", str(path), "-v",
         "--markdown", str(tmp_path / "r.md")])
    assert "Traceback" not in errors and "error" not in errors, errors
    assert status in (1, 141)
