"""Reruns as one sequence: the trials an earlier try of the same commit and CI pipeline took.

A job retried after an UNDECIDED (or a flaky runner) would otherwise look at a fresh stream,
which is one more chance to pass by luck. ``n="until-decided"`` is valid at every n of one
stream, so a retry that continues the earlier try's trials keeps the guarantee.
"""

from __future__ import annotations

from meanband.record.sequential import Earlier
from meanband.store.history import HistoryStore, RunInfo

__all__ = ["earlier_sequences", "earlier_try"]


def earlier_try(store: HistoryStore, commit: str | None, pipeline: str | None) -> RunInfo | None:
    """The newest stored run of ``commit`` in ``pipeline``, or None (either unknown: None)."""
    if not commit or not pipeline:
        return None
    for run in store.runs():
        if run.commit == commit and (run.fingerprint or {}).get("pipeline") == pipeline:
            return run
    return None


def earlier_sequences(store: HistoryStore, run_id: int) -> dict[str, dict[str, Earlier]]:
    """The trials of every ``n="until-decided"`` series of run ``run_id``: test id -> series."""
    found: dict[str, dict[str, Earlier]] = {}
    for check in store.checks(run_id):
        sequential = check.row.get("sequential") or {}
        if sequential and not sequential.get("mode") and check.values.size:
            found.setdefault(check.nodeid, {})[check.series] = Earlier(check.values, run_id)
    return found
