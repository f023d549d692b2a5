"""Shelf life and expiry of material lots (shopfloor.core.materials), on plain dates.

Dates are checked against the Gregorian calendar (2024 is a leap year, so 90 days after
31 January 2024 is 30 April 2024). That prepreg and solder mask ink carry a shelf life
counted from receipt is common practice; the day counts are site values.
"""

from __future__ import annotations

import datetime as dt

from shopfloor.core.materials import MaterialFacts, usability


def _lot(received=None, expires=None, kind="prepreg"):
    return MaterialFacts("PP-1", kind, "Prepreg", received, expires)


def test_shelf_life_counts_days_from_receipt_across_a_leap_february():
    # Gregorian calendar: 2024-01-31 + 90 days = 2024-04-30 (29 days in February 2024).
    lot = _lot(received=dt.date(2024, 1, 31))
    ok = usability(lot, dt.date(2024, 4, 30), 90)
    assert ok.usable and ok.expires_on == dt.date(2024, 4, 30)  # the last day still counts
    late = usability(lot, dt.date(2024, 5, 1), 90)
    assert not late.usable
    assert "expired on 2024-04-30" in late.reason and "shelf life of 90 days" in late.reason


def test_the_earlier_of_expiry_date_and_shelf_life_wins():
    lot = _lot(received=dt.date(2024, 1, 1), expires=dt.date(2024, 2, 1))
    assert usability(lot, dt.date(2024, 2, 2), 90).expires_on == dt.date(2024, 2, 1)
    lot2 = _lot(received=dt.date(2024, 1, 1), expires=dt.date(2025, 1, 1))
    assert usability(lot2, dt.date(2024, 3, 1), 30).expires_on == dt.date(2024, 1, 31)


def test_age_that_cannot_be_checked_is_refused():
    result = usability(_lot(), dt.date(2024, 1, 1), 90)
    assert not result.usable and "no received date" in result.reason


def test_a_kind_without_shelf_life_needs_no_dates():
    lot = MaterialFacts("LAM-1", "laminate", "Laminate (core)", None, None)
    assert usability(lot, dt.date(2030, 1, 1), None).usable
    expired = MaterialFacts("LAM-2", "laminate", "Laminate (core)", None, dt.date(2029, 12, 31))
    assert not usability(expired, dt.date(2030, 1, 1), None).usable
