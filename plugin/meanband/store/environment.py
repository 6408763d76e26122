"""Where a run happened: the one environment capture, shared by the history store and reports."""

from __future__ import annotations

import os
import platform
import socket
import subprocess
from importlib import metadata
from typing import Any

__all__ = [
    "PACKAGES",
    "TIMING_KEYS",
    "busy_difference",
    "capture_environment",
    "fingerprint_difference",
    "load_per_cpu",
    "machine_fingerprint",
    "pipeline_id",
    "python_words",
]

#: Packages whose versions a run records.
PACKAGES = ("pytest-meanband", "pytest", "pluggy", "numpy", "scipy", "pytest-xdist")


def capture_environment(rootdir: str | os.PathLike[str] | None = None) -> dict[str, Any]:
    """Interpreter, platform, machine, package versions, and the git commit of ``rootdir``.

    Builtin types only. ``commit``, ``branch`` and ``dirty`` are None where git is missing or
    ``rootdir`` is not a checkout (or None).
    """
    from meanband import __version__

    packages: dict[str, str | None] = {}
    for name in PACKAGES:
        try:
            packages[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            packages[name] = None
    env: dict[str, Any] = {
        "python": platform.python_version(),
        "implementation": platform.python_implementation(),
        "platform": platform.platform(terse=True),
        "machine": platform.machine(),
        "processor": platform.processor(),
        "hostname": socket.gethostname(),
        "cpu_count": os.cpu_count(),
        "packages": packages,
        "meanband": __version__,
        "commit": None,
        "branch": None,
        "dirty": None,
        "fingerprint": machine_fingerprint(),
    }
    commit = _git(rootdir, "rev-parse", "HEAD") if rootdir is not None else None
    if commit:
        env["commit"] = commit
        branch = _git(rootdir, "rev-parse", "--abbrev-ref", "HEAD")
        env["branch"] = branch if branch and branch != "HEAD" else None
        status = _git(rootdir, "status", "--porcelain", "--untracked-files=no")
        env["dirty"] = None if status is None else bool(status)
    return env


def python_words(env: dict[str, Any]) -> str:
    """``CPython 3.11.7``: the implementation and version of an environment, as one string."""
    return f"{env.get('implementation', '')} {env.get('python', '')}".strip()


def _git(cwd: str | os.PathLike[str] | None, *args: str) -> str | None:
    """Output of a git command, or None when git is missing or this is not a checkout."""
    try:
        done = subprocess.run(
            ["git", *args], cwd=cwd, capture_output=True, text=True, timeout=10, check=False
        )
    except (OSError, subprocess.SubprocessError):
        return None
    return done.stdout.strip() if done.returncode == 0 else None


#: The parts of a fingerprint that change timings by themselves: runs that differ in any of
#: these are not compared (the load at start is kept for the record, since it varies anyway).
TIMING_KEYS = ("cpu_model", "cpu_count", "implementation", "python", "system", "clock_source",
               "governor", "boost")

_SYS_CPU = "/sys/devices/system/cpu"


def machine_fingerprint() -> dict[str, Any]:
    """What a timing depends on besides the code: CPU, cores, interpreter, OS, clock, and where
    Linux tells them, the frequency governor, the boost state and the load at start.

    Builtin types only; an unreadable part is None (it then never blocks a comparison).
    """
    try:
        load: float | None = round(os.getloadavg()[0], 2)
    except (OSError, AttributeError):
        load = None
    return {
        "cpu_model": _cpu_model(),
        "cpu_count": os.cpu_count(),
        "implementation": platform.python_implementation(),
        # Patch releases keep the interpreter's speed; a minor release can change it.
        "python": ".".join(platform.python_version_tuple()[:2]),
        "system": platform.system(),
        "kernel": platform.release() or None,
        "clock_source": _read(f"{_SYS_CPU}/../clocksource/clocksource0/current_clocksource"),
        "governor": _read(f"{_SYS_CPU}/cpu0/cpufreq/scaling_governor"),
        "boost": _boost(),
        "load": load,
        "pipeline": pipeline_id(),
    }


def fingerprint_difference(
    then: dict[str, Any] | None, now: dict[str, Any] | None
) -> list[str]:
    """The timing-relevant parts in which two fingerprints differ, in words (empty: alike).

    A part unknown on either side is not held against the comparison.
    """
    if not then or not now:
        return []
    words = []
    for key in TIMING_KEYS:
        a, b = then.get(key), now.get(key)
        if a is not None and b is not None and a != b:
            words.append(f"{key.replace('_', ' ')} {a} -> {b}")
    return words


def _cpu_model() -> str | None:
    try:
        with open("/proc/cpuinfo", encoding="utf-8", errors="replace") as handle:
            for line in handle:
                name, _, value = line.partition(":")
                if name.strip() in ("model name", "Processor", "cpu model"):
                    return value.strip() or None
    except OSError:
        pass
    return platform.processor() or None


def _boost() -> str | None:
    """``on``/``off`` from the cpufreq boost switch or intel_pstate's no_turbo, else None."""
    value = _read(f"{_SYS_CPU}/cpufreq/boost")
    if value is not None:
        return "on" if value == "1" else "off"
    value = _read(f"{_SYS_CPU}/intel_pstate/no_turbo")
    if value is not None:
        return "off" if value == "1" else "on"
    return None


def _read(path: str) -> str | None:
    try:
        with open(path, encoding="utf-8", errors="replace") as handle:
            return handle.read().strip() or None
    except OSError:
        return None


#: A one-minute load average per CPU at or above 1 means more runnable work than cores: a
#: timing then stretches roughly with the queue. Timings whose queue levels (the load per CPU,
#: at least 1) differ by more than this factor are not compared.
BUSY_RATIO = 1.25


def load_per_cpu() -> float | None:
    """The one-minute load average divided by the CPU count, or None where it is unknown."""
    try:
        load = os.getloadavg()[0]
    except (OSError, AttributeError):
        return None
    return round(load / (os.cpu_count() or 1), 3)


def busy_difference(now: float | None, then: list[float]) -> str | None:
    """Words for a machine much busier (or much quieter) at this check than when the baseline
    ran, else None.

    Below one runnable process per core the load does not stretch a timing; above it a timing
    stretches roughly with the queue, so the queue levels ``max(1, load per CPU)`` are compared
    and a ratio beyond :data:`BUSY_RATIO` either way sets the timing aside.
    """
    if now is None or not then:
        return None
    before = sorted(then)[len(then) // 2]
    ratio = max(1.0, now) / max(1.0, before)
    if 1.0 / BUSY_RATIO <= ratio <= BUSY_RATIO:
        return None
    how = "busier" if ratio > 1.0 else "quieter"
    return (f"the machine was {how} at this check (load {now:.2f} per CPU) than when the "
            f"baseline ran ({before:.2f}): the queue, not the code, would move the timing")


#: Variables that name one CI pipeline run and stay the same when a job in it is retried, in
#: the order they are read; MEANBAND_PIPELINE names it by hand.
PIPELINE_VARIABLES = (
    "MEANBAND_PIPELINE",
    "GITHUB_RUN_ID",  # GitHub Actions: a re-run keeps it and raises GITHUB_RUN_ATTEMPT
    "CI_PIPELINE_ID",  # GitLab CI: a retried job keeps it
    "BUILDKITE_BUILD_ID",
    "CIRCLE_WORKFLOW_ID",
    "BUILD_BUILDID",  # Azure Pipelines
)


def pipeline_id() -> str | None:
    """The CI pipeline run this process belongs to, as ``VARIABLE=value``, or None outside CI."""
    for name in PIPELINE_VARIABLES:
        value = os.environ.get(name, "").strip()
        if value:
            return f"{name}={value}"
    return None
