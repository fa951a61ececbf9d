"""Settings kept once per database (table ``setting``, migration 0008): the currency.

Every money figure the planner shows (costs, prices, values of capacity,
penalties) is in one currency, named by an ISO 4217 code that is set once per
database. Until a user sets it, it is ``XXX``, ISO 4217's code for "no
currency": the planner does not guess.
"""

from __future__ import annotations

import re

from sqlalchemy import Connection, Engine, text

from planner.errors import PlannerError

__all__ = ["DEFAULT_CURRENCY", "check_currency", "currency", "set_currency"]

#: ISO 4217's code for "no currency involved", shown until a currency is set.
DEFAULT_CURRENCY = "XXX"
_CODE = re.compile(r"^[A-Z]{3}$")


def check_currency(code: str) -> str:
    """``code`` as an ISO 4217 code (three letters, in capitals).

    Raises
    ------
    PlannerError
        When ``code`` is not three letters.

    Examples
    --------
    >>> check_currency("eur")
    'EUR'
    >>> check_currency("euro")
    Traceback (most recent call last):
    ...
    planner.errors.PlannerError: currency 'euro' is not an ISO 4217 code; write three letters, e.g. EUR, USD or CHF
    """
    upper = code.strip().upper()
    if not _CODE.match(upper):
        raise PlannerError(f"currency {code!r} is not an ISO 4217 code; write three letters, e.g. EUR, USD or CHF")
    return upper


def currency(bind: Engine | Connection) -> str:
    """The database's currency code (``XXX`` until one is set)."""
    query = text("SELECT value FROM setting WHERE name = 'currency'")
    if isinstance(bind, Engine):
        with bind.connect() as conn:
            found = conn.execute(query).scalar()
    else:
        found = bind.execute(query).scalar()
    return found or DEFAULT_CURRENCY


def set_currency(engine: Engine, code: str) -> str:
    """Set the database's currency to ``code`` (ISO 4217) and return it in capitals.

    It only names the currency of the figures already stored; nothing is converted.
    """
    checked = check_currency(code)
    with engine.begin() as conn:
        conn.execute(
            text(
                "INSERT INTO setting (name, value) VALUES ('currency', :code) "
                "ON CONFLICT (name) DO UPDATE SET value = EXCLUDED.value, changed_at = now()"
            ),
            {"code": checked},
        )
    return checked
