"""Per-user secret calendar feed addresses. Revoking one replaces its token."""

import secrets

from django.conf import settings
from django.db import models


def new_feed_token() -> str:
    return secrets.token_urlsafe(32)


class CalendarFeed(models.Model):
    user = models.OneToOneField(
        settings.AUTH_USER_MODEL, on_delete=models.CASCADE, related_name="calendar_feed"
    )
    token = models.CharField(max_length=64, unique=True, default=new_feed_token)
    created_at = models.DateTimeField(auto_now_add=True)

    def __str__(self) -> str:
        return f"calendar feed of {self.user}"
