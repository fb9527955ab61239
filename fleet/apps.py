from django.apps import AppConfig
from django.db.models.signals import post_delete, post_migrate, post_save


def _ensure_groups(sender: AppConfig, using: str = "default", **kwargs: object) -> None:
    from .roles import ensure_groups

    ensure_groups(using)


class FleetConfig(AppConfig):
    name = "fleet"
    verbose_name = "Holdfast fleet"
    default_auto_field = "django.db.models.BigAutoField"

    def ready(self) -> None:
        # Groups (not logins) are part of the schema's contract: create them after every migrate.
        post_migrate.connect(_ensure_groups, sender=self)
        # Which kit this database is, is cached per process: read it again after a change.
        from .kits.identity import forget_current_kit

        kit = self.get_model("Kit")
        post_save.connect(forget_current_kit, sender=kit, dispatch_uid="kit-here-saved")
        post_delete.connect(forget_current_kit, sender=kit, dispatch_uid="kit-here-deleted")
        post_migrate.connect(forget_current_kit, sender=self, dispatch_uid="kit-here-migrated")
