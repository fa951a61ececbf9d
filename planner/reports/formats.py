"""How figures are written for scripts (CSV, JSON) and read by people (tables, HTML).

One rule for every output, so that a column never reads ``1265.0`` beside ``350.00``:

- **Money and quantities are exact decimal text at the run's precision.** A
  price per unit (prices, unit costs, values of capacity, penalties per unit)
  has as many decimals as the run keeps for unit costs (``--cost-decimals``,
  4 by default); a money total (costs, penalty costs, dual objective) as many
  as unit costs and quantities together; a quantity (flows, units, capacities)
  as many as the run keeps for quantities (``--quantity-decimals``, 0 by
  default). A figure with more decimals than that is written in full, never
  rounded. JSON gets the same text as a string (parse it with a decimal type,
  not a float); ids, ranks and counts are JSON integers.
- **Yes/no is ``true`` / ``false``** in CSV and JSON.
- **Dates and times are ISO 8601.**
- **Missing is empty** in CSV and ``null`` in JSON.

:data:`COLUMN_KINDS` says which kind each column of the views and reports is.
"""

from __future__ import annotations

import datetime
import math
from dataclasses import dataclass
from decimal import Decimal
from typing import TYPE_CHECKING

if TYPE_CHECKING:
    import pandas as pd

__all__ = ["COLUMN_KINDS", "Precision", "csv_text", "exact_text", "json_value", "records"]

_PER_UNIT = (
    "price", "price_low", "price_high", "price_change", "previous_price", "change", "price_out", "unit_cost",
    "reduced_cost", "capacity_value", "value_less", "penalty", "rate", "rate_low", "rate_high", "loosen_value",
    "tighten_cost", "holding_cost", "storage_value", "throughput_value", "handling_cost", "shortage_penalty",
)
_TOTAL = ("cost", "penalty_cost", "dual_objective", "duality_gap", "primal_cost")
_UNITS = (
    "flow", "units", "capacity", "demand", "units_short", "shortage_units", "spare_units", "min_quantity",
    "units_more", "units_less", "bound", "stock", "high_units", "loosen_units", "tighten_units", "shortage", "spare",
)
_FLAGS = ("degenerate", "at_capacity", "certificate_ok", "latest")
#: Kind of each figure column: ``per_unit`` money, ``total`` money, ``units`` or ``flag``.
COLUMN_KINDS: dict[str, str] = {
    **dict.fromkeys(_PER_UNIT, "per_unit"),
    **dict.fromkeys(_TOTAL, "total"),
    **dict.fromkeys(_UNITS, "units"),
    **dict.fromkeys(_FLAGS, "flag"),
}


@dataclass(frozen=True)
class Precision:
    """Decimal places a run keeps: for unit costs, and for quantities.

    Examples
    --------
    >>> Precision(4, 0).places("per_unit"), Precision(4, 1).places("total"), Precision(4, 1).places("units")
    (4, 5, 1)
    """

    cost_decimals: int = 4
    quantity_decimals: int = 0

    def places(self, kind: str | None) -> int | None:
        """Decimal places of a column of ``kind``; None for columns that are not money or quantities."""
        return {
            "per_unit": self.cost_decimals,
            "total": self.cost_decimals + self.quantity_decimals,
            "units": self.quantity_decimals,
        }.get(kind or "")


def _missing(value) -> bool:
    if value is None:
        return True
    if isinstance(value, float):
        return math.isnan(value)
    return type(value).__name__ in ("NAType", "NaTType")  # pandas' missing values


def exact_text(value, places: int | None = None) -> str | None:
    """A number as exact decimal text with at least ``places`` decimals (never rounded); None for none.

    Examples
    --------
    >>> exact_text(Decimal("1265.0"), 4), exact_text(Decimal("350.00"), 4), exact_text(Decimal("0E-4"), 4)
    ('1265.0000', '350.0000', '0.0000')
    >>> exact_text(Decimal("0.123456"), 4), exact_text(Decimal("-Infinity"), 4), exact_text(None)
    ('0.123456', '-Infinity', None)
    """
    if _missing(value):
        return None
    number = value if isinstance(value, Decimal) else Decimal(str(value))
    if not number.is_finite():
        return "Infinity" if number > 0 else "-Infinity" if number < 0 else "NaN"
    if places is not None and -number.as_tuple().exponent < places:
        number = number.quantize(Decimal(1).scaleb(-places))
    return format(number, "f")


def json_value(value, kind: str | None = None, precision: Precision = Precision()):
    """A database value as JSON: money and quantities as exact decimal text, dates as ISO 8601.

    Examples
    --------
    >>> json_value(Decimal("470.0000"), "total"), json_value(Decimal("12.3456"), "per_unit"), json_value(None)
    ('470.0000', '12.3456', None)
    >>> json_value(datetime.date(2026, 3, 2)), json_value(7), json_value(True, "flag")
    ('2026-03-02', 7, True)
    """
    if _missing(value):
        return None
    if hasattr(value, "item") and not isinstance(value, Decimal):  # numpy scalars
        value = value.item()
    if isinstance(value, bool):
        return value
    if isinstance(value, (datetime.date, datetime.datetime)):
        return value.isoformat()
    places = precision.places(kind)
    if isinstance(value, Decimal) or (places is not None and isinstance(value, (int, float))):
        return exact_text(value, places)
    return value


def _kinds(columns, kinds: dict[str, str] | None) -> dict[str, str | None]:
    chosen = COLUMN_KINDS if kinds is None else {**COLUMN_KINDS, **kinds}
    return {c: chosen.get(c) for c in columns}


def records(
    frame: "pd.DataFrame", precision: Precision = Precision(), kinds: dict[str, str] | None = None
) -> list[dict]:
    """Rows of ``frame`` as JSON-ready dicts (see the module's rule)."""
    by_column = _kinds(frame.columns, kinds)
    return [
        {k: json_value(v, by_column[k], precision) for k, v in row.items()}
        for row in frame.to_dict(orient="records")
    ]


def csv_text(frame: "pd.DataFrame", precision: Precision = Precision(), kinds: dict[str, str] | None = None) -> str:
    """``frame`` as CSV: exact decimals at the run's precision, ``true``/``false``, ISO dates, empty for none.

    Examples
    --------
    >>> import pandas as pd
    >>> frame = pd.DataFrame({"cost": [Decimal("1265.0"), Decimal("350.00")], "degenerate": [True, False]})
    >>> print(csv_text(frame), end="")
    cost,degenerate
    1265.0000,true
    350.0000,false
    """
    import pandas as pd

    by_column = _kinds(frame.columns, kinds)
    written = {}
    for column in frame.columns:
        values = [json_value(v, by_column[column], precision) for v in frame[column].tolist()]
        written[column] = ["true" if v is True else "false" if v is False else v for v in values]
    return pd.DataFrame(written, columns=list(frame.columns), dtype=object).to_csv(index=False)
