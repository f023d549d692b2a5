from django.apps import AppConfig


class QualityConfig(AppConfig):
    name = "shopfloor.quality"
    label = "quality"
