"""Template context shared by every page."""

from __future__ import annotations

from django.conf import settings
from django.http import HttpRequest

SAFETY_CAUTION = (
    "PCB fabrication uses corrosive etchants, plating chemistry, molten solder and UV "
    "exposure. This tool does not replace the site's safety procedures, safety data sheets "
    "or local codes. Its tolerance defaults are starting points: the customer's specification "
    "and the governing IPC documents take precedence."
)


def site(request: HttpRequest) -> dict[str, object]:
    return {
        "SITE_TIME_ZONE": settings.SITE_TIME_ZONE,
        "SAFETY_CAUTION": SAFETY_CAUTION,
        "EAGER_TASKS": settings.CELERY_TASK_ALWAYS_EAGER,
    }
