"""Shared test helpers: hermetic inner pytest runs with meanband loaded."""

from __future__ import annotations

import os
from pathlib import Path

# In-process pytester runs drop modules first imported inside them; numpy's and scipy's
# C extensions cannot load twice, so the meanband stack is imported once, here.
import meanband.plugin
import meanband.record.recorder  # noqa: F401
import numpy  # noqa: F401
import pytest
import scipy.stats  # noqa: F401
from hypothesis import settings

DATA = Path(__file__).parent / "data"

# `make test` runs the property tests from a fixed seed, so main stays green on a clean clone;
# `make explore` draws fresh random examples (500 where a test sets no count of its own).
settings.register_profile("fixed", derandomize=True)
settings.register_profile("explore", max_examples=500, deadline=None)
settings.load_profile(os.environ.get("HYPOTHESIS_PROFILE", "fixed"))


@pytest.fixture
def run_suite(pytester: pytest.Pytester, monkeypatch: pytest.MonkeyPatch):
    """Run an inner pytest with only meanband (and xdist when ``-n`` is given) loaded."""
    monkeypatch.setenv("PYTEST_DISABLE_PLUGIN_AUTOLOAD", "1")
    # A terminal wide enough that tests of the summary's content see whole lines; the tests of
    # fitting the summary to a terminal set COLUMNS in their own body.
    monkeypatch.setenv("COLUMNS", "1000")

    def run(*args: str, subprocess: bool = False) -> pytest.RunResult:
        extra = ["-p", "meanband", "-p", "no:cacheprovider"]
        if any(a == "-n" or (a.startswith("-n") and a[2:].isdigit()) for a in args):
            extra += ["-p", "xdist"]
        if subprocess:
            return pytester.runpytest_subprocess(*extra, *args)
        return pytester.runpytest(*extra, *args)

    return run


@pytest.fixture(scope="session")
def postgres_server():
    """One throwaway PostgreSQL server per test process, or a loud, counted skip."""
    from postgres_server import UNAVAILABLE_PREFIX, ServerUnavailable, start_server

    try:
        server = start_server()
    except ServerUnavailable as exc:
        pytest.skip(f"{UNAVAILABLE_PREFIX}: {exc}")
    yield server
    server.stop()


@pytest.fixture
def postgres_url(postgres_server) -> str:
    """The URL of a fresh, empty database on the test server."""
    return postgres_server.new_database()
