from django.apps import AppConfig
from django.db.models.signals import post_migrate


def _ensure_groups(sender: AppConfig, **kwargs: object) -> None:
    from .roles import ensure_groups

    ensure_groups()


class FleetConfig(AppConfig):
    name = "fleet"
    verbose_name = "Holdfast fleet"
    default_auto_field = "django.db.models.BigAutoField"

    def ready(self) -> None:
        # Groups (not logins) are part of the schema's contract: create them after every migrate.
        post_migrate.connect(_ensure_groups, sender=self)
