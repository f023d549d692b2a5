"""The unit and gauge a person last recorded each quantity with.

A gauge reads in one unit and an operator keeps using it, so the tablet offers the last
unit and gauge first on the next sample (and on the next lot) instead of resetting to
the stored unit every time. Kept on the person (`Person.entry_defaults`), per quantity.
"""

from __future__ import annotations

from typing import Any

from django.conf import settings

from shopfloor.errors import InvalidInput
from shopfloor.plant.models import Person


def defaults_for(person: Person | None, quantity: str) -> dict[str, Any]:
    """{"unit": ..., "equipment": id or None} last used for `quantity`, or {}."""
    if person is None:
        return {}
    saved = (person.entry_defaults or {}).get(quantity)
    return dict(saved) if isinstance(saved, dict) else {}


def remember_entry(person: Person, quantity: str, unit: str, equipment_id: int | None) -> None:
    """Keep `unit` and `equipment_id` as the person's choice for `quantity`.

    One UPDATE of one column, and none when nothing changed (the usual case: the same
    unit and gauge as the sample before).
    """
    wanted = {"unit": unit, "equipment": equipment_id}
    current = dict(person.entry_defaults or {})
    if current.get(quantity) == wanted:
        return
    current[quantity] = wanted
    person.entry_defaults = current
    Person.objects.filter(pk=person.pk).update(entry_defaults=current)


def set_language(person: Person, language: str) -> None:
    """The person's tablet and traveller language; '' means the site's language."""
    allowed = dict(settings.LANGUAGES)
    if language and language not in allowed:
        raise InvalidInput(
            f"Unknown language {language!r}; allowed: "
            + ", ".join(f"{code} ({name})" for code, name in allowed.items())
        )
    person.language = language
    Person.objects.filter(pk=person.pk).update(language=language)
