"""Report rows for scripts: JSON-ready values and records.

Numbers from the database are exact :class:`~decimal.Decimal` values; JSON
gets them as numbers, dates as ISO 8601 text.
"""

from __future__ import annotations

import datetime
import math
from decimal import Decimal
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["json_value", "records"]


def json_value(value):
    """A database value as JSON: numbers stay numbers, dates become ISO 8601 text.

    Examples
    --------
    >>> json_value(Decimal("470.0000")), json_value(Decimal("12.3456")), json_value(None)
    (470, 12.3456, None)
    >>> json_value(datetime.date(2026, 3, 2))
    '2026-03-02'
    """
    if value is None or (isinstance(value, float) and math.isnan(value)):
        return None
    if isinstance(value, Decimal):
        return int(value) if value == value.to_integral_value() else float(value)
    if isinstance(value, (datetime.date, datetime.datetime)):
        return value.isoformat()
    if hasattr(value, "item"):  # numpy scalars
        return value.item()
    return value


def records(frame: "pd.DataFrame") -> list[dict]:
    """Rows of ``frame`` as JSON-ready dicts."""
    return [{k: json_value(v) for k, v in row.items()} for row in frame.to_dict(orient="records")]
