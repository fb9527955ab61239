import django_tables2 as tables
from django.urls import reverse
from django.utils.html import format_html

from .due.condition import Condition
from .due.items import DueState, ItemKind
from .models import Deployment, Site, Transponder


def condition_badge(condition: Condition) -> str:
    """Word, shape and colour, so a black-and-white print still reads."""
    return format_html(
        '<span class="state state-{}"><span aria-hidden="true">{}</span> {}</span>',
        condition.value,
        condition.icon,
        condition.label,
    )


class UnitTable(tables.Table):
    serial = tables.Column(linkify=True)
    variant = tables.Column(accessor="variant__name", verbose_name="Variant")
    # Needs the list's queryset annotated with ``annotate_condition`` (one query for the page).
    condition = tables.Column(verbose_name="Condition", orderable=False)
    place = tables.Column(accessor="place__name", verbose_name="Place", default="—")
    acoustic_address = tables.Column(verbose_name="Address")
    turnaround_delay_ms = tables.Column(verbose_name="Turnaround (ms)")
    last_service = tables.DateTimeColumn(
        accessor="last_service", verbose_name="Last bench visit", format="Y-m-d", default="—"
    )

    class Meta:
        model = Transponder
        fields = (
            "serial",
            "variant",
            "condition",
            "place",
            "acoustic_address",
            "turnaround_delay_ms",
            "last_service",
        )
        order_by = "serial"
        attrs = {"class": "grid"}
        per_page = 50

    def render_condition(self, value: str) -> str:
        return condition_badge(Condition(value))

    def value_condition(self, value: str) -> str:
        return Condition(value).label


class DeploymentTable(tables.Table):
    unit = tables.Column(
        accessor="unit__serial",
        verbose_name="Unit",
        linkify=lambda record: record.unit.get_absolute_url(),
    )
    site = tables.Column(
        accessor="site__name",
        verbose_name="Site",
        linkify=lambda record: record.site.get_absolute_url(),
    )
    over_side_at = tables.DateTimeColumn(format="Y-m-d H:i", verbose_name="Over the side")
    recovered_at = tables.DateTimeColumn(
        format="Y-m-d H:i", verbose_name="Recovered", default="in the water"
    )
    planned_days = tables.Column(verbose_name="Planned days")
    planned_interrogations_per_day = tables.Column(verbose_name="Interrogations / day")
    replies_counted = tables.Column(verbose_name="Replies counted", default="—")
    actions = tables.TemplateColumn(
        template_name="fleet/partials/deployment_actions.html",
        orderable=False,
        verbose_name="",
        exclude_from_export=True,
    )

    class Meta:
        model = Deployment
        fields = (
            "unit",
            "site",
            "over_side_at",
            "recovered_at",
            "planned_days",
            "planned_interrogations_per_day",
            "replies_counted",
        )
        order_by = "-over_side_at"
        attrs = {"class": "grid"}
        per_page = 50


class SiteTable(tables.Table):
    name = tables.Column(linkify=True)
    latitude_deg = tables.Column(verbose_name="Latitude (°)")
    longitude_deg = tables.Column(verbose_name="Longitude (°)")
    water_depth_m = tables.Column(verbose_name="Depth (m)")
    bottom_temperature_c = tables.Column(verbose_name="Bottom temp. (°C)")
    practical_salinity = tables.Column(verbose_name="Salinity")

    class Meta:
        model = Site
        fields = (
            "name",
            "latitude_deg",
            "longitude_deg",
            "water_depth_m",
            "bottom_temperature_c",
            "practical_salinity",
        )
        attrs = {"class": "grid"}


class DueItemTable(tables.Table):
    """Stored due items (``fleet.due.store.due_queryset``): sorted and paged in SQL, so a page
    costs the same for thirty units or five thousand."""

    due_state = tables.Column(
        accessor="state_rank", verbose_name="State", order_by=("state_rank", "due_on")
    )
    serial = tables.Column(
        accessor="unit__serial",
        verbose_name="Unit",
        linkify=lambda record: reverse("unit-detail", args=[record.unit.serial]),
    )
    variant = tables.Column(accessor="unit__variant__name", verbose_name="Variant")
    place = tables.Column(accessor="unit__place__name", verbose_name="Place", default="—")
    # The item names its kind on screen; the export keeps the kind as a column to filter on.
    kind = tables.Column(verbose_name="Kind", visible=False)
    item = tables.Column(verbose_name="Item")
    due_on = tables.DateColumn(verbose_name="Due", format="Y-m-d", default="—")
    basis = tables.Column(verbose_name="Basis", orderable=False)
    flags = tables.Column(verbose_name="Flags", orderable=False, default="")

    class Meta:
        attrs = {"class": "grid due-list"}
        per_page = 100

    def render_due_state(self, value: int) -> str:
        state = DueState.from_rank(value)
        return format_html(
            '<span class="due due-{}"><span aria-hidden="true">{}</span> {}</span>',
            state.value,
            state.icon,
            state.label,
        )

    def value_due_state(self, value: int) -> str:
        return DueState.from_rank(value).label

    def render_kind(self, value: str) -> str:
        return ItemKind(value).label

    def value_kind(self, value: str) -> str:
        return ItemKind(value).label

    def render_flags(self, value: str) -> str:
        return "; ".join(value.splitlines())

    def value_flags(self, value: str) -> str:
        return "; ".join(value.splitlines())
