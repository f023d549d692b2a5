from django.apps import AppConfig


class AuditConfig(AppConfig):
    name = "shopfloor.audit"
    label = "audit"
