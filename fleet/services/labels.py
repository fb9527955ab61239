"""Writes to the label preferences: the "if found, contact" line every label prints."""

from __future__ import annotations

import datetime as dt

from django.contrib.auth.models import AbstractBaseUser
from django.db import transaction

from fleet.models import LabelSetting


@transaction.atomic
def label_contact_save(*, contact_line: str, by: AbstractBaseUser, at: dt.datetime) -> LabelSetting:
    """Set the contact line (trimmed; empty prints none). The single row is created on first
    use and locked while it changes; only the changed fields are written."""
    LabelSetting.objects.get_or_create(pk=LabelSetting.SINGLETON_PK)
    setting = LabelSetting.objects.select_for_update().get(pk=LabelSetting.SINGLETON_PK)
    setting.contact_line = contact_line.strip()
    setting.updated_by_id = by.pk
    setting.updated_at = at
    setting.full_clean()
    setting.save(update_fields=["contact_line", "updated_by", "updated_at"])
    return setting
