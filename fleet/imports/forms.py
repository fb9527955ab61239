"""The import page's forms: choose a kind and upload a file; confirm a previewed file."""

from __future__ import annotations

from typing import Any

from django import forms

from fleet.services.imports import KINDS

# A workshop's history in one file is a few megabytes; anything far larger is a mistake.
MAX_IMPORT_BYTES = 20 * 1024 * 1024

KIND_CHOICES = [(kind.key, kind.title) for kind in KINDS.values()]


class ImportUploadForm(forms.Form):
    kind = forms.ChoiceField(choices=KIND_CHOICES, label="What the file holds")
    file = forms.FileField(label="CSV file", help_text="UTF-8, comma or semicolon separated.")

    def clean_file(self) -> Any:
        upload = self.cleaned_data["file"]
        if upload.size > MAX_IMPORT_BYTES:
            raise forms.ValidationError(
                f"The file is larger than {MAX_IMPORT_BYTES // (1024 * 1024)} MB; split it "
                "into several files."
            )
        return upload


class ImportConfirmForm(forms.Form):
    kind = forms.ChoiceField(choices=KIND_CHOICES, widget=forms.HiddenInput)
    checksum = forms.RegexField(regex=r"^[0-9a-f]{64}$", widget=forms.HiddenInput)
    file_name = forms.CharField(max_length=255, widget=forms.HiddenInput)
    accept_flagged = forms.BooleanField(
        required=False,
        label="I checked the flagged rows: import them as they are",
    )
