"""`{{ value|site_date:SITE_DATE }}`: a date (or a datetime's date) in the site's format."""

from __future__ import annotations

import datetime as dt
from typing import Any

from django import template

from shopfloor.core.dates import ISO
from shopfloor.display import format_date

register = template.Library()


@register.filter
def site_date(value: dt.date | dt.datetime | None, fmt: Any = None) -> str:
    return format_date(value, fmt if fmt is not None and hasattr(fmt, "format") else ISO)
