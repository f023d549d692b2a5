"""Template context shared by every page."""

from __future__ import annotations

from django.conf import settings
from django.http import HttpRequest
from django.utils.translation import gettext, gettext_noop

SAFETY_CAUTION = gettext_noop(
    "PCB fabrication uses corrosive etchants, plating chemistry, molten solder and UV "
    "exposure. This tool does not replace the site's safety procedures, safety data sheets "
    "or local codes. Its tolerance defaults are starting points: the customer's specification "
    "and the governing IPC documents take precedence."
)  # shown translated (the context below); the English text is the catalogue's key


def site(request: HttpRequest) -> dict[str, object]:
    return {
        "SITE_TIME_ZONE": settings.SITE_TIME_ZONE,
        "SAFETY_CAUTION": gettext(SAFETY_CAUTION),
        "EAGER_TASKS": settings.CELERY_TASK_ALWAYS_EAGER,
    }
