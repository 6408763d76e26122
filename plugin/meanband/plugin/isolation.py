"""End-of-session steps run one at a time, so one failing step hides no test result and no other step.

Each implementation of meanband's own hooks is called on its own: an exception becomes one error
line that names the step (or the third-party plugin) and what to do, the other steps still run,
and the session's exit status says that a requested output failed (see docs/reports.md).
"""

from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pytest

FAILURES_KEY = pytest.StashKey["StepFailures"]()

#: meanband's own plugins, by registered name: the step they do and where to look when it fails.
OWN_STEPS = {
    "meanband-history": ("recording the run in the history store", "check --meanband-store"),
    "meanband-reports": ("writing the report files", "check --meanband-report, "
                         "--meanband-markdown and --meanband-plots"),
    "meanband-plan": ("writing the plan file", "check --meanband-write-plan"),
}


@dataclass
class StepFailures:
    """Error lines of the failed end-of-session steps, each reported once."""

    lines: list[str] = field(default_factory=list)
    seen: set[tuple[str, str]] = field(default_factory=set)
    interrupted: bool = False
    output_failed: bool = False  # a step that printed its own error line failed

    def add(self, step: str, message: str, key: str | None = None) -> None:
        """Keep ``message`` about ``step``; a repeat of the same ``key`` is dropped."""
        ident = (step, key if key is not None else message)
        if ident in self.seen:
            return
        self.seen.add(ident)
        self.lines.append(f"meanband: ERROR: {step}: {message}")


def failures(config: pytest.Config) -> StepFailures:
    """The session's failures, made on first use."""
    found = config.stash.get(FAILURES_KEY, None)
    if found is None:
        found = config.stash[FAILURES_KEY] = StepFailures()
    return found


def step_name(config: pytest.Config, plugin: object) -> tuple[str, str]:
    """What a plugin's hook does, and the fix to suggest when it fails."""
    name = config.pluginmanager.get_name(plugin) or repr(plugin)
    if name in OWN_STEPS:
        return OWN_STEPS[name]
    where = getattr(plugin, "__file__", None) or type(plugin).__module__
    return (f"plugin {name} ({where})", "fix or disable that plugin (-p no:NAME)")


def call_isolated(config: pytest.Config, hook_name: str, kwargs: dict[str, Any]) -> list[Any]:
    """Call every implementation of ``hook_name`` on its own; return the results that came back.

    A raising implementation is recorded once per plugin and hook; Ctrl-C stops the remaining
    implementations, is recorded, and marks the session interrupted.
    """
    caller = getattr(config.hook, hook_name)
    record = failures(config)
    results: list[Any] = []
    # pluggy calls the last registered implementation first.
    for impl in reversed(caller.get_hookimpls()):
        if record.interrupted:
            break
        step, fix = step_name(config, impl.plugin)
        try:
            args = {name: kwargs[name] for name in impl.argnames}
            result = impl.function(**args)
        except KeyboardInterrupt:
            record.interrupted = True
            record.add(step, "interrupted (Ctrl-C); the remaining end-of-session steps were "
                       "skipped", key=hook_name)
        except Exception as exc:  # one step's failure must not hide the results
            record.add(step, f"{hook_name} raised {type(exc).__name__}: {exc}; {fix}",
                       key=hook_name)
        else:
            if result is not None:
                results.append(result)
    return results


def settle_exit_status(session: pytest.Session) -> None:
    """A session whose tests passed but whose requested output failed exits 1; Ctrl-C exits 2."""
    record = session.config.stash.get(FAILURES_KEY, None)
    if record is None or not (record.lines or record.output_failed):
        return
    if record.interrupted:
        session.exitstatus = pytest.ExitCode.INTERRUPTED
    elif session.exitstatus in (pytest.ExitCode.OK, pytest.ExitCode.NO_TESTS_COLLECTED):
        session.exitstatus = pytest.ExitCode.TESTS_FAILED
