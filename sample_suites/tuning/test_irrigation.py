"""Tuning trial counts on an invented greenhouse irrigation controller.

`make tuning-demo` runs this suite three times over: with the team's first guess of trial counts
(first-guess.toml: 6 readings per probe, 200 timed trials for the planner), writing the plan
meanband suggests; then shows the plan; then runs again with it. The two probe checks are
UNDECIDED on 6 readings and decide with the planned counts; the planner's wide budget gets a
smaller count and the CI time it saves.

The probe checks are xfail(strict=False): the first run, with too few readings, still exits 0,
and in the second run they show as XPASS, with PASS in the meanband summary.
"""

import pytest
from irrigation import Probe, plan_watering

ZONES = [31.5, 29.8, 33.1, 30.2, 28.9, 32.4, 30.8, 31.1] * 6


@pytest.mark.xfail(reason="demo: 6 readings cannot decide; the plan asks for more", strict=False)
def test_root_zone_moisture(trials):
    """Soil moisture of the tomato beds must average between 30 and 34 %."""
    probe = Probe(mean=32.9, sd=0.8, seed=13)
    trials.sample(probe.read, unit="%")
    trials.check(30.0, 34.0)


@pytest.mark.xfail(reason="demo: 6 readings cannot decide; the plan asks for more", strict=False)
def test_drip_line_flow(trials):
    """Each drip emitter must deliver at least 1.9 L/h on average."""
    meter = Probe(mean=2.0, sd=0.12, seed=2)
    trials.sample(meter.read, unit="L/h")
    trials.check(low=1.9)


def test_watering_plan_latency(trials):
    """The nightly planner must average under 50 ms for 48 zones: a wide margin."""
    trials.time(plan_watering, ZONES)
    trials.check(high="50ms")
