from django.apps import AppConfig


class ChemistryConfig(AppConfig):
    name = "shopfloor.chemistry"
    label = "chemistry"
    verbose_name = "Bath chemistry"
