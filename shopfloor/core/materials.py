"""May this material lot still be used? Shelf life and expiry, as plain dates.

Why a pure function: the tablet, the API and the demo loader refuse the same lots for the
same reasons, and the date arithmetic is checked without a database. The rule (common
practice for shelf-life-controlled materials such as prepreg and solder mask ink):

* a lot past its own expiry date is refused (the supplier's date wins when given);
* otherwise, when the kind has a site shelf life, the lot expires that many days after it
  was received; a lot of such a kind with no received date cannot be checked and is
  refused, so an unchecked lot never reaches a board;
* the last usable day is the expiry day itself (a lot "expires on" a date means it may be
  used up to and including that date).
"""

from __future__ import annotations

import datetime as dt
from dataclasses import dataclass


@dataclass(frozen=True)
class MaterialFacts:
    """What the check needs to know about a material lot."""

    code: str
    kind: str
    kind_label: str
    received_on: dt.date | None
    expires_on: dt.date | None


@dataclass(frozen=True)
class Usability:
    usable: bool
    expires_on: dt.date | None
    reason: str


def usability(m: MaterialFacts, today: dt.date, shelf_life_days: int | None) -> Usability:
    """Whether `m` may be used on `today`, the effective expiry and, if not, why not."""
    expiry = m.expires_on
    basis = "its expiry date"
    if shelf_life_days is not None and m.received_on is not None:
        by_shelf = m.received_on + dt.timedelta(days=shelf_life_days)
        if expiry is None or by_shelf < expiry:
            expiry = by_shelf
            basis = (
                f"received {m.received_on.isoformat()} with a shelf life of {shelf_life_days} days"
            )
    if expiry is None and shelf_life_days is not None:
        return Usability(
            False,
            None,
            f"Material lot {m.code} ({m.kind_label}) has a {shelf_life_days}-day shelf life but "
            "no received date or expiry date on record, so its age cannot be checked. Ask "
            "stores to record when it was received.",
        )
    if expiry is not None and today > expiry:
        return Usability(
            False,
            expiry,
            f"Material lot {m.code} ({m.kind_label}) expired on {expiry.isoformat()} ({basis}). "
            "Do not use it; quarantine it and take a current lot from stores.",
        )
    return Usability(True, expiry, "")
