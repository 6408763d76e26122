"""Draw the README's pictures from the sample suites: ``make pictures`` runs this.

Runs the sample suites with a JSON report, then draws from that report the interval chart of
all checks and the run chart of one check, and copies them to docs/img/.
"""

from __future__ import annotations

import os
import shutil
import subprocess
import sys
import tempfile
from pathlib import Path

from meanband.report.plots import slugs, write_plots
from meanband.store.report_json import load_report

ROOT = Path(__file__).resolve().parent.parent
TARGET = ROOT / "docs" / "img"
#: The check whose run chart the README shows: a warming engine, whose drift the chart makes plain.
RUN_CHART_TEST = "test_engine_temperature_drifts"


def main() -> int:
    with tempfile.TemporaryDirectory() as tmp:
        report = Path(tmp, "samples.json")
        env = dict(os.environ, PYTEST_DISABLE_PLUGIN_AUTOLOAD="1")
        run = subprocess.run(
            [sys.executable, "-m", "pytest", "-p", "meanband", "-p", "no:cacheprovider", "-q",
             "sample_suites", "--meanband-report", str(report)],
            cwd=ROOT, env=env, check=False,
        )
        if not report.exists():
            print(f"the sample suites wrote no report (pytest exit {run.returncode})",
                  file=sys.stderr)
            return 1
        rows = load_report(report)["rows"]
        chosen = [i for i, row in enumerate(rows) if row["nodeid"].endswith(RUN_CHART_TEST)]
        if not chosen:
            print(f"no row for {RUN_CHART_TEST} in the sample report", file=sys.stderr)
            return 1
        drawn = Path(tmp, "plots")
        write_plots(rows, drawn, dpi=110)
        TARGET.mkdir(parents=True, exist_ok=True)
        shutil.copyfile(drawn / "intervals-01.png", TARGET / "interval-chart.png")
        stem = slugs(rows)[chosen[0]]
        shutil.copyfile(drawn / f"{stem}.run.png", TARGET / "run-chart.png")
    for name in ("interval-chart.png", "run-chart.png"):
        print(f"wrote {(TARGET / name).relative_to(ROOT)}")
    return 0


if __name__ == "__main__":
    sys.exit(main())
