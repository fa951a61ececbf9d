"""The weekly report's sections and their columns, defined once for every way of showing them.

The command line (rich tables), CSV and JSON (for scripts) and the HTML report
all take a section's title, its columns, their headings and how each figure is
written from :data:`SECTIONS`, in this order, so a column has one name and one
heading everywhere. Headings may name the week reported on (``{period}``) and
the week compared with (``{previous}``); money headings end with the
database's currency code, e.g. ``cost (EUR)``.
"""

from __future__ import annotations

from dataclasses import dataclass

from planner.reports.queries import format_number

__all__ = ["SECTIONS", "Field", "Section", "cell_text"]


@dataclass(frozen=True)
class Field:
    """One column of a section: the frame's column, its heading, and how its figures read.

    ``kind`` is ``text``, ``per_unit`` (money per unit), ``total`` (money),
    ``units`` (a quantity), ``rank`` or ``flag`` (``yes`` or blank in tables,
    ``true``/``false`` for scripts); see :mod:`planner.reports.formats`.
    """

    column: str
    heading: str
    kind: str = "text"

    @property
    def numeric(self) -> bool:
        return self.kind in ("per_unit", "total", "units", "rank")

    @property
    def money(self) -> bool:
        return self.kind in ("per_unit", "total")


@dataclass(frozen=True)
class Section:
    """A table of the weekly report."""

    name: str
    title: str
    fields: tuple[Field, ...]
    empty: str  #: said instead of the table when it has no rows
    note: str = ""  #: one sentence shown under the title

    def heading(self, field: Field, period: str, previous: str | None, currency: str = "") -> str:
        """A column's heading: the weeks named, the currency after money."""
        words = field.heading.format(period=period, previous=previous or "previous week")
        return f"{words} ({currency})" if currency and field.money else words

    def titled(self, period: str, previous: str | None) -> str:
        """The section's title; without "versus ..." when there is no previous week to compare with."""
        if previous is None:
            return self.title.split(" versus ")[0]
        return self.title.format(period=period, previous=previous)

    def said_when_empty(self, period: str, previous: str | None) -> str:
        """What the section says instead of an empty table."""
        if previous is None and "{previous}" in self.empty:
            return f"no previous week to compare {period} with"
        return self.empty.format(period=period, previous=previous)

    @property
    def kinds(self) -> dict[str, str]:
        """Column -> kind, for :mod:`planner.reports.formats`."""
        return {f.column: f.kind for f in self.fields if f.kind != "text"}

    @property
    def columns(self) -> list[str]:
        return [f.column for f in self.fields]


SECTIONS: tuple[Section, ...] = (
    Section(
        "cost",
        "Cost by echelon and mode",
        (Field("echelon", "echelon"), Field("mode", "mode"), Field("units", "units", "units"),
         Field("cost", "cost", "total")),
        "nothing was moved",
        "Lanes by echelon, then mode; then warehouse handling, stock holding (linked horizons) and "
        "shortage penalties. They add up to the week's cost.",
    ),
    Section(
        "binding",
        "Top binding capacities",
        (Field("rank", "rank", "rank"), Field("kind", "kind"), Field("label", "capacity of"),
         Field("capacity_value", "value of one more unit", "per_unit"),
         Field("value_less", "cost of one unit less", "per_unit"),
         Field("capacity", "capacity", "units"), Field("flow", "flow", "units")),
        "no lane or warehouse is worth more capacity",
        "Exact one-sided values: what one more unit of capacity saves, and what one unit less costs "
        "('-' where one unit less leaves no feasible plan). They differ where the plan is degenerate "
        "at that capacity; a capacity that is full but worth nothing more is not ranked.",
    ),
    Section(
        "moves",
        "Biggest price moves versus {previous}",
        (Field("site", "site"), Field("kind", "kind"), Field("region", "region"),
         Field("previous_price", "{previous}", "per_unit"), Field("price", "{period}", "per_unit"),
         Field("change", "change", "per_unit"), Field("price_low", "price low", "per_unit"),
         Field("price_high", "price high", "per_unit"), Field("degenerate", "degenerate", "flag")),
        "no price moved versus {previous}",
        "Prices per unit; price low and price high bound every optimal price ('-': no further unit can be "
        "moved that way); a degenerate price is not unique and may move with no change in the data.",
    ),
    Section(
        "shortages",
        "Shortages",
        (Field("customer", "customer"), Field("name", "name"), Field("region", "region"),
         Field("demand", "demand", "units"),
         Field("units_short", "units short", "units"), Field("penalty", "penalty per unit", "per_unit"),
         Field("penalty_cost", "penalty cost", "total")),
        "no shortage: every customer's demand is met",
    ),
)


def cell_text(field: Field, value) -> str:
    """A figure as the tables show it; ``-`` for none.

    Examples
    --------
    >>> from decimal import Decimal
    >>> cell_text(Field("cost", "cost", "total"), Decimal("12.5000")), cell_text(Field("u", "u", "units"), None)
    ('12.50', '-')
    >>> cell_text(Field("degenerate", "degenerate", "flag"), True)
    'yes'
    """
    if field.kind == "flag":
        return "yes" if value is True else ""
    if field.kind == "text":
        return "" if value is None else str(value)
    if value is None or value != value:  # NULL or NaN
        return "-"
    if field.kind == "rank":
        return str(int(value))
    return format_number(value, 2 if field.money else 0)
