"""A seal position's gland, checked against its AS568 ring (``fleet.calc.seals``).

1. No gland kind or no AS568 dash number: nothing to check (``gland_report`` gives None).
2. The ring comes from SAE AS568 Table 1 by its dash number.
3. A static radial gland (ring on the groove bottom, squeezed by the bore) is checked with
   ``gland_check_radial`` against ``STATIC_RADIAL_BANDS``; a static face gland with
   ``gland_check_face`` against ``STATIC_FACE_BANDS``. The bands are common practice.
4. Each figure (squeeze, stretch, fill) gets a verdict: fail outside its band, check
   (advisory) where the calc module adds a note, pass otherwise.

Example: AS568-240 (ID 94.84 mm, CS 3.53 mm) in a 101.60 mm bore on a 95.96 mm groove
4.75 mm wide: squeeze 20.1 % (15–30 %), stretch 1.18 % (0–5 %), fill 73.1 % (≤ 85 %): pass.
"""

from __future__ import annotations

from dataclasses import dataclass

from fleet.calc import seals
from fleet.models import GlandKind, SealPosition

from .readiness import Verdict

# The field each figure is set by, for a form to hang its message on.
SQUEEZE_FIELD = {GlandKind.RADIAL: "groove_diameter_mm", GlandKind.FACE: "groove_depth_mm"}
STRETCH_FIELD = "groove_diameter_mm"
FILL_FIELD = "groove_width_mm"


@dataclass(frozen=True, slots=True)
class GlandFigure:
    name: str  # "squeeze", "stretch", "gland fill"
    percent: float
    accepted: str  # the acceptable range as printed, e.g. "15–30 % (preferred up to 25 %)"
    verdict: Verdict
    field: str  # the form field that sets it


@dataclass(frozen=True, slots=True)
class GlandReport:
    ring: str  # "AS568-240, ID 94.84 mm × CS 3.53 mm"
    kind: GlandKind
    figures: tuple[GlandFigure, ...]
    check: seals.GlandCheck

    @property
    def passed(self) -> bool:
        return self.check.passed

    @property
    def verdict(self) -> Verdict:
        return min((f.verdict for f in self.figures), key=lambda v: v.rank)

    def _figure(self, name: str) -> GlandFigure | None:
        return next((f for f in self.figures if f.name == name), None)

    @property
    def squeeze(self) -> GlandFigure | None:
        return self._figure("squeeze")

    @property
    def stretch(self) -> GlandFigure | None:
        """None for a face seal."""
        return self._figure("stretch")

    @property
    def fill(self) -> GlandFigure | None:
        return self._figure("gland fill")


SOURCES = (
    f"Ring sizes: {seals.SIZE_SOURCE}.",
    f"Squeeze, stretch and fill: {seals.GEOMETRY_SOURCE}.",
    f"Acceptable ranges: {seals.BANDS_SOURCE} (fleet/calc/seals.py, GlandBands).",
)


def _verdict(name: str, check: seals.GlandCheck) -> Verdict:
    if any(r.startswith(name) for r in check.reasons):
        return Verdict.FAIL
    if any(n.startswith(name) for n in check.notes):
        return Verdict.WARN
    return Verdict.PASS


def check_gland(
    *,
    dash: str,
    kind: GlandKind,
    bore_diameter_mm: float | None = None,
    groove_diameter_mm: float | None = None,
    groove_depth_mm: float | None = None,
    groove_width_mm: float,
) -> GlandReport:
    """The gland as entered against its ring. ``ValueError`` (naming the argument) when the
    ring is not an AS568 size or the geometry is impossible (groove not inside the bore)."""
    ring = seals.as568(dash)
    if kind == GlandKind.RADIAL:
        if bore_diameter_mm is None or groove_diameter_mm is None:
            raise ValueError("bore_diameter_mm and groove_diameter_mm are needed, got None")
        bands = seals.STATIC_RADIAL_BANDS
        check = seals.gland_check_radial(
            ring, bore_diameter_mm, groove_diameter_mm, groove_width_mm, bands
        )
    else:
        if groove_depth_mm is None:
            raise ValueError("groove_depth_mm is needed, got None")
        bands = seals.STATIC_FACE_BANDS
        check = seals.gland_check_face(ring, groove_depth_mm, groove_width_mm, bands)
    preferred = (
        f" (preferred up to {bands.squeeze_preferred_max_percent:g} %)"
        if bands.squeeze_preferred_max_percent < bands.squeeze_max_percent
        else ""
    )
    figures = [
        GlandFigure(
            "squeeze",
            check.squeeze_percent,
            f"{bands.squeeze_min_percent:g}–{bands.squeeze_max_percent:g} %{preferred}",
            _verdict("squeeze", check),
            SQUEEZE_FIELD[kind],
        )
    ]
    if check.stretch_percent is not None:
        figures.append(
            GlandFigure(
                "stretch",
                check.stretch_percent,
                f"0–{bands.stretch_max_percent:g} % "
                f"(preferred from {bands.stretch_preferred_min_percent:g} %)",
                _verdict("stretch", check),
                STRETCH_FIELD,
            )
        )
    figures.append(
        GlandFigure(
            "gland fill",
            check.fill_percent,
            f"up to {bands.fill_max_percent:g} %",
            _verdict("gland fill", check),
            FILL_FIELD,
        )
    )
    label = (
        f"{ring.designation}, ID {ring.inner_diameter_mm:.2f} mm × "
        f"CS {ring.cross_section_mm:.2f} mm"
    )
    return GlandReport(label, kind, tuple(figures), check)


def gland_report(position: SealPosition) -> GlandReport | None:
    """The stored position's gland check; None when it has no gland or no AS568 size."""
    if not position.gland_kind or not position.as568_dash or position.groove_width_mm is None:
        return None
    try:
        return check_gland(
            dash=position.as568_dash,
            kind=GlandKind(position.gland_kind),
            bore_diameter_mm=position.bore_diameter_mm,
            groove_diameter_mm=position.groove_diameter_mm,
            groove_depth_mm=position.groove_depth_mm,
            groove_width_mm=position.groove_width_mm,
        )
    except ValueError:
        return None  # the model's clean() refuses such a gland; an old row shows no figures
