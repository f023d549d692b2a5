"""Shop-floor traveller service for PCB fabrication."""

from shopfloor.celery import app as celery_app

__all__ = ("celery_app",)
