"""An invented ferry-fare engine: the code whose speed the sample suite gates."""

from __future__ import annotations

import bisect

# Fare bands by crossing distance in nautical miles, with a surcharge per vehicle class.
DISTANCE_EDGES = [2.0, 5.0, 9.0, 14.0, 22.0, 35.0]
BASE_FARES = [4.10, 6.80, 9.40, 12.90, 17.50, 23.00, 31.00]
VEHICLE_SURCHARGE = {"foot": 0.0, "bicycle": 1.5, "car": 14.0, "van": 21.0, "coach": 55.0}


def quote_fare(distance_nm: float, vehicle: str, passengers: int) -> float:
    """Price one crossing: a distance band, a vehicle surcharge, and a per-head fare."""
    band = bisect.bisect_left(DISTANCE_EDGES, distance_nm)
    return round(BASE_FARES[band] * passengers + VEHICLE_SURCHARGE[vehicle], 2)


def timetable_search(departures: list[int], earliest: int) -> int:
    """First departure (minutes after midnight) at or after ``earliest``, by linear scan."""
    for minute in departures:
        if minute >= earliest:
            return minute
    return -1
