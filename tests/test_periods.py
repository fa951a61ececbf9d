"""ISO 8601 week codes.

Calendar facts are checked against the source named beside each check:
"ISO 8601 / Python datetime.date.fromisocalendar" (the standard's week-date rules as
implemented by the Python standard library).
"""

import datetime

import pytest

from planner.periods import (
    parse_week,
    parse_week_span,
    week_code,
    week_range,
    weeks_in_year,
)


@pytest.mark.parametrize(
    ("code", "monday"),
    [
        # Source: ISO 8601 / Python datetime.date.fromisocalendar.
        ("2026-W01", datetime.date(2025, 12, 29)),
        ("2026-W53", datetime.date(2026, 12, 28)),
        ("2020-W53", datetime.date(2020, 12, 28)),
        ("2021-W01", datetime.date(2021, 1, 4)),
        ("2027-W01", datetime.date(2027, 1, 4)),
    ],
)
def test_parse_week_gives_the_monday(code: str, monday: datetime.date) -> None:
    assert parse_week(code) == monday
    assert monday.weekday() == 0


@pytest.mark.parametrize(
    ("year", "weeks"),
    # Source: ISO 8601 / Python datetime.date.fromisocalendar: a year has 53 ISO weeks
    # when it starts on a Thursday, or is a leap year starting on a Wednesday.
    [(2015, 53), (2020, 53), (2021, 52), (2025, 52), (2026, 53), (2027, 52), (2032, 53)],
)
def test_weeks_in_year(year: int, weeks: int) -> None:
    assert weeks_in_year(year) == weeks
    parse_week(f"{year}-W{weeks:02d}")
    if weeks == 52:
        with pytest.raises(ValueError, match=f"{year} has only 52 ISO weeks"):
            parse_week(f"{year}-W53")


def test_week_53_of_a_52_week_year_is_refused_clearly() -> None:
    # Source: ISO 8601 / Python datetime.date.fromisocalendar (2021 has 52 weeks).
    with pytest.raises(ValueError):
        datetime.date.fromisocalendar(2021, 53, 1)
    with pytest.raises(
        ValueError, match="period '2021-W53' does not exist: 2021 has only 52 ISO weeks"
    ):
        parse_week("2021-W53")


@pytest.mark.parametrize(
    "code", ["2026-W1", "2026W01", "2026-w01", " 2026-W01", "2026-W01 ", "26-W01", "2026-01", ""]
)
def test_bad_format_is_refused(code: str) -> None:
    with pytest.raises(ValueError, match="is not an ISO week code; write it as YYYY-Www"):
        parse_week(code)


@pytest.mark.parametrize("code", ["2026-W00", "2026-W54", "2026-W99", "0000-W01"])
def test_week_numbers_out_of_range_are_refused(code: str) -> None:
    with pytest.raises(ValueError, match="does not exist"):
        parse_week(code)


@pytest.mark.parametrize(
    ("day", "code"),
    [
        # Worked examples of ISO 8601 week dates near a year's end (the standard's
        # week-numbering rules, as commonly tabulated; from memory): the days of
        # the turn of a year belong to the week that holds the Thursday.
        (datetime.date(2005, 1, 1), "2004-W53"),  # a Saturday
        (datetime.date(2005, 1, 2), "2004-W53"),
        (datetime.date(2005, 12, 31), "2005-W52"),
        (datetime.date(2007, 1, 1), "2007-W01"),  # a Monday
        (datetime.date(2007, 12, 30), "2007-W52"),
        (datetime.date(2007, 12, 31), "2008-W01"),
        (datetime.date(2008, 12, 29), "2009-W01"),
        (datetime.date(2010, 1, 3), "2009-W53"),
        (datetime.date(2010, 1, 4), "2010-W01"),
        (datetime.date(2020, 12, 31), "2020-W53"),  # 2020 starts on a Wednesday and is a leap year
        (datetime.date(2027, 1, 1), "2026-W53"),  # 2026 starts on a Thursday
    ],
)
def test_week_code_of_days_around_the_turn_of_a_year(day: datetime.date, code: str) -> None:
    assert week_code(day) == code
    assert parse_week(code) <= day < parse_week(code) + datetime.timedelta(days=7)


def test_week_range_crosses_a_53_week_year_end() -> None:
    assert week_range("2026-W52", "2027-W02") == ["2026-W52", "2026-W53", "2027-W01", "2027-W02"]
    assert week_range("2021-W52", "2022-W01") == ["2021-W52", "2022-W01"]


def test_week_range_lengths_and_order() -> None:
    weeks = week_range("2025-W01", "2027-W52")
    # Source: ISO 8601 / Python datetime.date.fromisocalendar: 52 + 53 + 52 weeks.
    assert len(weeks) == 157
    assert weeks == sorted(weeks)
    assert len(set(weeks)) == len(weeks)
    assert week_range("2026-W10", "2026-W10") == ["2026-W10"]


def test_week_range_backwards_is_refused() -> None:
    with pytest.raises(ValueError, match="2026-W09 comes before 2026-W10"):
        week_range("2026-W10", "2026-W09")


def test_parse_week_span() -> None:
    assert parse_week_span("2026-W40..2026-W52") == [f"2026-W{week}" for week in range(40, 53)]
    assert parse_week_span(" 2026-W52 .. 2027-W01 ") == ["2026-W52", "2026-W53", "2027-W01"]
    assert parse_week_span("2026-W40") == ["2026-W40"]
    with pytest.raises(ValueError, match=r"one week code or FIRST\.\.LAST"):
        parse_week_span("2026-W40..2026-W41..2026-W42")
    with pytest.raises(ValueError, match="is not an ISO week code"):
        parse_week_span("2026-W40..soon")
