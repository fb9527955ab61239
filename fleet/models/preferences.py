"""Workshop-wide preferences a supervisor sets in the app: one row each, never more."""

from django.conf import settings
from django.core.exceptions import ValidationError
from django.core.validators import MaxLengthValidator
from django.db import models

LABEL_CONTACT_MAX_CHARS = 80


def printable_line(value: str) -> None:
    """One line of plain text: no line breaks, tabs or other control characters."""
    if any(ord(ch) < 32 or 127 <= ord(ch) < 160 for ch in value):
        raise ValidationError("Write one line of plain text, without line breaks or tabs.")


class LabelSetting(models.Model):
    """What every asset label prints under its code: the "if found, contact" line.

    A singleton: the row with primary key 1 (``LabelSetting.current()``); supervisors edit it
    on the labels page, through ``fleet.services.labels.label_contact_save``.
    """

    SINGLETON_PK = 1

    contact_line = models.CharField(
        "if found, contact",
        max_length=LABEL_CONTACT_MAX_CHARS,
        blank=True,
        validators=[MaxLengthValidator(LABEL_CONTACT_MAX_CHARS), printable_line],
        help_text='Printed across the foot of every label after "If found, contact:", e.g. a '
        "workshop telephone number or e-mail address. A label has room for two small lines; "
        "a longer text is cut with an ellipsis. Empty prints no line.",
    )
    updated_by = models.ForeignKey(
        settings.AUTH_USER_MODEL,
        on_delete=models.PROTECT,
        related_name="+",
        null=True,
        blank=True,
        editable=False,
    )
    updated_at = models.DateTimeField(null=True, blank=True, editable=False)

    class Meta:
        verbose_name = "label setting"
        constraints = [
            models.CheckConstraint(condition=models.Q(pk=1), name="label_setting_single_row"),
        ]

    def __str__(self) -> str:
        return self.contact_line or "(no contact line)"

    @classmethod
    def current(cls) -> "LabelSetting":
        """The stored row, or an unsaved blank one before a supervisor first sets it. One
        query."""
        return cls.objects.filter(pk=cls.SINGLETON_PK).first() or cls(pk=cls.SINGLETON_PK)
