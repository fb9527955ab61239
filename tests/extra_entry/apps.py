from django.apps import AppConfig


class ExtraEntryConfig(AppConfig):
    name = "tests.extra_entry"
    label = "extra_entry"
    default_auto_field = "django.db.models.BigAutoField"

    def ready(self) -> None:
        # In the project the form lives in fleet/forms.py, which is always imported.
        from . import forms  # noqa: F401
