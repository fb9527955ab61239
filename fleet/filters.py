from typing import TYPE_CHECKING, Any, cast

import django_filters
from django import forms
from django.contrib.auth import get_user_model
from django.db.models import Q, QuerySet
from django.utils import timezone

from .due.condition import Condition, annotate_condition
from .forms import DateInput
from .models import Place, ServiceRecord, Transponder, Variant

if TYPE_CHECKING:
    from django_stubs_ext import WithAnnotations

    from .due.condition import ConditionColumn


class UnitFilter(django_filters.FilterSet):
    q = django_filters.CharFilter(method="search", label="Search")
    condition = django_filters.ChoiceFilter(
        choices=Condition.choices(),
        empty_label="Any condition",
        method="by_condition",
        label="Condition",
    )
    place = django_filters.ModelChoiceFilter(queryset=Place.objects.all(), empty_label="Any place")
    variant = django_filters.ModelChoiceFilter(
        queryset=Variant.objects.all(), empty_label="Any variant"
    )

    class Meta:
        model = Transponder
        fields = ["q", "condition", "place", "variant"]

    def search(
        self, queryset: QuerySet[Transponder], name: str, value: str
    ) -> QuerySet[Transponder]:
        value = value.strip()
        if not value:
            return queryset
        return queryset.filter(
            Q(serial__icontains=value)
            | Q(acoustic_address__iexact=value)
            | Q(notes__icontains=value)
            | Q(variant__name__icontains=value)
        )

    def by_condition(
        self, queryset: QuerySet[Transponder], name: str, value: str
    ) -> QuerySet[Transponder]:
        """In SQL, on the ``condition`` annotation (added for today if the view did not)."""
        if "condition" in queryset.query.annotations:
            # The view annotated it already, which the checker cannot see.
            annotated = cast("QuerySet[WithAnnotations[Transponder, ConditionColumn]]", queryset)
        else:
            annotated = annotate_condition(queryset, timezone.localdate())
        return annotated.filter(condition=value)


class RecordFilterForm(forms.Form):
    def clean(self) -> dict[str, object] | None:
        cleaned = super().clean()
        start, end = self.cleaned_data.get("opened_from"), self.cleaned_data.get("opened_to")
        if start and end and end < start:
            self.add_error("opened_to", f"Choose a day on or after {start:%Y-%m-%d}.")
        return cleaned


def _technicians(request: object) -> QuerySet[Any]:
    """People who have worked at least one bench visit, by user name."""
    return (
        get_user_model()
        .objects.filter(pk__in=ServiceRecord.objects.values("technician_id"))
        .order_by("username")
    )


class RecordFilter(django_filters.FilterSet):
    unit = django_filters.CharFilter(
        field_name="unit__serial", lookup_expr="iexact", label="Unit serial", max_length=31
    )
    technician = django_filters.ModelChoiceFilter(
        queryset=_technicians, empty_label="Any technician"
    )
    status = django_filters.ChoiceFilter(
        choices=[("open", "Open"), ("closed", "Closed")],
        empty_label="Open or closed",
        method="by_status",
        label="Status",
    )
    opened_from = django_filters.DateFilter(
        field_name="opened_at", lookup_expr="date__gte", label="Opened from", widget=DateInput()
    )
    opened_to = django_filters.DateFilter(
        field_name="opened_at", lookup_expr="date__lte", label="Opened to", widget=DateInput()
    )

    class Meta:
        model = ServiceRecord
        fields = ["unit", "technician", "status", "opened_from", "opened_to"]
        form = RecordFilterForm

    def by_status(
        self, queryset: QuerySet[ServiceRecord], name: str, value: str
    ) -> QuerySet[ServiceRecord]:
        return queryset.filter(closed_at__isnull=value == "open")
