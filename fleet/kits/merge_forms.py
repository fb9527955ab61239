"""The kit merge page's forms: upload a return file, confirm a previewed one, resolve a
conflict."""

from __future__ import annotations

from typing import Any

from django import forms

from fleet.models import KitConflict
from fleet.models.validators import REASON_MAX_CHARS

# A kit's database for a few units and their history is a few megabytes.
MAX_KIT_BYTES = 200 * 1024 * 1024


class KitUploadForm(forms.Form):
    file = forms.FileField(
        label="Return file",
        help_text="The .zip written on the vessel by kit_pack. Nothing is written before you "
        "confirm.",
    )

    def clean_file(self) -> Any:
        upload = self.cleaned_data["file"]
        if upload.size > MAX_KIT_BYTES:
            raise forms.ValidationError(
                f"The file is larger than {MAX_KIT_BYTES // (1024 * 1024)} MB; that is not a "
                "kit's return file."
            )
        return upload


class KitConfirmForm(forms.Form):
    checksum = forms.RegexField(regex=r"^[0-9a-f]{64}$", widget=forms.HiddenInput)
    file_name = forms.CharField(max_length=255, widget=forms.HiddenInput)


class ConflictResolveForm(forms.Form):
    choice = forms.ChoiceField(label="Resolution", widget=forms.RadioSelect)
    note = forms.CharField(
        label="Note",
        required=False,
        max_length=REASON_MAX_CHARS,
        widget=forms.Textarea(attrs={"rows": 2}),
        help_text="Why, for whoever reads the history later.",
    )

    def __init__(self, *args: Any, conflict: KitConflict, **kwargs: Any) -> None:
        super().__init__(*args, **kwargs)
        field = self.fields["choice"]
        assert isinstance(field, forms.ChoiceField)
        field.choices = conflict.choice_labels()
