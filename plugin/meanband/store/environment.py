"""Where a run happened: the one environment capture, shared by the history store and reports."""

from __future__ import annotations

import os
import platform
import socket
import subprocess
from importlib import metadata
from typing import Any

__all__ = ["PACKAGES", "capture_environment", "python_words"]

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
