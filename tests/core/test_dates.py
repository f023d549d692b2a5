"""The site's date formats: written and read back; ISO 8601 always accepted.

Reference: ISO 8601-1:2019 clause 5.2.2.1 (calendar date, extended format YYYY-MM-DD,
"1985-04-12" is the standard's own example); Python's `date.isoformat` (a general
reference library) writes the same text. Day/month orders are common practice.
"""

from __future__ import annotations

import datetime as dt

import pytest

from shopfloor.core.dates import FORMATS, ISO, DateNotUnderstood, parse_date


def test_iso_is_the_standards_extended_calendar_date():
    # ISO 8601-1:2019 5.2.2.1 example: 12 April 1985 is written 1985-04-12.
    assert ISO.format(dt.date(1985, 4, 12)) == "1985-04-12"
    assert ISO.format(dt.date(1985, 4, 12)) == dt.date(1985, 4, 12).isoformat()
    assert parse_date("1985-04-12") == dt.date(1985, 4, 12)


@pytest.mark.parametrize(
    ("key", "text"),
    [
        ("iso", "1985-04-12"),
        ("dmy_slash", "12/04/1985"),
        ("mdy_slash", "04/12/1985"),
        ("dmy_dot", "12.04.1985"),
    ],
)
def test_each_format_writes_and_reads_back(key, text):
    fmt = FORMATS[key]
    assert fmt.format(dt.date(1985, 4, 12)) == text
    assert parse_date(text, fmt) == dt.date(1985, 4, 12)
    assert parse_date("1985-04-12", fmt) == dt.date(1985, 4, 12)  # ISO always reads


def test_day_and_month_order_is_the_sites_not_a_guess():
    # 03/04/2030 is 3 April in DD/MM/YYYY and 4 March in MM/DD/YYYY.
    assert parse_date("03/04/2030", FORMATS["dmy_slash"]) == dt.date(2030, 4, 3)
    assert parse_date("03/04/2030", FORMATS["mdy_slash"]) == dt.date(2030, 3, 4)


@pytest.mark.parametrize("text", ["2030-02-30", "31/01/30", "2030/01/31", "tomorrow", "12/31/2030"])
def test_bad_dates_say_the_format_expected(text):
    with pytest.raises(DateNotUnderstood, match=r"DD/MM/YYYY \(for example 31/01/2030\)"):
        parse_date(text, FORMATS["dmy_slash"])
