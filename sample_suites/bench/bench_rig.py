"""An invented end-of-line test bench for the Heron VD-2 valve-driver board.

The bench has a loop calibrator on the board's 4-20 mA output, a thermocouple reader on the
heater plate and a logging voltmeter on the 5 V rail. Live readings come from simulated
instruments (seeded noise); earlier runs were saved as logs under ``logs/``.
"""

from __future__ import annotations

from pathlib import Path

import numpy as np
from meanband import InstrumentUncertainty

LOGS = Path(__file__).parent / "logs"

#: The loop calibrator's certificate: expanded uncertainty 0.006 mA at k = 2, so u = 0.003 mA
#: (invented figures for the demo).
LOOP_CALIBRATOR = InstrumentUncertainty.from_certificate(0.006, 2.0)
#: The thermocouple reader's datasheet: +/-0.15 degC, nothing more known (rectangular).
PLATE_READER = InstrumentUncertainty.from_limits(0.15)
#: The rail voltmeter: u = 2 mV, judged reliable to about 25 % (so 8 degrees of freedom).
RAIL_METER = InstrumentUncertainty.with_reliability(0.002, 0.25)
#: A hand-held meter borrowed from another station: u = 0.02 mA.
HANDHELD_METER = InstrumentUncertainty(0.02)


class LoopCalibrator:
    """A simulated loop calibrator reading a board's output current, in mA."""

    def __init__(self, true_ma: float, noise_ma: float = 0.004, seed: int = 7) -> None:
        self.true_ma = true_ma
        self.noise_ma = noise_ma
        self._rng = np.random.default_rng(seed)

    def read_ma(self) -> float:
        """One reading: the board's true output plus the calibrator's reading noise."""
        return float(self.true_ma + self._rng.normal(0.0, self.noise_ma))
