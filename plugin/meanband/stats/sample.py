"""Turn user input into a clean float64 sample, and its location and scale, stably."""

from __future__ import annotations

import dataclasses
import math
import numbers
from collections.abc import Iterable, Mapping, Sequence

import numpy as np

from meanband.errors import TrialError, hide_plugin_frames

__all__ = [
    "ArrayEquality",
    "as_sample",
    "check_confidence",
    "check_probability",
    "deviations",
    "location_scale",
    "sum_of_products",
]
__tracebackhide__ = hide_plugin_frames  # a failing test shows its own line, not ours

_MAX_LISTED_POSITIONS = 8


def as_sample(values: Iterable[float] | np.ndarray, *, minimum: int = 2) -> np.ndarray:
    """Return ``values`` as a 1-D float64 array, refusing NaN, infinities and too few values."""
    if isinstance(values, np.ma.MaskedArray):
        values = values.compressed()  # the mask says which values are not trials: honour it
    elif isinstance(values, Iterable) and not (
        isinstance(values, Sequence) or hasattr(values, "__array__")
    ):
        values = list(values)  # generators, map objects, dict views: numpy cannot read them
    _refuse_non_numbers(values)
    try:
        x = np.asarray(values, dtype=np.float64)
    except (TypeError, ValueError) as exc:
        raise TrialError(f"trials must be numbers; could not convert them: {exc}") from exc
    if x.ndim == 0:
        x = x.reshape(1)
    if x.ndim != 1:
        raise TrialError(f"trials must be a flat sequence of numbers, got an array of shape {x.shape}")
    bad = ~np.isfinite(x)
    if bad.any():
        positions = np.flatnonzero(bad)
        shown = ", ".join(str(int(p)) for p in positions[:_MAX_LISTED_POSITIONS])
        more = f" and {positions.size - _MAX_LISTED_POSITIONS} more" if positions.size > 8 else ""
        raise TrialError(
            f"{positions.size} of {x.size} trials are NaN or infinite (0-based positions {shown}{more}); "
            "drop or re-measure them before computing an interval"
        )
    if x.size < minimum:
        raise TrialError(
            f"an interval of the mean needs at least {minimum} trials, got {x.size}; "
            "collect more trials"
        )
    return x


def _refuse_non_numbers(values: object) -> None:
    """Only real numbers are trials: numeric strings, bools, dates and dicts are refused, since
    numpy would quietly read ``"1.5"`` as 1.5 and ``True`` as 1.0."""
    if isinstance(values, (str, bytes, Mapping)):
        raise TrialError(f"trials must be numbers, got a {type(values).__name__} ({values!r:.40}); "
                         "pass a list or array of numbers")
    if hasattr(values, "dtype"):
        kind = np.dtype(values.dtype).kind
        if kind in "iuf":
            return
        if kind != "O":
            raise TrialError(f"trials must be numbers (real ones), got an array of dtype "
                             f"{values.dtype}; convert them to float first")
        values = np.asarray(values).ravel().tolist()
    if not isinstance(values, (list, tuple)):
        return
    kinds = set(map(type, values))  # a handful of types, however many trials
    wrong = sorted(t.__name__ for t in kinds if issubclass(t, (bool, np.bool_))
                   or not issubclass(t, (numbers.Real, np.integer, np.floating, list, tuple)))
    if wrong:  # nested lists go on to numpy, which names their shape
        raise TrialError(f"trials must be numbers (real ones), got values of type {', '.join(wrong)}; "
                         "convert them to numbers first (a numeric string or a bool is not a "
                         "trial)")


def check_probability(value: object, what: str = "confidence") -> float:
    """Return ``value`` as a float strictly between 0 and 1, or raise naming ``what``.

    The one validator of levels and powers (confidence, power, test levels), so every one of
    them refuses the same values with the same words. ``"95%"`` and ``0.95`` are the same.
    """
    from meanband.units import read_fraction

    try:
        level, percent = read_fraction(value, what)
    except TrialError:
        raise TrialError(
            f"{what} must be a number between 0 and 1 (or a percentage such as '95%'), "
            f"got {value!r}"
        ) from None
    if not (0.0 < level < 1.0) or math.isnan(level):
        # A percentage such as 95 or 99.9 was meant as a fraction; 1.5 is no percentage of a
        # level anyone uses, and "0.015" would mislead.
        hint = (f"; did you mean {level / 100:g}? (or write '{level:g}%')"
                if not percent and 50.0 <= level < 100.0 else "")
        raise TrialError(f"{what} must lie strictly between 0 and 1, got {value!r}{hint}")
    return level


def check_confidence(confidence: float) -> float:
    """Return ``confidence`` as a float if it lies strictly between 0 and 1."""
    return check_probability(confidence, "confidence")


def location_scale(x: np.ndarray) -> tuple[float, float]:
    """Mean and sample standard deviation (n - 1 divisor), accurate under a large offset."""
    mean, sd, _ = deviations(x)
    return mean, sd


def deviations(x: np.ndarray) -> tuple[float, float, np.ndarray]:
    """Mean, sample standard deviation (n - 1 divisor) and the deviations ``x - mean``.

    The data are shifted by their first value before summing: values close to one another
    subtract exactly (Sterbenz's lemma), so the deviations that remain are small and the
    two-pass sum of squares keeps its digits (NIST StRD NumAcc3/NumAcc4 exist to catch this).
    One new array holds the deviations and is updated in place; callers may reuse it (diagnose
    standardises it in place), since it is theirs alone.
    """
    shift = x[0]
    d = x - shift
    mean_d = float(np.mean(d))
    d -= mean_d
    # Second-pass correction (Chan, Golub & LeVeque 1983): removes the rounding left in mean_d.
    correction = float(np.mean(d))
    mean_d += correction
    d -= correction
    n = x.size
    sd = _scaled_sd(d) if n > 1 else math.nan
    return float(shift + mean_d), sd, d


def _scaled_sd(d: np.ndarray) -> float:
    """sqrt(sum(d^2) / (n - 1)), scaled by max|d| before squaring, so deviations near 1e-300
    do not underflow to a zero spread and deviations near 1e300 do not overflow (the scaling
    of LAPACK's dnrm2, Blue 1978)."""
    scale = float(np.max(np.abs(d)))
    if scale == 0.0 or not math.isfinite(scale):
        return scale if math.isfinite(scale) else math.inf
    scaled = d / scale
    return scale * math.sqrt(sum_of_products(scaled, scaled) / (d.size - 1))


def sum_of_products(a: np.ndarray, b: np.ndarray) -> float:
    """sum(a * b), accurately and without a temporary the size of the data.

    Blocks of products go through numpy's pairwise summation and the block sums through
    math.fsum, so the rounding error stays near that of pairwise summation (Higham 1993).
    numpy.dot is avoided on purpose: it hands the work to a multithreaded BLAS whose threads
    are slow to start and stall on a busy CI machine, and whose summation order is unspecified.
    """
    n = a.size
    if n <= _BLOCK:
        return float(np.add.reduce(a * b))
    buffer = np.empty(_BLOCK, dtype=np.float64)
    partial = []
    for start in range(0, n, _BLOCK):  # a loop over blocks of 32768 values, not over trials
        stop = min(start + _BLOCK, n)
        block = np.multiply(a[start:stop], b[start:stop], out=buffer[: stop - start])
        partial.append(float(np.add.reduce(block)))
    return math.fsum(partial)


#: Values per block in sum_of_products: the buffer (256 KiB) stays in the CPU cache.
_BLOCK = 1 << 15


class ArrayEquality:
    """``==`` for frozen dataclasses that hold numpy arrays (declare them with ``eq=False``).

    The generated ``__eq__`` compares fields as tuples, which raises "the truth value of an
    array is ambiguous"; this one compares array fields element-wise (NaN equal to NaN) and the
    rest as usual. Instances stay unhashable, as mutable arrays make them.
    """

    __slots__ = ()
    __hash__ = None  # type: ignore[assignment]

    def __eq__(self, other: object) -> bool:
        if other.__class__ is not self.__class__:
            return NotImplemented
        for field in dataclasses.fields(self):  # type: ignore[arg-type]
            mine, theirs = getattr(self, field.name), getattr(other, field.name)
            if isinstance(mine, np.ndarray) or isinstance(theirs, np.ndarray):
                if not (isinstance(mine, np.ndarray) and isinstance(theirs, np.ndarray)):
                    return False
                if mine.shape != theirs.shape or not np.array_equal(
                    mine, theirs, equal_nan=mine.dtype.kind == "f"
                ):
                    return False
            elif mine != theirs:
                return False
        return True
