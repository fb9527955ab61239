"""The unit page's charts, built from the fleet.due.history dataclasses outside the views.
Expected coordinates worked by hand from the plot box: x from 56 to 624 px, y from 28 px
(top of scale) to 220 px (bottom)."""

import datetime as dt

from fleet.charts import anode_chart_svg, battery_chart_svg
from fleet.due.history import AnodeHistory, BatteryHistory

TODAY = dt.date(2026, 4, 1)


def test_the_anode_threshold_runs_from_the_first_reading_to_today():
    history = AnodeHistory(
        name="Anode 1",
        readings=((dt.date(2025, 1, 1), 100.0), (dt.date(2025, 9, 1), 80.0)),
        fitted=(),
        projection=(),
        threshold_percent=40.0,
    )
    svg = anode_chart_svg(history, serial="TX-0001", today=TODAY)
    assert "<title>TX-0001: anode Anode 1</title>" in svg
    # 40 % of a 0-100 % scale: 28 + 192 * (1 - 0.40) = 143.2 px; first reading at the left
    # edge, today at the right edge.
    assert '<polyline points="56.0,143.2 624.0,143.2"' in svg
    assert "replace at 40 %" in svg
    # The readings are markers only: 100 % at the top of the scale, on the left edge.
    assert '<circle cx="56.0" cy="28.0"' in svg


def test_an_anode_with_no_readings_draws_no_threshold():
    history = AnodeHistory("Anode 2", (), (), (), 40.0)
    svg = anode_chart_svg(history, serial="TX-0001", today=TODAY)
    assert "No data to draw yet." in svg
    assert "replace at" not in svg


def test_a_unit_without_a_pack_gets_an_empty_battery_chart():
    svg = battery_chart_svg(None, serial="TX-0001", today=TODAY)
    assert "<title>TX-0001: battery charge</title>" in svg
    assert "No data to draw yet." in svg


def test_the_battery_scale_tops_out_five_percent_above_the_usable_charge():
    history = BatteryHistory(
        used=((dt.date(2025, 4, 1), 20.0), (TODAY, 12.0)),
        projection=((TODAY, 12.0), (dt.date(2027, 4, 1), 2.0)),
        reserve_ah=2.0,
        usable_ah=20.0,
    )
    svg = battery_chart_svg(history, serial="TX-0001", today=TODAY)
    # Scale 0 to 21 Ah (20 * 1.05) in five steps: the top tick reads 21.
    assert '<text x="50" y="32.0" text-anchor="end">21</text>' in svg
    # The reserve, 2 Ah: 28 + 192 * (1 - 2/21) = 201.7 px, across the whole span.
    assert '<polyline points="56.0,201.7 624.0,201.7"' in svg


def test_a_hostile_position_name_is_escaped():
    history = AnodeHistory("<A & B>", ((TODAY, 90.0),), (), (), 40.0)
    svg = anode_chart_svg(history, serial="TX-0001", today=TODAY)
    assert "anode &lt;A &amp; B&gt;" in svg
    assert "<A & B>" not in svg
