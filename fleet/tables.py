import datetime as dt
from typing import Any

import django_tables2 as tables
from django.core.paginator import Paginator
from django.db.models import F, QuerySet
from django.urls import reverse
from django.utils.formats import date_format
from django.utils.html import format_html
from django.utils.timezone import localtime

from .due.condition import Condition
from .due.items import DueState, ItemKind
from .exports import iso_timestamp
from .models import Deployment, ServiceRecord, Site, Transponder, UnitHold

# Cell classes (static/fleet/holdfast.css): a serial, date or address never breaks at its
# hyphen; a column a narrow screen can spare is hidden there; a long text in the due list
# goes under the row's other cells on a narrow screen.
NOWRAP = {"th": {"class": "nowrap"}, "td": {"class": "nowrap"}}
WIDE_ONLY = {"th": {"class": "wide-only"}, "td": {"class": "wide-only"}}
NOWRAP_WIDE_ONLY = {"th": {"class": "nowrap wide-only"}, "td": {"class": "nowrap wide-only"}}
STACK = {"th": {"class": "stack"}, "td": {"class": "stack"}}


class CountedPaginator(Paginator):  # type: ignore[type-arg]
    """A paginator told how many rows there are (read with the page's totals), so paging
    a table runs no count query of its own."""

    def __init__(self, object_list: Any, per_page: int, *, count: int, **kwargs: Any) -> None:
        super().__init__(object_list, per_page, **kwargs)
        self._known_count = count

    @property
    def count(self) -> int:
        return self._known_count


def condition_badge(condition: Condition) -> str:
    """Word, shape and colour, so a black-and-white print still reads."""
    return format_html(
        '<span class="state state-{}"><span aria-hidden="true">{}</span> {}</span>',
        condition.value,
        condition.icon,
        condition.label,
    )


class PickColumn(tables.CheckBoxColumn):
    """A tick per row, headed by a word rather than a tick-all box (which needs a script)."""

    @property
    def header(self) -> str:
        return "Label"


class UnitTable(tables.Table):
    # Ticks for the label sheet: each box belongs to the list page's label form by its id.
    pick = PickColumn(
        accessor="serial",
        attrs={"input": {"name": "unit", "form": "label-sheet"}},
        exclude_from_export=True,
    )
    serial = tables.Column(linkify=True, attrs=NOWRAP)
    variant = tables.Column(accessor="variant__name", verbose_name="Variant")
    # Needs the list's queryset annotated with ``annotate_condition`` (one query for the page).
    condition = tables.Column(verbose_name="Condition", orderable=False)
    place = tables.Column(accessor="place__name", verbose_name="Place", default="—")
    acoustic_address = tables.Column(verbose_name="Address", attrs=NOWRAP)
    turnaround_delay_ms = tables.Column(verbose_name="Turnaround (ms)", attrs=WIDE_ONLY)
    last_service = tables.DateTimeColumn(
        accessor="last_service",
        verbose_name="Last bench visit",
        format="Y-m-d",
        default="—",
        attrs=NOWRAP_WIDE_ONLY,
    )
    # Needs the queryset through ``fleet.selectors.with_next_due`` (subqueries, no query more).
    next_due_on = tables.DateColumn(
        verbose_name="Next due", format="Y-m-d", default="—", attrs=NOWRAP
    )
    next_due_item = tables.Column(
        verbose_name="Next due item", default="—", orderable=False, attrs=WIDE_ONLY
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
            "next_due_on",
            "next_due_item",
        )
        sequence = ("pick", "...")
        order_by = "serial"
        attrs = {"class": "grid"}
        per_page = 50

    def render_condition(self, value: str) -> str:
        return condition_badge(Condition(value))

    def value_last_service(self, value: dt.datetime | None) -> str:
        return iso_timestamp(value) if value else ""

    def value_condition(self, value: str) -> str:
        return Condition(value).label

    def order_next_due_on(
        self, queryset: QuerySet[Transponder], is_descending: bool
    ) -> tuple[QuerySet[Transponder], bool]:
        """Undated units last either way, then by serial, so pages do not shuffle."""
        due = F("next_due_on")
        first = due.desc(nulls_last=True) if is_descending else due.asc(nulls_last=True)
        return queryset.order_by(first, "serial"), True

    def value_next_due_on(self, value: dt.date | None) -> str:
        return value.isoformat() if value else ""

    def value_next_due_item(self, value: str | None) -> str:
        return value or ""


class DeploymentTable(tables.Table):
    unit = tables.Column(
        accessor="unit__serial",
        verbose_name="Unit",
        linkify=lambda record: record.unit.get_absolute_url(),
        attrs=NOWRAP,
    )
    site = tables.Column(
        accessor="site__name",
        verbose_name="Site",
        linkify=lambda record: record.site.get_absolute_url(),
    )
    over_side_at = tables.DateTimeColumn(
        format="Y-m-d H:i", verbose_name="Over the side", attrs=NOWRAP
    )
    # Not recovered: in the water, unless the unit is held as lost (then it is not in the
    # water as far as anyone knows, and there is nothing to recover).
    recovered_at = tables.Column(verbose_name="Recovered", empty_values=(), attrs=NOWRAP)
    # The export's word for where the deployment stands (the recovered column holds only
    # timestamps there).
    status = tables.Column(
        verbose_name="Status", accessor="recovered_at", empty_values=(), visible=False
    )
    planned_days = tables.Column(verbose_name="Planned days")
    planned_interrogations_per_day = tables.Column(
        verbose_name="Interrogations / day", attrs=WIDE_ONLY
    )
    replies_counted = tables.Column(verbose_name="Replies counted", default="—", attrs=WIDE_ONLY)
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
            "status",
        )
        order_by = "-over_side_at"
        attrs = {"class": "grid"}
        per_page = 50

    def value_over_side_at(self, value: dt.datetime) -> str:
        return iso_timestamp(value)

    def render_recovered_at(self, record: Deployment) -> str:
        if record.recovered_at is not None:
            return date_format(localtime(record.recovered_at), "Y-m-d H:i")
        return deployment_status(record)

    def value_recovered_at(self, record: Deployment) -> str:
        return iso_timestamp(record.recovered_at) if record.recovered_at else ""

    def render_status(self, record: Deployment) -> str:
        return deployment_status(record)

    def value_status(self, record: Deployment) -> str:
        return deployment_status(record)


def deployment_status(deployment: Deployment) -> str:
    """Recovered; else lost when the unit is held as lost (not in the water as far as anyone
    knows, and nothing to recover); else in the water."""
    if deployment.recovered_at is not None:
        return "recovered"
    if deployment.unit.hold == UnitHold.LOST:
        return "lost"
    return "in the water"


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
        attrs=NOWRAP,
    )
    variant = tables.Column(accessor="unit__variant__name", verbose_name="Variant", attrs=WIDE_ONLY)
    place = tables.Column(
        accessor="unit__place__name", verbose_name="Place", default="—", attrs=WIDE_ONLY
    )
    # The item names its kind on screen; the export keeps the kind as a column to filter on.
    kind = tables.Column(verbose_name="Kind", visible=False)
    item = tables.Column(verbose_name="Item")
    due_on = tables.DateColumn(verbose_name="Due", format="Y-m-d", default="—", attrs=NOWRAP)
    basis = tables.Column(verbose_name="Basis", orderable=False, attrs=STACK)
    # The view drops this column when no row of the list has a flag.
    flags = tables.Column(verbose_name="Flags", orderable=False, default="", attrs=STACK)

    class Meta:
        attrs = {"class": "grid due-list"}
        per_page = 100
        empty_text = "No maintenance item matches these filters."

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


class RecordTable(tables.Table):
    """The bench-visit list (``fleet.selectors.service_records_list``)."""

    opened_at = tables.DateTimeColumn(
        format="Y-m-d H:i", verbose_name="Opened", linkify=lambda record: record.get_absolute_url()
    )
    unit = tables.Column(
        accessor="unit__serial",
        verbose_name="Unit",
        linkify=lambda record: record.unit.get_absolute_url(),
    )
    technician = tables.Column(accessor="technician__username", verbose_name="Technician")
    place = tables.Column(accessor="place__name", verbose_name="Place")
    status = tables.Column(
        accessor="closed_at",
        verbose_name="Status",
        order_by=("closed_at", "-opened_at"),
        default="open",  # no closing time
    )
    closed_at = tables.DateTimeColumn(format="Y-m-d H:i", verbose_name="Closed", default="—")
    summary = tables.Column(verbose_name="Summary", orderable=False, default="")

    class Meta:
        model = ServiceRecord
        fields = ("opened_at", "unit", "technician", "place", "status", "closed_at", "summary")
        order_by = "-opened_at"
        attrs = {"class": "grid"}
        per_page = 50

    def render_status(self, value: dt.datetime) -> str:
        return "closed"

    def value_status(self, value: dt.datetime | None) -> str:
        return "closed" if value else "open"

    def render_technician(self, record: ServiceRecord) -> str:
        return record.technician.get_full_name() or record.technician.get_username()

    def render_summary(self, value: str) -> str:
        return value if len(value) <= 80 else value[:79] + "…"
