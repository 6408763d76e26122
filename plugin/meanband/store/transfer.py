"""Copy runs between history stores (an SQLite file and a PostgreSQL database, either way)."""

from __future__ import annotations

from dataclasses import dataclass

from meanband.store.history import HistoryStore, NoiseFloor, RunInfo

__all__ = ["CopyResult", "copy_runs"]


@dataclass(frozen=True, slots=True)
class CopyResult:
    """Which runs were copied (source id, new id), which the target already held, and how many
    measured noise floors were copied."""

    copied: tuple[tuple[int, int], ...]
    already_there: tuple[int, ...]
    floors: int = 0


def _identity(run: RunInfo) -> tuple[object, ...]:
    """What makes two stored runs the same run, whatever their ids in either store."""
    return (run.label, run.started, run.host, run.commit, run.checks)


def copy_runs(source: HistoryStore, target: HistoryStore, ref: str | None = None) -> CopyResult:
    """Copy every run of ``source`` (or the one ``ref`` names), oldest first, each in its own
    transaction, skipping runs that ``target`` already holds; a copy that stopped part way can
    simply be run again. A copy of the whole store also copies the measured noise floors that
    the target lacks (same label, check and time of measurement), keeping their times."""
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
    floors = 0 if ref is not None else _copy_floors(source, target)
    return CopyResult(tuple(copied), tuple(skipped), floors)


def _copy_floors(source: HistoryStore, target: HistoryStore) -> int:
    held = {(label, f.nodeid, f.series, f.measured) for label, f in target.all_noise_floors()}
    by_label: dict[str, list[NoiseFloor]] = {}
    for label, floor in source.all_noise_floors():
        if (label, floor.nodeid, floor.series, floor.measured) not in held:
            by_label.setdefault(label, []).append(floor)
    return sum(target.save_noise_floors(label, floors) for label, floors in by_label.items())
