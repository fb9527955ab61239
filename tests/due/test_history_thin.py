"""The anode chart draws a bounded number of readings and says so."""

import datetime as dt
import random

from fleet.charts import anode_chart_svg
from fleet.due.history import RECENT_READINGS, AnodeHistory, thin_readings


def _history(n, seed=5):
    rng = random.Random(seed)
    day = dt.date(2010, 1, 1)
    points = []
    for _ in range(n):
        day += dt.timedelta(days=rng.randint(1, 4))
        points.append((day.year, rng.uniform(10.0, 100.0), rng.random() < 0.01))
    return points


def test_a_short_history_is_drawn_in_full():
    points = _history(RECENT_READINGS - 1)
    assert thin_readings(points) == list(range(len(points)))


def test_a_long_history_keeps_the_newest_in_full_and_each_years_extremes_and_replacements():
    # The thinning rule is ours (common practice, no published source).
    points = _history(5000)
    kept = thin_readings(points)
    assert kept == sorted(set(kept))
    assert set(range(5000 - RECENT_READINGS, 5000)) <= set(kept)
    older = range(5000 - RECENT_READINGS)
    assert {i for i in older if points[i][2]} <= set(kept)
    for year in {points[i][0] for i in older}:
        in_year = [i for i in older if points[i][0] == year]
        values = {points[i][1] for i in kept if i in set(in_year)}
        assert min(points[i][1] for i in in_year) in values
        assert max(points[i][1] for i in in_year) in values
        assert in_year[0] in kept and in_year[-1] in kept
    # Bounded: the newest in full, four a year before them, and the replacements.
    years = len({points[i][0] for i in older})
    replacements = sum(1 for i in older if points[i][2])
    assert len(kept) <= RECENT_READINGS + 4 * years + replacements
    assert len(kept) < 400


def test_the_chart_states_what_it_draws():
    note = "120 of 5,000 readings drawn: the newest 100 in full"
    history = AnodeHistory("Anode 1", ((dt.date(2026, 1, 1), 80.0),), (), (), 40.0, note)
    svg = anode_chart_svg(history, serial="TX-1", today=dt.date(2026, 2, 1))
    assert note in svg
    plain = AnodeHistory("Anode 1", ((dt.date(2026, 1, 1), 80.0),), (), (), 40.0)
    assert "readings drawn" not in anode_chart_svg(plain, serial="TX-1", today=dt.date(2026, 2, 1))


def test_of_equal_extremes_in_a_year_the_first_is_drawn():
    # Level readings all year: its first and last stand for its lowest and highest too.
    older = [(2020, 50.0, False)] * 50
    newest = [(2021, 40.0, False)] * RECENT_READINGS
    assert thin_readings(older + newest) == [0, 49, *range(50, 50 + RECENT_READINGS)]
    # A lowest that comes twice: the first of the two.
    dips = [(2020, 60.0, False), (2020, 30.0, False), (2020, 30.0, False), (2020, 60.0, False)]
    assert thin_readings(dips + newest)[:3] == [0, 1, 3]
