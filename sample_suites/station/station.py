"""The invented end-of-line station for the Plover PSU-3 power module: its meter and records."""

from __future__ import annotations

from pathlib import Path

import pyvisa
from meanband import Calibration, InstrumentUncertainty

HERE = Path(__file__).parent

#: The station meter's certificate: U = 0.6 mV at k = 2 on the 10 V range, due next spring.
METER_10V = InstrumentUncertainty.from_certificate(
    0.0006, 2.0,
    calibration=Calibration("KM-8846 SN2291", "PLV-CAL-2026-0311", calibrated="2026-03-11",
                            due="2027-03-11"),
)
#: The same meter on the 3.3 V rail, from its datasheet accuracy (rectangular, u = a / sqrt 3).
METER_RAIL = InstrumentUncertainty.from_limits(
    0.0012, calibration=Calibration("KM-8846 SN2291", "PLV-CAL-2026-0311", due="2027-03-11"),
)
#: The production spread of the 10 V reference across units (from the capability study).
REFERENCE_PROCESS = (10.0015, 0.0012)


def open_meter() -> pyvisa.resources.MessageBasedResource:
    """The station meter through the VISA stack (simulated here by pyvisa-sim)."""
    manager = pyvisa.ResourceManager(f"{HERE / 'station_dmm.yaml'}@sim")
    return manager.open_resource("ASRL3::INSTR", read_termination="\n", write_termination="\n")
