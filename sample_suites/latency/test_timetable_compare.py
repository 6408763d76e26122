"""In-run comparison on the invented ferry timetable: a binary search against the linear scan.

`trials.compare` times both in interleaved pairs, so a busy machine slows both alike; the check
is on the interval of their time ratio, not on either time alone.
"""

import bisect

from fares import timetable_search

DEPARTURES = list(range(300, 1380, 5))


def timetable_bisect(departures: list[int], earliest: int) -> int:
    """First departure at or after ``earliest``, by binary search on the sorted timetable."""
    i = bisect.bisect_left(departures, earliest)
    return departures[i] if i < len(departures) else -1


def test_binary_search_is_at_most_half_the_scan(trials):
    """PASS: the search for a late departure takes well under half the scan's time."""
    assert timetable_bisect(DEPARTURES, 1300) == timetable_search(DEPARTURES, 1300)
    trials.compare(
        lambda: timetable_bisect(DEPARTURES, 1300),
        lambda: timetable_search(DEPARTURES, 1300),
        at_most=0.5, n=40, name="bisect / scan",
    )
