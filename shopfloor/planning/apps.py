from django.apps import AppConfig


class PlanningConfig(AppConfig):
    name = "shopfloor.planning"
    label = "planning"
    verbose_name = "Planning: capacity, calendars, finish forecasts, quotes"
