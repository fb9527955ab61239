from typing import TYPE_CHECKING, cast

import django_filters
from django.db.models import Q, QuerySet
from django.utils import timezone

from .due.condition import Condition, annotate_condition
from .models import Place, Transponder, Variant

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
