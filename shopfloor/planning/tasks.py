"""Celery tasks of the planning app: thin wrappers that call one service."""

from __future__ import annotations

from celery import shared_task
from django.contrib.auth import get_user_model
from django.db import InterfaceError, OperationalError

from shopfloor.planning import services
from shopfloor.planning.models import ForecastRun


@shared_task(
    acks_late=True,
    autoretry_for=(OperationalError, InterfaceError),
    max_retries=2,
    retry_backoff=True,
)
def run_forecast(trigger: str = ForecastRun.Trigger.PERIODIC, user_id: int | None = None) -> int:
    """Run the floor forecast (beat every FORECAST_EVERY_SECONDS, or asked for). A run
    already under way makes this one do nothing (one row may be 'running' at a time).
    Returns the run's id, 0 when skipped."""

    user = get_user_model().objects.filter(pk=user_id).first() if user_id else None
    run = services.run_forecast(trigger, user=user)
    return run.pk if run else 0
