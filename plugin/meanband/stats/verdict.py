"""The three verdicts of a check, one enum for every stage that judges or reports one."""

from __future__ import annotations

import enum

from meanband.errors import hide_plugin_frames

__all__ = ["Verdict"]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours


class Verdict(str, enum.Enum):
    """Outcome of a check. FAIL and UNDECIDED both fail the test, with different messages."""

    PASS = "PASS"
    FAIL = "FAIL"
    UNDECIDED = "UNDECIDED"

    def __str__(self) -> str:
        return self.value
