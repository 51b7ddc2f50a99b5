from django.apps import AppConfig


class AllocationConfig(AppConfig):
    name = "allocation"
    verbose_name = "Baton"
    default_auto_field = "django.db.models.BigAutoField"
