import django_filters
from django.db.models import Q, QuerySet
from django.utils import timezone

from .due.condition import Condition, annotate_condition
from .models import Place, Transponder, Variant


class UnitFilter(django_filters.FilterSet):
    q = django_filters.CharFilter(method="search", label="Search")
    condition = django_filters.ChoiceFilter(
        choices=Condition.choices(), empty_label="Any condition", method="by_condition"
    )
    place = django_filters.ModelChoiceFilter(queryset=Place.objects.all(), empty_label="Any place")
    variant = django_filters.ModelChoiceFilter(
        queryset=Variant.objects.all(), empty_label="Any variant"
    )

    class Meta:
        model = Transponder
        fields = ["q", "condition", "place", "variant"]

    def search(self, queryset: QuerySet, name: str, value: str) -> QuerySet:
        value = value.strip()
        if not value:
            return queryset
        return queryset.filter(
            Q(serial__icontains=value)
            | Q(acoustic_address__iexact=value)
            | Q(notes__icontains=value)
            | Q(variant__name__icontains=value)
        )

    def by_condition(self, queryset: QuerySet, name: str, value: str) -> QuerySet:
        """In SQL, on the ``condition`` annotation (added for today if the view did not)."""
        if "condition" not in queryset.query.annotations:
            queryset = annotate_condition(queryset, timezone.localdate())
        return queryset.filter(condition=value)
