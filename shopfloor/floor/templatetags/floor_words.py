"""`{{ text|said }}`: a name from the built-in library or the starting site lists, in the
active language (text a site or engineer wrote is shown as written)."""

from __future__ import annotations

from django import template

from shopfloor.floor import words

register = template.Library()


@register.filter
def said(text: object) -> str:
    return words.library_text(str(text or ""))


@register.filter
def step_said(name: object) -> str:
    """A step name ('Pattern plating (cycle 2)') with the library's name translated."""
    return words.step_name(str(name or ""))
