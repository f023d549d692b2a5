from django.apps import AppConfig


class QualityConfig(AppConfig):
    name = "shopfloor.quality"
    label = "quality"
    verbose_name = "Quality: alerts, holds, NCRs, SPC"

    def ready(self) -> None:
        # Make the project's Celery app current in every Django process (web, shell,
        # tests), so .delay() uses its broker settings.
        import shopfloor.celery  # noqa: F401
