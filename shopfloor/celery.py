"""The Celery app. Tasks live in each domain app's tasks.py and call services only."""

from __future__ import annotations

import logging
import os

from celery import Celery

os.environ.setdefault("DJANGO_SETTINGS_MODULE", "shopfloor.settings")

app = Celery("shopfloor")
app.config_from_object("django.conf:settings", namespace="CELERY")
app.autodiscover_tasks()

log = logging.getLogger("shopfloor")


@app.on_after_finalize.connect
def _announce_mode(sender: Celery, **_: object) -> None:
    if sender.conf.task_always_eager:
        log.info("Celery runs in eager mode: tasks execute in the calling process")
