from django.apps import AppConfig


class RoutingConfig(AppConfig):
    name = "routing"
    label = "routing"
    verbose_name = "Routing builder"
