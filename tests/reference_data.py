"""Published reference data in tests/data, loaded the way the tests need it (see SOURCES.md)."""

from __future__ import annotations

from dataclasses import dataclass
from pathlib import Path

import numpy as np

DATA = Path(__file__).parent / "data"

#: The nine NIST StRD univariate data sets (tests/data/SOURCES.md, section 1).
STRD_NAMES = (
    "Lew",
    "Lottery",
    "Mavro",
    "Michelso",
    "NumAcc1",
    "NumAcc2",
    "NumAcc3",
    "NumAcc4",
    "PiDigits",
)

#: Relative tolerances for a float64 implementation, per data set, as SOURCES.md section 1
#: ("Notes for writing tests against these") suggests: (mean, s, r(1)). NumAcc3/NumAcc4 values
#: such as 10000000.1 are not representable as doubles, so about 8 digits of s (9.5 for
#: NumAcc3) are the best any float64 code can reach; r(1) keeps about 10.7 digits.
STRD_RTOL: dict[str, tuple[float, float, float]] = {
    "Lew": (1e-13, 1e-13, 1e-13),
    "Lottery": (1e-13, 1e-13, 1e-13),
    "PiDigits": (1e-13, 1e-13, 1e-13),
    "Mavro": (1e-12, 1e-12, 1e-12),
    "Michelso": (1e-12, 1e-12, 1e-12),
    "NumAcc1": (1e-14, 1e-14, 1e-14),
    "NumAcc2": (1e-14, 1e-14, 1e-14),
    "NumAcc3": (1e-14, 1e-8, 1e-10),
    "NumAcc4": (1e-14, 1e-8, 1e-10),
}

#: StRD files: 60 header lines, then the data (SOURCES.md, "Reproducing the checks").
STRD_HEADER_LINES = 60
#: e-Handbook Dataplot files (ZARR13, AUTO83B): 25 header lines.
HANDBOOK_HEADER_LINES = 25


@dataclass(frozen=True)
class Certified:
    """The certified values printed in an StRD file."""

    mean: float
    sd: float
    lag1: float
    n: int


def load_values(name: str) -> np.ndarray:
    """The values of ``<name>.txt``, one per line, as float64."""
    return np.loadtxt(DATA / f"{name}.txt", dtype=np.float64, ndmin=1)


def load_strd_dat(name: str) -> np.ndarray:
    """The data block of an StRD ``.dat`` file (after its 60-line header)."""
    return np.loadtxt(DATA / f"{name}.dat", dtype=np.float64, skiprows=STRD_HEADER_LINES, ndmin=1)


def strd_certified(name: str) -> Certified:
    """Certified mean, s and r(1) parsed from lines 41-43 of the StRD file, n from line 45.

    Lines look like ``Sample Mean   ybar:  -177.435000000000`` or ``...: 0.1 (exact)``.
    """
    lines = (DATA / f"{name}.dat").read_bytes().decode("ascii").splitlines()
    labels = ("Sample Mean", "Sample Standard Deviation", "Sample Autocorrelation Coefficient")
    values = []
    for line, label in zip(lines[40:43], labels, strict=True):
        if not line.startswith(label):
            raise AssertionError(f"{name}.dat: expected {label!r} on its line, got {line!r}")
        values.append(float(line.split(":", 1)[1].split()[0]))
    count_line = lines[44]
    if not count_line.startswith("Number of Observations:"):
        raise AssertionError(f"{name}.dat: expected the count on line 45, got {count_line!r}")
    return Certified(*values, n=int(count_line.split(":", 1)[1]))
