import datetime as dt

import pytest
from hypothesis import given
from hypothesis import strategies as st

from fleet.calc.exposure import (
    immersed_days,
    immersed_days_at_each,
    immersed_days_at_each_seconds,
    overlap_days,
)


def t(*args: int) -> dt.datetime:
    return dt.datetime(*args, tzinfo=dt.UTC)


# Definitions: immersed time is the length of the deployment intervals before the moment.
# common practice, no published source (an anode only wears in the water)
@pytest.mark.parametrize(
    ("intervals", "at", "expected"),
    [
        ([], t(2025, 6, 1), 0.0),
        ([(t(2025, 1, 1), t(2025, 4, 11))], t(2025, 6, 11), 100.0),
        ([(t(2025, 1, 1), t(2025, 4, 11)), (t(2025, 6, 1), None)], t(2025, 6, 11), 110.0),
        ([(t(2025, 1, 1), t(2025, 4, 11))], t(2025, 1, 11), 10.0),  # asked mid-deployment
        ([(t(2025, 1, 1), None)], t(2024, 12, 1), 0.0),  # before the first deployment
        ([(t(2025, 1, 1, 12), t(2025, 1, 2))], t(2025, 2, 1), 0.5),
    ],
)
def test_it_sums_deployment_intervals(intervals, at, expected):
    assert immersed_days(intervals, at) == pytest.approx(expected)


def test_it_rejects_overlapping_deployments():
    with pytest.raises(ValueError, match="over_side_at .* overlaps"):
        immersed_days([(t(2025, 1, 1), t(2025, 3, 1)), (t(2025, 2, 1), None)], t(2025, 6, 1))


def test_it_rejects_recovery_before_over_the_side():
    with pytest.raises(ValueError, match="recovered_at must be on or after"):
        immersed_days([(t(2025, 3, 1), t(2025, 1, 1))], t(2025, 6, 1))


def test_it_rejects_naive_datetimes():
    with pytest.raises(ValueError, match="at must be timezone-aware"):
        immersed_days([], dt.datetime(2025, 1, 1))  # noqa: DTZ001


def test_overlap_counts_only_the_shared_part():
    assert overlap_days(t(2025, 1, 1), t(2025, 3, 1), t(2025, 2, 1), t(2025, 12, 1)) == 28.0
    assert overlap_days(t(2025, 1, 1), t(2025, 2, 1), t(2025, 3, 1), t(2025, 4, 1)) == 0.0


@given(st.integers(0, 4000), st.integers(0, 4000))
def test_immersed_days_never_decrease_with_time(a, b):
    intervals = [(t(2020, 1, 1), t(2021, 1, 1)), (t(2022, 1, 1), None)]
    early, late = sorted((a, b))
    base = t(2020, 1, 1)
    assert immersed_days(intervals, base + dt.timedelta(days=early)) <= immersed_days(
        intervals, base + dt.timedelta(days=late)
    )


def _intervals(gaps, open_last) -> list[tuple[dt.datetime, dt.datetime | None]]:
    """Deployments from (dry hours, wet hours) pairs from 2025-01-01; the last left open."""
    intervals: list[tuple[dt.datetime, dt.datetime | None]] = []
    at = t(2025, 1, 1)
    for dry_h, wet_h in gaps:
        start = at + dt.timedelta(hours=dry_h)
        at = start + dt.timedelta(hours=wet_h)
        intervals.append((start, at))
    if open_last and intervals:
        intervals[-1] = (intervals[-1][0], None)
    return intervals


# One pass over many moments: the same float as asking for each moment alone (the definition
# above; common practice, no published source).
@given(
    gaps=st.lists(st.tuples(st.integers(1, 90 * 24), st.integers(0, 90 * 24)), max_size=12),
    open_last=st.booleans(),
    moments=st.lists(st.integers(-30 * 24, 3000 * 24), max_size=20),
)
def test_it_gives_each_moment_the_same_days_as_one_at_a_time(gaps, open_last, moments):
    intervals = _intervals(gaps, open_last)
    asked = [t(2025, 1, 1) + dt.timedelta(hours=h) for h in moments]
    shuffled = intervals[::-1]  # the order given does not matter
    assert immersed_days_at_each(shuffled, asked) == [immersed_days(intervals, m) for m in asked]


def test_it_gives_the_worked_example_for_each_moment():
    intervals = [(t(2025, 1, 1), t(2025, 4, 11)), (t(2025, 6, 1), None)]
    assert immersed_days_at_each(intervals, [t(2025, 3, 2), t(2025, 6, 11)]) == [60.0, 110.0]


def test_it_rejects_overlaps_when_asked_for_many_moments():
    with pytest.raises(ValueError, match="over_side_at .* overlaps"):
        immersed_days_at_each([(t(2025, 1, 1), None), (t(2025, 2, 1), None)], [t(2025, 6, 1)])


# The same days from epoch seconds, for the chart (the definition above, with Python's
# datetime.timestamp() giving the seconds; common practice, no published source).
@given(
    gaps=st.lists(st.tuples(st.integers(1, 90 * 24), st.integers(0, 90 * 24)), max_size=12),
    open_last=st.booleans(),
    moments=st.lists(st.integers(-30 * 24, 3000 * 24), max_size=20),
)
def test_it_gives_the_same_days_from_epoch_seconds(gaps, open_last, moments):
    intervals = _intervals(gaps, open_last)
    asked = [t(2025, 1, 1) + dt.timedelta(hours=h) for h in moments]
    seconds = [(s.timestamp(), e.timestamp() if e else None) for s, e in intervals[::-1]]
    got = immersed_days_at_each_seconds(seconds, [m.timestamp() for m in asked])
    assert got == pytest.approx([immersed_days(intervals, m) for m in asked], abs=1e-9)


def test_it_gives_the_worked_example_from_epoch_seconds():
    # 2025-01-01, 2025-04-11, 2025-06-01 (UTC) as Unix seconds, from Python's datetime.
    spans = [(1735689600.0, 1744329600.0), (1748736000.0, None)]
    march_2, june_11 = 1740873600.0, 1749600000.0
    assert immersed_days_at_each_seconds(spans, [march_2, june_11]) == [60.0, 110.0]
    with pytest.raises(ValueError, match="overlaps"):
        immersed_days_at_each_seconds([(0.0, None), (86400.0, None)], [1e6])
    with pytest.raises(ValueError, match="finite"):
        immersed_days_at_each_seconds([(float("nan"), None)], [1e6])
