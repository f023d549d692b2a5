from django.apps import AppConfig


class QualityConfig(AppConfig):
    name = "shopfloor.quality"
    label = "quality"
    verbose_name = "Quality: alerts, holds, NCRs, SPC"

    def ready(self) -> None:
        # Imports here, not at the top: Django loads apps.py before any model exists.
        # The project's Celery app becomes current in every Django process (web, shell,
        # tests), so a queued task uses its broker settings.
        import shopfloor.celery  # noqa: F401
        from shopfloor.quality import outbox
        from shopfloor.quality.services.alerts import handle_reading

        # Outbox events reach their use case through the one process_event task.
        outbox.register("reading.recorded", handle_reading)
