"""The three verdicts of a check, one enum for every stage that judges or reports one."""

from __future__ import annotations

import enum

__all__ = ["Verdict"]


class Verdict(str, enum.Enum):
    """Outcome of a check. FAIL and UNDECIDED both fail the test, with different messages."""

    PASS = "PASS"
    FAIL = "FAIL"
    UNDECIDED = "UNDECIDED"

    def __str__(self) -> str:
        return self.value
