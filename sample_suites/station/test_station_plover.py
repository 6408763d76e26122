"""End-of-line gates of the Plover PSU-3 power module on an invented production test station.

The meter is read over VISA (a simulated instrument here); its calibration record, the decision
rule, the producer's and consumer's risk for the process, and the test uncertainty ratio all go
into the record of each unit. A passing gate is a statistical statement about the measured mean,
not a safety or compliance certificate; local codes and licensed practice decide acceptance. The
UNDECIDED gate is marked xfail so that the demo exits 0 while its message still shows.
"""

import pytest
from station import METER_10V, METER_RAIL, REFERENCE_PROCESS, open_meter


@pytest.fixture(scope="module")
def meter():
    resource = open_meter()
    yield resource
    resource.close()


def test_reference_output_10v(trials, meter):
    """PASS, guarded acceptance (w = U), with the rule's risks for this process."""
    trials.sample(meter, query="MEAS:VOLT:DC? 10", n=30, unit="V", timeout=2000)
    trials.check(center=10.0, tolerance=0.005, instrument_uncertainty=METER_10V,
                 process=REFERENCE_PROCESS)


def test_rail_3v3_specific_risk(trials, meter):
    """PASS: a guard band chosen for a specific false-accept risk of at most 1 %."""
    trials.sample(meter, query="MEAS:VOLT:DC? 3.3", n=30, unit="V")
    trials.check(center=3.3, tolerance=0.012, instrument_uncertainty=METER_RAIL,
                 rule="specific-risk:0.01")


@pytest.mark.xfail(reason="demo: the 1.8 V rail sits on its upper limit", strict=True)
def test_rail_1v8_on_its_limit(trials, meter):
    """UNDECIDED: the mean sits on the upper limit, within the guard band on either side: one of
    ILAC-G8's conditional statements, as the failure message says."""
    trials.sample(meter, query="MEAS:VOLT:DC? 1.8", n=20, unit="V")
    trials.check(center=1.8, tolerance=0.025, instrument_uncertainty=METER_RAIL,
                 rule="guarded:1")
