"""ISO 8601 week codes, the planner's periods.

A period is written ``YYYY-Www`` (for example ``2026-W49``): the ISO 8601 week-numbering
year, a literal ``W`` and the two-digit week number. ISO weeks start on Monday; week 1
is the week holding the year's first Thursday, so a year has 52 or 53 weeks and the
first days of January may belong to the previous ISO year.

References
----------
ISO 8601-1:2019, Date and time -- Representations for information interchange, clause
on week dates; implemented by :meth:`datetime.date.fromisocalendar` and
:meth:`datetime.date.isocalendar`.
"""

from __future__ import annotations

import datetime
import re

__all__ = [
    "WEEK_CODE_PATTERN",
    "parse_week",
    "parse_week_span",
    "week_code",
    "week_range",
    "weeks_in_year",
]

#: Regular expression a period code must match in full (the same one the database checks).
WEEK_CODE_PATTERN = r"^[0-9]{4}-W[0-9]{2}$"

_WEEK_CODE = re.compile(r"([0-9]{4})-W([0-9]{2})")
_ONE_WEEK = datetime.timedelta(days=7)
_SPAN_SEPARATOR = ".."


def weeks_in_year(year: int) -> int:
    """Number of ISO weeks (52 or 53) in an ISO week-numbering year.

    December 28 always lies in the last ISO week of its year.

    Parameters
    ----------
    year : int
        ISO week-numbering year.

    Returns
    -------
    int
        52 or 53.

    Examples
    --------
    >>> weeks_in_year(2026), weeks_in_year(2027)
    (53, 52)
    """
    return datetime.date(year, 12, 28).isocalendar().week


def parse_week(code: str) -> datetime.date:
    """Monday that starts the ISO week ``code``.

    Parameters
    ----------
    code : str
        Week code ``YYYY-Www``, for example ``"2026-W49"``.

    Returns
    -------
    datetime.date
        The Monday of that week.

    Raises
    ------
    ValueError
        If ``code`` is not of the form ``YYYY-Www``, the week is 0 or above 53, or
        the week is 53 in a year that has only 52 ISO weeks.

    Examples
    --------
    >>> parse_week("2026-W49")
    datetime.date(2026, 11, 30)
    >>> parse_week("2026-W01")  # ISO week 1 of 2026 starts in December 2025
    datetime.date(2025, 12, 29)
    >>> parse_week("2021-W53")
    Traceback (most recent call last):
    ...
    ValueError: period '2021-W53' does not exist: 2021 has only 52 ISO weeks
    >>> parse_week("2026-49")
    Traceback (most recent call last):
    ...
    ValueError: period '2026-49' is not an ISO week code; write it as YYYY-Www, for example 2026-W49
    """
    match = _WEEK_CODE.fullmatch(code)
    if match is None:
        raise ValueError(
            f"period {code!r} is not an ISO week code; write it as YYYY-Www, for example 2026-W49"
        )
    year, week = int(match.group(1)), int(match.group(2))
    if year < 1:
        raise ValueError(f"period {code!r} does not exist: year 0000 is outside the calendar")
    last_week = weeks_in_year(year)
    if not 1 <= week <= last_week:
        if week == 53:
            raise ValueError(f"period {code!r} does not exist: {year} has only 52 ISO weeks")
        raise ValueError(f"period {code!r} does not exist: weeks run from W01 to W{last_week}")
    return datetime.date.fromisocalendar(year, week, 1)


def week_code(day: datetime.date) -> str:
    """ISO week code of the week containing ``day``.

    Parameters
    ----------
    day : datetime.date
        Any day of the week.

    Returns
    -------
    str
        The code ``YYYY-Www``.

    Examples
    --------
    >>> week_code(datetime.date(2027, 1, 1))  # a Friday in the last ISO week of 2026
    '2026-W53'
    >>> week_code(parse_week("2026-W07"))
    '2026-W07'
    """
    iso = day.isocalendar()
    return f"{iso.year:04d}-W{iso.week:02d}"


def week_range(first: str, last: str) -> list[str]:
    """Every week code from ``first`` to ``last``, both included, across year ends.

    Parameters
    ----------
    first, last : str
        Week codes; ``last`` must not come before ``first``.

    Returns
    -------
    list of str
        Consecutive week codes in calendar order.

    Raises
    ------
    ValueError
        If either code is invalid or ``last`` is before ``first``.

    Examples
    --------
    >>> week_range("2026-W52", "2027-W02")
    ['2026-W52', '2026-W53', '2027-W01', '2027-W02']
    >>> week_range("2026-W10", "2026-W10")
    ['2026-W10']
    """
    start, end = parse_week(first), parse_week(last)
    if end < start:
        raise ValueError(f"week range {first}..{last} is empty: {last} comes before {first}")
    count = (end - start).days // 7 + 1
    return [week_code(start + n * _ONE_WEEK) for n in range(count)]


def parse_week_span(span: str) -> list[str]:
    """Week codes named by ``FIRST..LAST`` (inclusive) or by a single week code.

    Parameters
    ----------
    span : str
        ``"2026-W40..2026-W52"`` or ``"2026-W40"``; spaces around codes are ignored.

    Returns
    -------
    list of str
        The week codes in calendar order.

    Raises
    ------
    ValueError
        If a code is invalid, the span is backwards, or the text has more than one ``..``.

    Examples
    --------
    >>> parse_week_span("2026-W40..2026-W43")
    ['2026-W40', '2026-W41', '2026-W42', '2026-W43']
    >>> parse_week_span("2026-W40")
    ['2026-W40']
    """
    parts = [part.strip() for part in span.split(_SPAN_SEPARATOR)]
    if len(parts) == 1:
        parse_week(parts[0])
        return [parts[0]]
    if len(parts) != 2:
        raise ValueError(f"week span {span!r} must be one week code or FIRST..LAST")
    return week_range(parts[0], parts[1])
