from django.apps import AppConfig


class FloorConfig(AppConfig):
    name = "shopfloor.floor"
    label = "floor"
