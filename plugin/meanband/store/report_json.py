"""The JSON report: build it from result rows, write it, load and validate it against its schema."""

from __future__ import annotations

import datetime as _dt
import json
import math
import os
from collections.abc import Iterable, Mapping, Sequence
from functools import cache
from importlib import resources
from pathlib import Path
from typing import Any

from meanband.errors import ReportError
from meanband.store.environment import capture_environment

__all__ = [
    "FORMAT",
    "SCHEMA_VERSION",
    "ReportError",
    "build_report",
    "decode_rows",
    "dumps",
    "environment",
    "load_report",
    "loads",
    "schema",
    "totals",
    "validate_report",
    "validate_rows",
    "write_report",
]

FORMAT = "meanband-report"
#: Bumped when a reader of an older report would misread a newer one.
SCHEMA_VERSION = 1

#: How numbers that JSON cannot hold are written (the spellings JavaScript's Number() reads).
_NONFINITE_OUT = {math.inf: "Infinity", -math.inf: "-Infinity"}
_NONFINITE_IN = {"Infinity": math.inf, "-Infinity": -math.inf, "NaN": math.nan}
#: Keys whose strings are text, never an encoded number (a series may well be called "NaN").
_TEXT_KEYS = frozenset({
    "nodeid", "series", "kind", "unit", "source", "code", "text", "method", "side", "verdict",
    "reason", "estimand", "label", "name", "clock", "created", "args",
})
#: Row keys holding raw trials: always finite, so they skip the per-number walk.
_TRIAL_KEYS = ("values", "warmup")


@cache
def schema() -> dict[str, Any]:
    """The JSON Schema (draft 2020-12) that every report satisfies; shipped in the package."""
    text = resources.files("meanband.store").joinpath("report.schema.json").read_text(encoding="utf-8")
    document: dict[str, Any] = json.loads(text)
    return document


def environment(rootdir: str | os.PathLike[str] | None = None) -> dict[str, Any]:
    """Where the run happened (see :func:`meanband.store.environment.capture_environment`)."""
    return capture_environment(rootdir)


def now() -> str:
    """The current time as an ISO 8601 string in UTC."""
    return _dt.datetime.now(_dt.timezone.utc).isoformat(timespec="seconds")


def totals(rows: Iterable[Mapping[str, Any]]) -> dict[str, int]:
    """How many rows, checks, and checks of each verdict."""
    counts = {"rows": 0, "checks": 0, "PASS": 0, "FAIL": 0, "UNDECIDED": 0, "unchecked": 0}
    for row in rows:
        counts["rows"] += 1
        decision = row.get("decision")
        if decision is None:
            counts["unchecked"] += 1
        else:
            counts["checks"] += 1
            counts[decision["verdict"]] += 1
    return counts


def build_report(
    rows: Sequence[Mapping[str, Any]],
    *,
    environment: Mapping[str, Any],
    configuration: Mapping[str, Any],
    include_trials: bool = True,
    created: str | None = None,
) -> dict[str, Any]:
    """A report of one run: the rows (copied, tagged with run 0) and where they came from.

    With ``include_trials=False`` each row keeps its statistics but its ``values`` and
    ``warmup`` are null, which keeps the file small for a dashboard.
    """
    stamp = created or now()
    out_rows = []
    for row in rows:
        copy = dict(row)
        copy["run"] = 0
        if not include_trials:
            for key in _TRIAL_KEYS:
                copy[key] = None
        out_rows.append(copy)
    return assemble(
        out_rows,
        runs=[{"created": stamp, "environment": dict(environment),
               "configuration": dict(configuration)}],
        include_trials=include_trials,
        created=stamp,
    )


def assemble(
    rows: list[dict[str, Any]],
    *,
    runs: list[dict[str, Any]],
    include_trials: bool,
    created: str | None = None,
) -> dict[str, Any]:
    """Put rows and runs together under the report header."""
    from meanband import __version__
    from meanband.record.message import CAUTION, gates_a_measurement

    return {
        "format": FORMAT,
        "schema_version": SCHEMA_VERSION,
        "meanband_version": __version__,
        "created": created or now(),
        "trials_included": include_trials,
        "runs": runs,
        "totals": totals(rows),
        # What a passing gate on a measured value does and does not say, filed with the results.
        "caution": CAUTION if any(gates_a_measurement(row) for row in rows) else None,
        "rows": rows,
    }


# --- writing -----------------------------------------------------------------------------------


def _encode(value: Any) -> Any:
    """``value`` with infinities and NaN replaced by their strings (raw trials are not walked)."""
    if isinstance(value, float):
        if math.isfinite(value):
            return value
        return "NaN" if math.isnan(value) else _NONFINITE_OUT[value]
    if isinstance(value, dict):
        return {k: _encode(v) for k, v in value.items()}
    if isinstance(value, (list, tuple)):
        return [_encode(v) for v in value]
    return value


def _encode_row(row: Mapping[str, Any]) -> dict[str, Any]:
    return {k: (v if k in _TRIAL_KEYS else _encode(v)) for k, v in row.items()}


def dumps(report: Mapping[str, Any], *, indent: int | None = None) -> str:
    """Strict JSON text of a report (no NaN or Infinity tokens, which many readers refuse)."""
    body = {k: v for k, v in report.items() if k != "rows"}
    encoded = _encode(body)
    encoded["rows"] = [_encode_row(row) for row in report["rows"]]
    try:
        return json.dumps(encoded, indent=indent, allow_nan=False, ensure_ascii=False)
    except ValueError as exc:  # a NaN or infinity among the raw trials
        raise ReportError(
            f"cannot write the report: {exc}; raw trials must be finite numbers"
        ) from exc
    except TypeError as exc:
        raise ReportError(
            f"cannot write the report: {exc}; rows must hold builtin types only "
            "(convert numpy values with float() or .tolist())"
        ) from exc


def write_report(report: Mapping[str, Any], path: str | os.PathLike[str]) -> Path:
    """Write ``report`` to ``path`` atomically (a reader never sees half a file)."""
    from meanband.store.atomic import write_atomic

    return write_atomic(path, dumps(report))


# --- reading -----------------------------------------------------------------------------------


def _refuse_constant(token: str) -> float:
    raise ValueError(f"the token {token} is not JSON; write it as the string \"{token}\"")


def loads(text: str, *, source: str = "<report>") -> dict[str, Any]:
    """Parse, validate and decode report text; its rows equal the rows that were written."""
    from meanband.store.reading import ReadError, loads_json

    try:
        document = loads_json(text, source=source, parse_constant=_refuse_constant)
    except ReadError as exc:
        raise ReportError(str(exc)) from None
    except ValueError as exc:
        raise ReportError(f"{source}: not a JSON report: {exc}") from exc
    validate_report(document, source=source)
    document["rows"] = decode_rows(document["rows"])
    return document  # type: ignore[no-any-return]


def load_report(path: str | os.PathLike[str], *, max_bytes: int | None = None,
                setting: str = "--max-bytes") -> dict[str, Any]:
    """Read a report file written by :func:`write_report` (or by a merge).

    Files larger than ``max_bytes`` (default ``defaults.MAX_READ_BYTES``) and paths that are
    not regular files are refused before they are read; ``setting`` names what raises the limit.
    """
    from meanband.store.reading import ReadError, read_text

    source = os.fspath(path)
    try:
        text = read_text(path, max_bytes=max_bytes, setting=setting)
    except ReadError as exc:
        raise ReportError(str(exc)) from None
    except FileNotFoundError as exc:
        raise ReportError(f"{source}: no such report file") from exc
    except (OSError, UnicodeDecodeError) as exc:
        raise ReportError(f"{source}: cannot read the report: {exc}") from exc
    return loads(text, source=source)


def _decode(value: Any, key: str | None = None) -> Any:
    if isinstance(value, str):
        if key not in _TEXT_KEYS and value in _NONFINITE_IN:
            return _NONFINITE_IN[value]
        return value
    if isinstance(value, dict):
        return {k: _decode(v, k) for k, v in value.items()}
    if isinstance(value, list):
        return [_decode(v, key) for v in value]
    return value


def decode_rows(rows: list[dict[str, Any]]) -> list[dict[str, Any]]:
    """Rows as they were before writing: the strings for infinities and NaN back as floats."""
    return [{k: (v if k in _TRIAL_KEYS else _decode(v, k)) for k, v in row.items()}
            for row in rows]


def validate_report(document: Any, *, source: str = "<report>", full: bool = False) -> None:
    """Check ``document`` against the report schema; raise :class:`ReportError` naming the place.

    The schema is applied to everything but the raw trial arrays, which are checked here
    (finite numbers, or null when trials were left out): a schema validator walks five million
    trials far too slowly for a large suite. ``full=True`` applies the schema to the trials too.
    """
    import jsonschema

    if not isinstance(document, dict):
        raise ReportError(f"{source}: a report is a JSON object, got {type(document).__name__}")
    if document.get("format") != FORMAT:
        raise ReportError(f"{source}: not a meanband report (format is {document.get('format')!r})")
    version = document.get("schema_version")
    if version != SCHEMA_VERSION:
        raise ReportError(
            f"{source}: report schema version {version!r}; this meanband reads version "
            f"{SCHEMA_VERSION}: upgrade meanband, or re-create the report"
        )
    checked = document
    rows = document.get("rows")
    if not full and isinstance(rows, list):
        stripped = []
        for index, row in enumerate(rows):
            if isinstance(row, dict):
                _check_trials(row, index, source)
                row = {k: ([] if k in _TRIAL_KEYS and isinstance(v, list) else v)
                       for k, v in row.items()}
            stripped.append(row)
        checked = dict(document, rows=stripped)
    validator = jsonschema.Draft202012Validator(
        schema(), format_checker=jsonschema.Draft202012Validator.FORMAT_CHECKER
    )
    error = jsonschema.exceptions.best_match(validator.iter_errors(checked))
    if error is not None:
        where = "/".join(str(part) for part in error.absolute_path) or "(top level)"
        raise ReportError(f"{source}: does not match the report schema at {where}: {error.message}")
    run_count = len(document["runs"])
    for index, row in enumerate(document["rows"]):
        if row["run"] >= run_count:
            raise ReportError(
                f"{source}: rows/{index} names run {row['run']} but the report has "
                f"{run_count} run(s)"
            )


def validate_rows(rows: Any, *, source: str = "<rows>") -> None:
    """Check a plain list of result rows (as meanband's hooks see them) against the row schema.

    Only a row's test id and kind, and a check's decision, are required. The first problem is
    raised as :class:`ReportError` naming the row's index and the key, so a malformed row never
    surfaces as a KeyError later.
    """
    import jsonschema

    if not isinstance(rows, list):
        raise ReportError(f"{source}: expected a list of result rows, got {type(rows).__name__}")
    validator = jsonschema.Draft202012Validator(
        _plain_row_schema(), format_checker=jsonschema.Draft202012Validator.FORMAT_CHECKER
    )
    for index, row in enumerate(rows):
        if not isinstance(row, dict):
            raise ReportError(f"{source}: row {index} is {type(row).__name__}, not an object")
        _check_trials(row, index, source)
        stripped = {k: ([] if k in _TRIAL_KEYS and isinstance(v, list) else v)
                    for k, v in row.items()}
        error = jsonschema.exceptions.best_match(validator.iter_errors(stripped))
        if error is not None:
            where = "/".join(str(part) for part in error.absolute_path)
            key = f" at key {where}" if where else ""
            raise ReportError(f"{source}: row {index}{key} is not a result row: {error.message}")


@cache
def _plain_row_schema() -> dict[str, Any]:
    """The report's row schema, asking only for what a hand-written row must hold: its test id
    and kind, and the decision of a check in full; every key present is still type-checked."""
    import copy

    definitions = copy.deepcopy(schema()["$defs"])
    definitions["row"]["required"] = ["nodeid", "kind"]
    definitions["settings"]["required"] = []
    return {**definitions["row"], "$defs": definitions}


def _check_trials(row: dict[str, Any], index: int, source: str) -> None:
    for key in _TRIAL_KEYS:
        values = row.get(key)
        if not isinstance(values, list):
            continue  # absent or null: the schema decides
        kinds = set(map(type, values))
        if not kinds <= {float, int}:
            odd = sorted(k.__name__ for k in kinds - {float, int})
            raise ReportError(
                f"{source}: rows/{index}/{key} must hold numbers only, found {', '.join(odd)}"
            )
