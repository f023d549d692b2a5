"""How pages look for this site, this person and this device: date format and theme.

- Dates: the site's one date format (SiteSettings.date_format, ISO 8601 by default;
  shopfloor/core/dates.py writes and reads it). Templates write `{{ d|site_date:SITE_DATE }}`;
  a filter field is a text box showing the format (a browser's date picker would show its
  own locale's mm/dd/yyyy whatever the site chose).
- Theme: "standard" or "contrast" (the high-contrast floor theme for yellow-light rooms
  and bright plating halls). A person's own choice (Person.theme) wins; otherwise the
  device's, kept in the `theme` cookie that the tablet's toggle sets.
"""

from __future__ import annotations

import datetime as dt
from collections.abc import Callable
from typing import Any

from django.db.models import Subquery
from django.http import HttpRequest
from django.utils.functional import SimpleLazyObject

from shopfloor.core.dates import FORMATS, ISO, DateFormat, DateNotUnderstood, parse_date
from shopfloor.errors import InvalidInput
from shopfloor.plant.models import Person, SiteSettings

THEMES = ("standard", "contrast")
THEME_COOKIE = "theme"


def site_date_format() -> DateFormat:
    """The site's date format (one query; pages that show dates call it once)."""

    key = SiteSettings.objects.filter(pk=1).values_list("date_format", flat=True).first()
    return FORMATS.get(key or "iso", ISO)


def format_date(value: dt.date | dt.datetime | None, fmt: DateFormat) -> str:
    if value is None:
        return ""
    if isinstance(value, dt.datetime):
        value = value.date()
    return fmt.format(value)


def read_date(
    name: str, text: str, fmt: DateFormat | Callable[[], DateFormat] = site_date_format
) -> dt.date | None:
    """A filter's date field: blank is None; ISO 8601 always reads (links carry it);
    anything else is read in the site's format (`fmt`, or a function giving it, called
    only then: a board polled with ISO dates pays no query for it). A date in neither
    raises InvalidInput naming the field and the format expected."""

    text = (text or "").strip()
    if not text:
        return None
    try:
        return parse_date(text, ISO)
    except DateNotUnderstood:
        pass
    site_fmt = fmt if isinstance(fmt, DateFormat) else fmt()
    try:
        return parse_date(text, site_fmt)
    except DateNotUnderstood as exc:
        raise InvalidInput(
            f"{name}: {exc}",
            problems=[{"field": name, "value": text, "allowed": site_fmt.pattern}],
        ) from exc


def theme_for(request: HttpRequest) -> str:
    """The theme this page is drawn in: the person's choice, else the device's cookie."""
    user = getattr(request, "user", None)
    if user is not None and user.is_authenticated:
        person = getattr(user, "person", None)
        if person is not None and person.theme in THEMES:
            return str(person.theme)
    cookie = request.COOKIES.get(THEME_COOKIE, "")
    return cookie if cookie in THEMES else "standard"


def save_theme(request: HttpRequest, theme: str) -> None:
    """A signed-in person's own theme (Person.theme); the view sets the device's cookie."""

    user = getattr(request, "user", None)
    if user is not None and user.is_authenticated:
        Person.objects.filter(user=user).update(theme=theme)


def context(request: HttpRequest) -> dict[str, Any]:
    """SITE_DATE (read only when a template uses it) and THEME for every page."""

    return {
        "SITE_DATE": SimpleLazyObject(site_date_format),
        "THEME": theme_for(request),
    }


#: SiteSettings fields a page can read along with a query it makes anyway
#: (`with_site_settings`), so a page polled every few seconds pays no extra query.
_CARRIED = ("date_format", "wall_page_seconds", "wall_lots_per_center", "paper_size")


def with_site_settings(qs: Any) -> Any:
    """`qs` with the site settings riding along on every row (one uncorrelated subquery
    each, which PostgreSQL evaluates once); read them back with `carried_settings`."""

    row = SiteSettings.objects.filter(pk=1)
    return qs.annotate(**{f"site_{name}": Subquery(row.values(name)[:1]) for name in _CARRIED})


def carried_settings(obj: Any | None) -> Any:
    """The SiteSettings values carried on `obj` (defaults where there is no row yet)."""

    values = {}
    for name in _CARRIED:
        value = getattr(obj, f"site_{name}", None) if obj is not None else None
        if value is not None:
            values[name] = value
    return SiteSettings(pk=1, **values)
