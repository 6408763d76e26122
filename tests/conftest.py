"""Shared test helpers: hermetic inner pytest runs with meanband loaded."""

from __future__ import annotations

from pathlib import Path

# In-process pytester runs drop modules first imported inside them; numpy's and scipy's
# C extensions cannot load twice, so the meanband stack is imported once, here.
import meanband.plugin
import meanband.record.recorder  # noqa: F401
import numpy  # noqa: F401
import pytest
import scipy.stats  # noqa: F401

DATA = Path(__file__).parent / "data"


@pytest.fixture
def run_suite(pytester: pytest.Pytester, monkeypatch: pytest.MonkeyPatch):
    """Run an inner pytest with only meanband (and xdist when ``-n`` is given) loaded."""
    monkeypatch.setenv("PYTEST_DISABLE_PLUGIN_AUTOLOAD", "1")

    def run(*args: str, subprocess: bool = False) -> pytest.RunResult:
        extra = ["-p", "meanband", "-p", "no:cacheprovider"]
        if any(a == "-n" or (a.startswith("-n") and a[2:].isdigit()) for a in args):
            extra += ["-p", "xdist"]
        if subprocess:
            return pytester.runpytest_subprocess(*extra, *args)
        return pytester.runpytest(*extra, *args)

    return run
