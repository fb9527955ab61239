import django_filters
from django.db.models import Q, QuerySet

from .models import Place, Transponder, UnitStatus, Variant


class UnitFilter(django_filters.FilterSet):
    q = django_filters.CharFilter(method="search", label="Search")
    status = django_filters.ChoiceFilter(choices=UnitStatus.choices, empty_label="Any status")
    place = django_filters.ModelChoiceFilter(queryset=Place.objects.all(), empty_label="Any place")
    variant = django_filters.ModelChoiceFilter(
        queryset=Variant.objects.all(), empty_label="Any variant"
    )

    class Meta:
        model = Transponder
        fields = ["q", "status", "place", "variant"]

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
