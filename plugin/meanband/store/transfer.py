"""Copy runs between history stores (an SQLite file and a PostgreSQL database, either way)."""

from __future__ import annotations

from dataclasses import dataclass

from meanband.store.history import HistoryStore, RunInfo

__all__ = ["CopyResult", "copy_runs"]


@dataclass(frozen=True, slots=True)
class CopyResult:
    """Which runs were copied (source id, new id) and which the target already held."""

    copied: tuple[tuple[int, int], ...]
    already_there: tuple[int, ...]


def _identity(run: RunInfo) -> tuple[object, ...]:
    """What makes two stored runs the same run, whatever their ids in either store."""
    return (run.label, run.started, run.host, run.commit, run.checks)


def copy_runs(source: HistoryStore, target: HistoryStore, ref: str | None = None) -> CopyResult:
    """Copy every run of ``source`` (or the one ``ref`` names), oldest first, each in its own
    transaction, skipping runs that ``target`` already holds; a copy that stopped part way can
    simply be run again."""
    runs = [source.find_run(ref)] if ref is not None else list(reversed(source.runs()))
    present = {_identity(run) for run in target.runs()}
    copied: list[tuple[int, int]] = []
    skipped: list[int] = []
    for run in runs:
        if _identity(run) in present:
            skipped.append(run.id)
            continue
        new_id = target.copy_run(run, source.checks(run.id))
        present.add(_identity(run))
        copied.append((run.id, new_id))
    return CopyResult(tuple(copied), tuple(skipped))
