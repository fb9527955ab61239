"""fleet.due.glands: a seal position's gland checked against its AS568 ring, and the seal
position model's own checks of the gland sizes."""

import pytest
from django.core.exceptions import ValidationError

from fleet.due.glands import check_gland, gland_report
from fleet.due.readiness import Verdict
from fleet.models import GlandKind, SealPosition


def test_it_reproduces_the_worked_end_cap_gland():
    # Worked example, reference notes 2.2 (check case 25): AS568-240 (SAE AS568 Table 1: ID
    # 94.84 mm, CS 3.53 mm) in a 101.60 mm bore on a 95.96 mm groove 4.75 mm wide: depth
    # 2.82 mm, squeeze 20.1 %, stretch 1.18 %, fill 73.1 % (geometric definitions).
    report = check_gland(
        dash="240",
        kind=GlandKind.RADIAL,
        bore_diameter_mm=101.60,
        groove_diameter_mm=95.96,
        groove_width_mm=4.75,
    )
    assert report.ring == "AS568-240, ID 94.84 mm × CS 3.53 mm"
    assert report.squeeze is not None and report.stretch is not None and report.fill is not None
    assert report.squeeze.percent == pytest.approx(20.11, abs=0.01)
    assert report.stretch.percent == pytest.approx(1.18, abs=0.01)
    assert report.fill.percent == pytest.approx(73.06, abs=0.05)
    # Bands: common practice, no published source (fleet/calc/seals.py STATIC_RADIAL_BANDS).
    assert report.squeeze.accepted == "15–30 % (preferred up to 25 %)"
    assert report.stretch.accepted == "0–5 % (preferred from 1 %)"
    assert report.fill.accepted == "up to 85 %"
    assert report.passed and report.verdict == Verdict.PASS


def test_it_checks_a_face_gland_without_stretch():
    # Reference notes 2.2 worked example: the same ring in a 2.59 mm deep face groove
    # -> squeeze 26.6 %; face bands 20-30 % (common practice).
    report = check_gland(
        dash="AS568-240", kind=GlandKind.FACE, groove_depth_mm=2.59, groove_width_mm=4.75
    )
    assert report.squeeze is not None
    assert report.squeeze.percent == pytest.approx(26.6, abs=0.05)
    assert report.squeeze.accepted == "20–30 %"
    assert report.squeeze.field == "groove_depth_mm"
    assert report.stretch is None
    assert report.verdict == Verdict.PASS


@pytest.mark.parametrize(
    ("groove_dia", "width", "failing", "field"),
    [
        # depth (101.60 - 96.80) / 2 = 2.40 mm: squeeze (3.53 - 2.40) / 3.53 = 32 % > 30 %;
        # in a 5.20 mm wide groove the fill stays at 78 %
        (96.80, 5.20, "squeeze", "groove_diameter_mm"),
        # pi/4 x 3.53^2 / (2.82 x 3.60) = 96 % > 85 %
        (95.96, 3.60, "gland fill", "groove_width_mm"),
    ],
)
def test_it_names_the_failing_figure_and_the_field_that_sets_it(groove_dia, width, failing, field):
    report = check_gland(
        dash="240",
        kind=GlandKind.RADIAL,
        bore_diameter_mm=101.60,
        groove_diameter_mm=groove_dia,
        groove_width_mm=width,
    )
    failed = [f for f in report.figures if f.verdict == Verdict.FAIL]
    assert [(f.name, f.field) for f in failed] == [(failing, field)]
    assert report.verdict == Verdict.FAIL and not report.passed


def test_a_squeeze_above_the_preferred_limit_is_a_note_not_a_failure():
    # depth 2.59 mm in a radial gland: 26.6 % squeeze, above the preferred 25 % (common practice)
    report = check_gland(
        dash="240",
        kind=GlandKind.RADIAL,
        bore_diameter_mm=101.60,
        groove_diameter_mm=101.60 - 2 * 2.59,
        groove_width_mm=4.75,
    )
    assert report.squeeze is not None and report.squeeze.verdict == Verdict.WARN
    assert report.passed and report.verdict == Verdict.WARN


def test_a_position_without_a_gland_or_an_as568_size_has_no_report():
    assert gland_report(SealPosition(name="Cap", as568_dash="240")) is None
    metric = SealPosition(name="Cap", iso_inner_diameter_mm=50.0, iso_cross_section_mm=3.0)
    assert gland_report(metric) is None


def _position(**kwargs):
    kwargs.setdefault("name", "End cap")
    kwargs.setdefault("interval_months", 12)
    kwargs.setdefault("max_openings", 6)
    return SealPosition(**kwargs)


def _errors(position):
    with pytest.raises(ValidationError) as caught:
        position.clean()
    return caught.value.message_dict


def test_the_model_asks_for_every_size_its_gland_kind_needs():
    errors = _errors(_position(as568_dash="240", gland_kind="radial", bore_diameter_mm=101.6))
    assert set(errors) == {"groove_diameter_mm", "groove_width_mm"}


def test_the_model_refuses_sizes_the_gland_kind_does_not_use_or_no_kind():
    errors = _errors(
        _position(
            as568_dash="240",
            gland_kind="face",
            groove_depth_mm=2.6,
            groove_width_mm=4.75,
            bore_diameter_mm=101.6,
        )
    )
    assert errors == {"bore_diameter_mm": ["Not used by a face gland; leave it empty."]}
    errors = _errors(_position(as568_dash="240", groove_width_mm=4.75))
    assert errors == {"gland_kind": ["Say which kind of gland these sizes are."]}


def test_the_model_refuses_a_groove_outside_the_bore_and_an_unknown_size():
    errors = _errors(
        _position(
            as568_dash="240",
            gland_kind="radial",
            bore_diameter_mm=100.0,
            groove_diameter_mm=100.0,
            groove_width_mm=4.75,
        )
    )
    assert errors == {"groove_diameter_mm": ["The groove diameter must be smaller than the bore."]}
    errors = _errors(
        _position(as568_dash="999", gland_kind="face", groove_depth_mm=2.6, groove_width_mm=4.75)
    )
    assert errors == {"as568_dash": ["AS568-999 is not a size in SAE AS568 Table 1."]}


def test_the_model_wants_an_as568_size_for_a_gland():
    errors = _errors(
        _position(
            iso_inner_diameter_mm=50.0,
            iso_cross_section_mm=3.0,
            gland_kind="face",
            groove_depth_mm=2.3,
            groove_width_mm=4.0,
        )
    )
    assert "gland_kind" in errors
