"""Combine the reports of shards run on several machines into one report."""

from __future__ import annotations

import math
import os
from collections.abc import Mapping, Sequence
from typing import Any

from meanband.store.report_json import ReportError, assemble

__all__ = ["MergeConflict", "merge_reports", "pool_rows"]

#: Row keys a pool rebuilds or carries over; any other key was computed from one shard's trials.
_CORE_KEYS = frozenset({
    "nodeid", "series", "kind", "unit", "source", "values", "warmup", "decision", "notes",
    "settings", "timing", "run", "pooled", "uncertainty", "rule",
})
_LISTED_CONFLICTS = 10


class MergeConflict(ReportError):
    """The same check appears in more than one report and pooling was not asked for."""


def _label(key: tuple[str, str, int]) -> str:
    nodeid, series, ordinal = key
    text = nodeid + (f" [series {series!r}]" if series else "")
    return text + (f" (check {ordinal + 1} of the series)" if ordinal else "")


def _refuse_repeats(reports: Sequence[tuple[str, Mapping[str, Any]]]) -> None:
    """A report file given twice would count its trials twice: pooled with itself, its
    intervals would narrow for nothing."""
    seen: set[str] = set()
    for name, _ in reports:
        key = os.path.normcase(os.path.realpath(name))
        if key in seen:
            raise ReportError(
                f"{name} is given twice: merging a report with itself would count its trials "
                "twice; give each report once"
            )
        seen.add(key)


def merge_reports(
    reports: Sequence[tuple[str, Mapping[str, Any]]], *, pool: bool = False
) -> dict[str, Any]:
    """One report from several: ``reports`` pairs a name (the file) with a loaded report.

    A check is identified by test node id, series name and its position among that series'
    checks. The same check in two reports is an error naming both, unless ``pool`` is true: then
    its trials are concatenated in report order and the decision is computed afresh from them.
    """
    if not reports:
        raise ReportError("nothing to merge: give at least one report")
    _refuse_repeats(reports)
    runs: list[dict[str, Any]] = []
    groups: dict[tuple[str, str, int], list[tuple[str, dict[str, Any]]]] = {}
    for name, report in reports:
        offset = len(runs)
        for run in report["runs"]:
            runs.append({**run, "source": run.get("source", name)})
        ordinals: dict[tuple[str, str], int] = {}
        for row in report["rows"]:
            pair = (row["nodeid"], row["series"])
            ordinal = ordinals.get(pair, 0)
            ordinals[pair] = ordinal + 1
            moved = dict(row, run=row["run"] + offset)
            if "pooled" in moved:
                moved["pooled"] = dict(
                    moved["pooled"], runs=[r + offset for r in moved["pooled"]["runs"]]
                )
            groups.setdefault((*pair, ordinal), []).append((name, moved))
    duplicates = {key: found for key, found in groups.items() if len(found) > 1}
    if duplicates and not pool:
        lines = [
            f"  {_label(key)}: in {', '.join(name for name, _ in found)}"
            for key, found in list(duplicates.items())[:_LISTED_CONFLICTS]
        ]
        more = len(duplicates) - _LISTED_CONFLICTS
        if more > 0:
            lines.append(f"  ... and {more} more")
        raise MergeConflict(
            f"{len(duplicates)} check(s) appear in more than one report:\n" + "\n".join(lines)
            + "\nshards should run disjoint tests; to pool the trials of repeated runs of the "
            "same tests instead, merge with pooling (meanband merge --pool)"
        )
    rows = [
        found[0][1] if len(found) == 1 else pool_rows(found, label=_label(key))
        for key, found in groups.items()
    ]
    return assemble(
        rows, runs=runs, include_trials=all(report["trials_included"] for _, report in reports)
    )


def pool_rows(found: Sequence[tuple[str, Mapping[str, Any]]], *, label: str = "") -> dict[str, Any]:
    """One row from the rows of the same check in several reports, with the trials pooled.

    The shards must agree on what was checked (kind, unit, band, confidence, method); the
    decision and the assumption notes are recomputed from the pooled trials. Keys of other
    features (a baseline comparison, say) were computed from one shard's trials alone: they are
    left out and named in the row's ``pooled.dropped`` and in a note.
    """
    import numpy as np

    from meanband import defaults
    from meanband.record.check import decide_with_notes, timing_method
    from meanband.record.row import build_row, decision_record
    from meanband.stats.bands import Band
    from meanband.stats.notes import ASSUMPTION_CODES, FALLBACK_CODE, TIMING_METHOD_CODE

    first_name, first = found[0]
    where = label or first["nodeid"]
    for name, row in found:
        if row.get("values") is None:
            raise ReportError(
                f"cannot pool {where}: {name} was written without its trials; "
                "write the shard reports with trials to pool them"
            )
    for field, read in (
        ("kind", lambda r: r["kind"]),
        ("unit", lambda r: r["unit"]),
        ("source", lambda r: r["source"]),
        ("band", lambda r: r["decision"] and r["decision"]["band"]),
        ("confidence", lambda r: r["settings"]["confidence"]),
        ("method", _chosen_method),
        ("instrument uncertainty", _instrument),
        ("decision rule", _rule),
    ):
        expected = read(first)
        for name, row in found[1:]:
            if read(row) != expected:
                raise ReportError(
                    f"cannot pool {where}: its {field} is {expected!r} in {first_name} "
                    f"but {read(row)!r} in {name}; pool only runs of the same check"
                )
    values = [v for _, row in found for v in row["values"]]
    warmup = [v for _, row in found for v in (row.get("warmup") or [])]
    runs: list[int] = []
    counts: list[int] = []
    for _, row in found:  # a row pooled by an earlier merge keeps its runs apart
        runs.extend(row["pooled"]["runs"] if "pooled" in row else [row["run"]])
        counts.extend(row["pooled"]["counts"] if "pooled" in row else [len(row["values"])])
    dropped = sorted({key for _, row in found for key in row if key not in _CORE_KEYS})
    settings = dict(first["settings"])
    # A timing whose method was the default for timings in some run had no method chosen: the
    # pool is judged afresh on the pooled trials, as the run itself would be.
    fell_back = any(_fell_back(row) for _, row in found)
    fallback = None
    if fell_back:
        settings["method"] = defaults.METHOD
        chosen = timing_method(np.asarray(values, dtype=np.float64), source=first["source"],
                               unit=first["unit"])
        if chosen is not None:
            settings["method"], fallback = chosen
    notes: list[dict[str, str]] = []
    decision: Any = None
    uncertainty: Any = None
    rule: Any = None
    if first["kind"] == "check":
        band_dict = first["decision"]["band"]
        result, notes = decide_with_notes(
            values, Band(float(band_dict["low"]), float(band_dict["high"]), band_dict["unit"]),
            settings, instrument_uncertainty=_instrument(first), rule=_rule(first),
            # Pooled shards are not one series in time order: a trend across them is no drift.
            skip={"drift"},
        )
        decision, uncertainty, rule = decision_record(result)
    if fallback is not None:
        notes.insert(0, fallback)
    seen = {(note["code"], note["text"]) for note in notes}
    for _, row in found:
        for note in row["notes"]:
            pair = (note["code"], note["text"])
            if (note["code"] in ASSUMPTION_CODES
                    or note["code"] in ("pooled", FALLBACK_CODE, TIMING_METHOD_CODE)
                    or pair in seen):
                continue
            seen.add(pair)
            notes.append(dict(note))
    text = (f"trials pooled from {len(counts)} runs "
            f"({' + '.join(str(c) for c in counts)} = {len(values)})")
    if dropped:
        text += f"; left out per-run results that the pool does not recompute: {', '.join(dropped)}"
    notes.append({"code": "pooled", "text": text})
    extra: dict[str, Any] = {"pooled": {"runs": runs, "counts": counts, "dropped": dropped}}
    if "run" in first:
        extra["run"] = first["run"]
    # The uncertainty and the rule were recomputed with the pooled trials, like the decision.
    extra.update({k: v for k, v in (("uncertainty", uncertainty), ("rule", rule)) if v is not None})
    return dict(build_row(
        nodeid=first["nodeid"], series=first["series"], unit=first["unit"], source=first["source"],
        values=values, warmup=warmup, decision=decision, notes=notes, settings=first["settings"],
        timing=first.get("timing"), **extra,
    ))


def _fell_back(row: Mapping[str, Any]) -> bool:
    """Whether the row's timings took the default for timings (batch means or bootstrap-t)
    because no method was chosen."""
    from meanband.stats.notes import FALLBACK_CODE, TIMING_METHOD_CODE

    return any(note.get("code") in (FALLBACK_CODE, TIMING_METHOD_CODE)
               for note in row.get("notes") or [])


def _chosen_method(row: Mapping[str, Any]) -> Any:
    """The row's method as chosen: the default where the timings took the timing default."""
    from meanband import defaults

    return defaults.METHOD if _fell_back(row) else row["settings"]["method"]


def _instrument(row: Mapping[str, Any]) -> tuple[float, float] | None:
    """The check's instrument uncertainty (u_B, df) from its row; None when it had none."""
    budget = row.get("uncertainty") or {}
    if not budget.get("type_b"):
        return None
    df = budget.get("type_b_df")
    return (float(budget["type_b"]), math.inf if df is None else float(df))


def _rule(row: Mapping[str, Any]) -> str:
    return str((row.get("rule") or {}).get("rule", "guarded"))
