"""The form that chooses what goes to sea in a vessel kit."""

from django import forms
from django.contrib.auth.models import User
from django.db.models import QuerySet

from fleet import roles
from fleet.models import Site, Transponder
from fleet.models.kits import JOB_MAX_CHARS


class KitUnitFilterForm(forms.Form):
    q = forms.CharField(
        label="Show units whose serial contains", max_length=31, required=False, strip=True
    )


def sailing_candidates() -> QuerySet[User]:
    """Active users with a role: who may sail and sign in on board."""
    return (
        User.objects.filter(is_active=True, groups__name__in=roles.ROLES)
        .distinct()
        .order_by("username")
    )


class KitForm(forms.Form):
    job = forms.CharField(
        label="Job",
        max_length=JOB_MAX_CHARS,
        help_text="What the kit is for, as the team says it (e.g. a survey block).",
    )
    units = forms.ModelMultipleChoiceField(
        label="Units going to sea",
        queryset=Transponder.objects.order_by("serial"),
        widget=forms.CheckboxSelectMultiple,
        error_messages={"required": "Choose at least one unit for the kit."},
    )
    sites = forms.ModelMultipleChoiceField(
        label="Sites of the job",
        queryset=Site.objects.order_by("name"),
        widget=forms.CheckboxSelectMultiple,
        required=False,
        help_text="Sites the units' history names go too.",
    )
    users = forms.ModelMultipleChoiceField(
        label="Who sails (they sign in on board with their usual password)",
        queryset=sailing_candidates(),
        widget=forms.CheckboxSelectMultiple,
        error_messages={"required": "Choose who sails: at least one user signs in on board."},
    )

    def __init__(self, *args: object, unit_filter: str = "", **kwargs: object) -> None:
        super().__init__(*args, **kwargs)  # type: ignore[arg-type]
        units = self.fields["units"]
        assert isinstance(units, forms.ModelMultipleChoiceField)
        if unit_filter and not self.is_bound:
            units.queryset = Transponder.objects.filter(serial__icontains=unit_filter).order_by(
                "serial"
            )
        users = self.fields["users"]
        assert isinstance(users, forms.ModelMultipleChoiceField)
        users.queryset = sailing_candidates()
