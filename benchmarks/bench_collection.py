"""Cost of the plugin when unused: collecting 2,000 plain tests with meanband on versus off.

Prints the ratio of wall times (on / off), measured interleaved in one run; target <= 1.05.
Run: .venv/bin/python benchmarks/bench_collection.py
"""

from __future__ import annotations

import os
import statistics
import subprocess
import sys
import tempfile
import time
from pathlib import Path

TESTS = 2000
FILES = 20
ROUNDS = 9


def make_suite(root: Path) -> None:
    per_file = TESTS // FILES
    for f in range(FILES):
        body = "\n".join(f"def test_case_{i}():\n    assert {i} + 1 == {i + 1}\n" for i in range(per_file))
        (root / f"test_plain_{f}.py").write_text(body)


def wall_time(root: Path, enabled: bool) -> float:
    args = [sys.executable, "-m", "pytest", "--collect-only", "-q"]
    args += ["-p", "no:cacheprovider", "-p", "meanband"]
    if not enabled:
        args += ["-p", "no:meanband"]
    env = dict(os.environ, PYTEST_DISABLE_PLUGIN_AUTOLOAD="1")
    start = time.perf_counter()
    done = subprocess.run(args, cwd=root, env=env, capture_output=True, text=True)
    elapsed = time.perf_counter() - start
    if f"{TESTS} tests collected" not in done.stdout:
        raise SystemExit(f"collection failed:\n{done.stdout}\n{done.stderr}")
    return elapsed


def main() -> None:
    with tempfile.TemporaryDirectory() as tmp:
        root = Path(tmp)
        make_suite(root)
        wall_time(root, True)  # warm the file system and byte-code caches
        on, off = [], []
        for _ in range(ROUNDS):
            on.append(wall_time(root, True))
            off.append(wall_time(root, False))
    ratio = statistics.median(on) / statistics.median(off)
    print(f"collect {TESTS} plain tests: median with meanband / without = {ratio:.3f} (target <= 1.05)")


if __name__ == "__main__":
    main()
