from django.apps import AppConfig


class PlantConfig(AppConfig):
    name = "shopfloor.plant"
    label = "plant"
    verbose_name = "Plant: customers, jobs, lots, work centers, people"
