"""Readings from a bench instrument over VISA: one query per trial, its identity recorded, its
error queue checked after the series.

The instrument is any PyVISA message-based resource (``pyvisa.ResourceManager().open_resource``)
or an object with the same ``query``/``timeout``/``resource_name``; PyVISA itself is an optional
extra (``pip install 'pytest-meanband[visa]'``) and is never imported here. SCPI's ``*IDN?``
names the instrument and ``SYST:ERR?`` empties its error queue (IEEE 488.2 and SCPI-1999
common practice; command names from memory).
"""

from __future__ import annotations

import math
import re
from dataclasses import dataclass
from typing import Any

import numpy as np

from meanband.collect.progress import take_with_progress
from meanband.collect.timing import Progress
from meanband.errors import TrialError, hide_plugin_frames

__all__ = [
    "ERROR_QUERY",
    "IDENTITY_QUERY",
    "MAX_ERRORS",
    "InstrumentReading",
    "read_series",
    "resource_name",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

IDENTITY_QUERY = "*IDN?"
ERROR_QUERY = "SYST:ERR?"
#: Most error-queue entries read after a series; an instrument that never says "0" is refused.
MAX_ERRORS = 32
# "+0,"No error"", "0, No Error", "0": error code zero ends the queue.
_NO_ERROR = re.compile(r"^\s*[+]?0+\s*(,|$)")


@dataclass(frozen=True, slots=True)
class InstrumentReading:
    """Where a series of readings came from: the resource, what it called itself, the query, the
    timeout in force and what its error queue held after the series."""

    resource: str
    identity: str | None
    query: str
    timeout_ms: float | None
    errors: tuple[str, ...]

    def to_dict(self) -> dict[str, Any]:
        """Builtin types only (the row key ``instrument``)."""
        return {
            "resource": self.resource,
            "identity": self.identity,
            "query": self.query,
            "timeout_ms": None if self.timeout_ms is None else float(self.timeout_ms),
            "errors": list(self.errors),
        }


def resource_name(resource: Any) -> str:
    """The VISA resource name (``ASRL1::INSTR``), or the object's repr when it has none."""
    name = getattr(resource, "resource_name", None)
    return str(name) if name else repr(resource)


def read_series(
    resource: Any,
    query: str,
    n: int,
    *,
    timeout_ms: float | None = None,
    identity_query: str | None = IDENTITY_QUERY,
    error_query: str | None = ERROR_QUERY,
    progress: Progress | None = None,
) -> tuple[np.ndarray, InstrumentReading]:
    """``n`` readings of ``query``, each answer parsed as one number.

    ``timeout_ms`` sets the resource's own VISA timeout first (None keeps the one it has). A VISA
    error, a timeout or an answer that is not a finite number raises :class:`TrialError` naming
    the resource, the query and the reading. ``identity_query``/``error_query`` may be None for an
    instrument that does not speak SCPI. ``progress`` hears of a long series between readings.
    """
    name = resource_name(resource)
    if not callable(getattr(resource, "query", None)):
        raise TrialError(
            f"{name} has no query() method: pass a PyVISA resource, e.g. "
            "pyvisa.ResourceManager().open_resource('USB0::...::INSTR')"
        )
    if not isinstance(query, str) or not query.strip():
        raise TrialError(f"query= must be the instrument command that returns one reading, got {query!r}")
    if isinstance(n, bool) or not isinstance(n, int | np.integer) or n < 1:
        raise TrialError(f"n={n!r} must be a whole number of readings >= 1")
    if timeout_ms is not None:
        if not (isinstance(timeout_ms, int | float) and math.isfinite(timeout_ms) and timeout_ms > 0):
            raise TrialError(f"timeout={timeout_ms!r} must be a positive number of milliseconds")
        resource.timeout = timeout_ms
    identity = _ask(resource, identity_query, name).strip() if identity_query else None
    values = np.array(take_with_progress(
        lambda i: _number(_ask(resource, query, name), query, name, i), int(n), progress),
        dtype=np.float64)
    errors = _drain(resource, error_query, name) if error_query else ()
    timeout = getattr(resource, "timeout", None)
    return values, InstrumentReading(
        name, identity, query, None if timeout is None else float(timeout), errors
    )


def _ask(resource: Any, command: str, name: str) -> str:
    try:
        answer = resource.query(command)
    except Exception as exc:  # a VISA stack's own errors (pyvisa.errors.VisaIOError, ...)
        if type(exc).__name__ == "VisaIOError" and "TMO" in str(exc):
            timeout = getattr(resource, "timeout", None)
            raise TrialError(
                f"instrument {name} did not answer {command!r} within its timeout "
                f"({timeout} ms): check the command, the cabling and the termination, or "
                "give a longer timeout= (milliseconds)"
            ) from exc
        raise TrialError(f"instrument {name} failed on {command!r}: {exc}") from exc
    return str(answer)


def _number(answer: str, query: str, name: str, index: int) -> float:
    text = answer.strip()
    try:
        value = float(text)
    except ValueError:
        raise TrialError(
            f"instrument {name} answered {text!r} to {query!r} (reading {index}), which is not "
            "a number; check the range (an overload reads as text on many meters) and the query"
        ) from None
    if not math.isfinite(value):
        raise TrialError(
            f"instrument {name} answered {text!r} to {query!r} (reading {index}), which is not "
            "a finite number"
        )
    return value


def _drain(resource: Any, error_query: str, name: str) -> tuple[str, ...]:
    errors: list[str] = []
    for _ in range(MAX_ERRORS):
        entry = _ask(resource, error_query, name).strip()
        if _NO_ERROR.match(entry):
            return tuple(errors)
        errors.append(entry)
    raise TrialError(
        f"instrument {name} still reported errors after {MAX_ERRORS} reads of {error_query!r} "
        f"(first: {errors[0]!r}); clear it (*CLS) and check the setup"
    )
