"""What a failing check looks like. `make demo` runs this file on its own, expects it to fail
(exit status 1) and carries on: the failure block below the test's own line is what a user of
meanband reads when the data prove a unit out of band.

Invented scenario: the cold-store probe of a ferry's galley, read 24 times after the door
was left open; its mean must stay within 3.0 +/- 1.0 degC.
"""

from __future__ import annotations

# Invented readings (degC), rising as the store warms.
PROBE = [4.61, 4.58, 4.70, 4.66, 4.72, 4.69, 4.75, 4.80, 4.77, 4.83, 4.79, 4.86,
         4.90, 4.84, 4.93, 4.88, 4.95, 4.99, 4.92, 5.01, 4.97, 5.04, 5.00, 5.06]


def test_galley_cold_store_after_the_door_was_left_open(trials):
    trials.extend(PROBE, unit="degC")
    trials.check(center=3.0, tolerance=1.0)
