"""The weekly report's sections and their columns, defined once for every way of showing them.

The command line (rich tables), CSV and JSON (for scripts) and the HTML report
all take a section's title, its columns, their headings and how each figure is
written from :data:`SECTIONS`, so a column has one name and one heading
everywhere. Headings may name the week reported on (``{period}``) and the week
compared with (``{previous}``).
"""

from __future__ import annotations

from dataclasses import dataclass

from planner.reports.queries import format_number

__all__ = ["SECTIONS", "Field", "Section", "cell_text"]


@dataclass(frozen=True)
class Field:
    """One column of a section: the frame's column, its heading, and how its figures read.

    ``kind`` is ``text``, ``money`` (two decimals or more), ``units`` (as many
    decimals as the figure has), ``rank`` or ``flag`` (``yes`` or blank).
    """

    column: str
    heading: str
    kind: str = "text"

    @property
    def numeric(self) -> bool:
        return self.kind in ("money", "units", "rank")


@dataclass(frozen=True)
class Section:
    """A table of the weekly report."""

    name: str
    title: str
    fields: tuple[Field, ...]
    empty: str  #: said instead of the table when it has no rows
    note: str = ""  #: one sentence shown under the title

    def heading(self, field: Field, period: str, previous: str) -> str:
        return field.heading.format(period=period, previous=previous)

    def titled(self, period: str, previous: str) -> str:
        return self.title.format(period=period, previous=previous)

    @property
    def columns(self) -> list[str]:
        return [f.column for f in self.fields]


SECTIONS: tuple[Section, ...] = (
    Section(
        "cost",
        "Cost by echelon and mode",
        (Field("echelon", "echelon"), Field("mode", "mode"), Field("units", "units", "units"),
         Field("cost", "cost", "money")),
        "nothing was moved",
    ),
    Section(
        "binding",
        "Top binding capacities",
        (Field("rank", "rank", "rank"), Field("kind", "kind"), Field("label", "capacity of"),
         Field("capacity_value", "value of one more unit", "money"),
         Field("value_less", "cost of one unit less", "money"),
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
         Field("previous_price", "{previous}", "money"), Field("price", "{period}", "money"),
         Field("change", "change", "money"), Field("price_low", "low", "money"),
         Field("price_high", "high", "money"), Field("degenerate", "not unique", "flag")),
        "no price moved versus {previous}",
        "Prices per unit; low and high bound every optimal price ('-': no further unit can be "
        "moved that way); a price that is not unique may move with no change in the data.",
    ),
    Section(
        "shortages",
        "Shortages",
        (Field("customer", "customer"), Field("name", "name"), Field("region", "region"),
         Field("demand", "demand", "units"),
         Field("units_short", "units short", "units"), Field("penalty", "penalty per unit", "money"),
         Field("penalty_cost", "penalty cost", "money")),
        "no shortage: every customer's demand is met",
    ),
)


def cell_text(field: Field, value) -> str:
    """A figure as the tables show it; ``-`` for none.

    Examples
    --------
    >>> from decimal import Decimal
    >>> cell_text(Field("cost", "cost", "money"), Decimal("12.5000")), cell_text(Field("u", "u", "units"), None)
    ('12.50', '-')
    >>> cell_text(Field("degenerate", "not unique", "flag"), True)
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
    return format_number(value, 2 if field.kind == "money" else 0)
