"""Commands that look at stored runs: ``report``, ``explain``, ``prices``, ``rate-ranges``.

``planner report`` shows one week: cost by echelon and mode, top binding
capacities, biggest price moves versus the previous week and shortages;
``planner explain`` the route behind a site's price; ``planner prices`` site
prices with their ranges; ``planner rate-ranges`` how far lane rates may move.
They print tables, or CSV / JSON for scripts (``--format``; figures as exact
decimal text, see :mod:`planner.reports.formats`), and can write PNG charts;
``report --html`` writes the weekly HTML report.

Each accepts a week (its latest optimal run) or any run id (``--run``): for a
linked horizon the week is picked with ``--period``, which may be left out when
the run has one week. A week with nothing to show is said with the next step
that works (exit 0 for ``report`` and ``prices``; ``explain`` and
``rate-ranges`` need a plan and exit 2); a run that did not end optimal is
said with its status and message (exit 1).
"""

from __future__ import annotations

import json
from enum import Enum
from pathlib import Path
from typing import TYPE_CHECKING, Optional

import typer
from rich.table import Table

from planner.cli.common import DATABASE_URL, app, console, engine, err_console, tell

if TYPE_CHECKING:
    import pandas as pd

# pandas, matplotlib and the report queries are imported inside the commands, so
# that every other command starts fast.


class OutputFormat(str, Enum):
    """How a report command prints its rows."""

    table = "table"
    csv = "csv"
    json = "json"


class Section(str, Enum):
    """One table of the weekly report."""

    cost = "cost"
    binding = "binding"
    moves = "moves"
    shortages = "shortages"


PERIOD_OF_RUN = "ISO week, e.g. 2026-W49; with --run, the week inside a linked horizon."
RUN_OPTION = "Any run id (see `planner runs`), a week or a linked horizon (default: the week's latest optimal run)."
FORMAT = typer.Option(OutputFormat.table, "--format", metavar="FORMAT", help="table, csv or json.")


def number(value, decimals: int = 2) -> str:
    """A figure for a table (see :func:`planner.reports.queries.format_number`)."""
    from planner.reports.queries import format_number

    return format_number(value, decimals)


def units(value) -> str:
    """A quantity for a table (no forced decimals)."""
    return number(value, 0)


def _say(message: str, output_format: OutputFormat) -> None:
    # Scripts read stdout: there, messages go to stderr.
    target = console if output_format == OutputFormat.table else err_console
    target.print(message, markup=False, highlight=False, soft_wrap=True)


def _write_png(path: Path, data: bytes, what: str) -> None:
    path.write_bytes(data)
    tell(f"{what} written to {path}")


@app.command()
def report(
    period: Optional[str] = typer.Option(None, "--period", "-p", metavar="WEEK", help=PERIOD_OF_RUN),
    run_id: Optional[int] = typer.Option(None, "--run", metavar="ID", help=RUN_OPTION),
    top: int = typer.Option(10, "--top", min=1, metavar="N", help="How many binding capacities and price moves to show."),
    section: Optional[Section] = typer.Option(None, "--section", metavar="SECTION", help="Only this table: cost, binding, moves or shortages."),
    output_format: OutputFormat = FORMAT,
    html: Optional[Path] = typer.Option(None, "--html", metavar="PATH", help="Also write the weekly report as one self-contained HTML file."),
    chart: Optional[Path] = typer.Option(None, "--chart", metavar="PATH", help="Also write a PNG picture of the week's network."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """One week's cost, binding capacities, price moves, shortages.

    Cost by echelon and mode, the top binding capacities, the biggest price
    moves versus the previous week and the shortages, as tables, CSV, JSON
    or a self-contained HTML file.

    Example: planner report --period 2026-W49 --html week49.html
    """
    from planner.reports.queries import week_report

    db_engine = engine(database_url)
    result = week_report(db_engine, period, top=top, run_id=run_id)
    if result.empty:
        _say(result.message, output_format)
        if output_format == OutputFormat.json:
            print(json.dumps(_report_json(result, section), indent=2))
        return
    if output_format == OutputFormat.csv:
        print(_report_csv(result, section), end="")
    elif output_format == OutputFormat.json:
        print(json.dumps(_report_json(result, section), indent=2))
    else:
        _print_report(result, section)
    if html is not None:
        from planner.reports.html import render_week_report

        html.write_text(render_week_report(db_engine, result), encoding="utf-8")
        tell(f"weekly report of {result.period} written to {html}")
    if chart is not None:
        from planner.reports.charts import network_chart
        from planner.reports.queries import network_of_week

        sites, lanes, in_use = network_of_week(db_engine, result.period, run_id=int(result.run["run_id"]))
        title = f"Network of {result.period}" + (f" in linked horizon {result.run['period']}" if result.horizon else "")
        _write_png(chart, network_chart(sites, lanes, title=title, lanes_in_use=in_use), f"network picture of {result.period}")


def _sections(section: Section | None):
    from planner.reports.sections import SECTIONS

    return [s for s in SECTIONS if section is None or s.name == section.value]


def _section_frame(result, spec) -> "pd.DataFrame":
    frame = result.sections()[spec.name]
    return frame[[c for c in spec.columns if c in frame.columns]] if not frame.empty else frame


def _report_csv(result, section: Section | None) -> str:
    """One CSV: the chosen section's columns, or every section with a ``section`` column; money in ``currency``."""
    import pandas as pd

    from planner.reports.formats import csv_text

    specs = _sections(section)
    kinds = {k: v for spec in specs for k, v in spec.kinds.items()}
    if section is not None:
        (spec,) = specs
        frame = _section_frame(result, spec)
        frame = frame if not frame.empty else pd.DataFrame(columns=spec.columns)
        return csv_text(frame.assign(currency=result.currency), result.precision, kinds)
    frames = [_section_frame(result, spec).assign(section=spec.name) for spec in specs]
    frames = [f for f in frames if not f.empty]
    if not frames:
        return "section,currency\n"
    stacked = pd.concat(frames, ignore_index=True).assign(currency=result.currency)
    ordered = stacked[["section"] + [c for c in stacked.columns if c != "section"]]
    return csv_text(ordered, result.precision, kinds)


def _report_json(result, section: Section | None) -> dict | list:
    from planner.reports.formats import json_value, records

    if section is not None:
        (spec,) = _sections(section)
        return records(_section_frame(result, spec), result.precision, spec.kinds)
    run = None if result.run is None else {k: json_value(v, _RUN_KINDS.get(k), result.precision) for k, v in result.run.items()}
    body = {
        "period": result.period, "previous_period": result.previous_period, "currency": result.currency, "run": run,
    }
    if result.horizon:
        body["week_cost"] = json_value(result.cost_total, "total", result.precision)
    body.update({spec.name: records(_section_frame(result, spec), result.precision, spec.kinds) for spec in _sections(None)})
    body["notes"] = list(result.notes) + ([result.message] if result.message else [])
    return body


_RUN_KINDS = {"cost": "total", "dual_objective": "total", "duality_gap": "total", "shortage_units": "units",
              "spare_units": "units"}


def _print_report(result, section: Section | None) -> None:
    from planner.reports.html import run_words
    from planner.reports.sections import cell_text
    from planner.runs.weekly import certificate_word

    run, money = result.run, result.currency
    if section is None:
        cost = (
            f"cost of the week {number(result.cost_total)} {money} (of the horizon {number(run['cost'])})"
            if result.horizon else f"cost {number(run['cost'])} {money}"
        )
        console.print(
            f"[bold]{result.period}[/]: run {run['run_id']} ({run_words(result)}), {run['status']}, {cost}, "
            f"dual objective {number(run['dual_objective'])}, certificate {certificate_word(run['certificate_ok'])}, "
            f"shortage {units(run['shortage_units'])} units, solved at {run['solved_at']:%Y-%m-%d %H:%M %Z}",
            highlight=False, soft_wrap=True,
        )
        for note in result.notes:
            console.print(f"note: {note}", highlight=False, soft_wrap=True, markup=False)
    period, previous = result.period, result.previous_period
    for spec in _sections(section):
        frame = result.sections()[spec.name]
        if frame.empty:
            console.print(spec.said_when_empty(period, previous), highlight=False, markup=False)
            continue
        table = Table(
            *(spec.heading(f, period, previous, money) for f in spec.fields),
            title=spec.titled(period, previous), caption=spec.note or None,
        )
        for record in frame.to_dict(orient="records"):
            table.add_row(*(cell_text(f, record.get(f.column)) for f in spec.fields))
        if spec.name == "cost":
            table.add_row(f"total of {period}" if result.horizon else "total", "", "", number(result.cost_total), style="bold")
        console.print(table)


@app.command()
def explain(
    site: str = typer.Argument(..., metavar="SITE", help="Site code, e.g. C17."),
    period: Optional[str] = typer.Option(None, "--period", "-p", metavar="WEEK", help=PERIOD_OF_RUN),
    run_id: Optional[int] = typer.Option(None, "--run", metavar="ID", help=RUN_OPTION),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """The route the next unit to SITE would take, with its cost.

    Step by step, with the unit cost of each step and the running total.

    Example: planner explain C17 --period 2026-W49
    """
    from planner.reports.explain import explain_site

    db_engine = engine(database_url)
    explanation = explain_site(db_engine, site, period, run_id=run_id)
    _print_explanation(db_engine, explanation)


_STEP_WORDS = {"spare": "spare supply", "lane": "lane", "throughput": "handling", "shortage": "short at",
               "stock": "stock", "short-feed": "unmet demand"}


def _print_explanation(db_engine, explanation) -> None:
    from planner.database.settings import currency

    money = currency(db_engine)
    if explanation.price is None:
        console.print(explanation.text(), markup=False, highlight=False, soft_wrap=True)
        return
    console.print(
        f"{explanation.site} in {explanation.period}: one more unit costs {explanation.price:,.2f} {money}, by this route:",
        markup=False, highlight=False, soft_wrap=True,
    )
    table = Table("step", f"unit cost ({money})", f"running ({money})")
    for step in explanation.steps:
        what = _STEP_WORDS.get(step.kind, step.kind)
        if step.kind == "short-feed":
            label = what
        elif step.kind == "spare":
            label = f"{what} of {step.label}"
        else:
            label = f"{what} {step.label}" if step.forward else f"one unit less: {what} {step.label}"
        table.add_row(label, f"{step.unit_cost:,.4f}", f"{step.running:,.4f}")
    console.print(table)


@app.command()
def prices(
    site: Optional[str] = typer.Argument(None, metavar="SITE", help="Site code, e.g. C17 (default: every site)."),
    first: Optional[str] = typer.Option(None, "--from", metavar="WEEK", help="First ISO week, e.g. 2026-W45."),
    last: Optional[str] = typer.Option(None, "--to", metavar="WEEK", help="Last ISO week, e.g. 2026-W52."),
    kind: Optional[str] = typer.Option(None, "--kind", metavar="KIND", help="Only plant, warehouse or customer sites."),
    run_id: Optional[int] = typer.Option(None, "--run", metavar="ID", help="Prices of this run (any kind) instead of each week's latest optimal run."),
    output_format: OutputFormat = FORMAT,
    chart: Optional[Path] = typer.Option(None, "--chart", metavar="PATH", help="Write a PNG of SITE's price with its range."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Site shadow prices per week with their valid range.

    Each price comes with its range, price low to price high.

    Example: planner prices C17 --from 2026-W45 --to 2026-W52
    """
    from planner.database.settings import currency
    from planner.errors import PlannerError
    from planner.reports.catalog import choose_run
    from planner.reports.formats import Precision
    from planner.reports.queries import site_prices

    if chart is not None and site is None:
        raise PlannerError("--chart draws one site: name it, e.g. planner prices C17 --chart c17.png")
    db_engine = engine(database_url)
    precision, span = Precision(), None
    if run_id is not None:
        info = choose_run(db_engine, period=None, run_id=run_id, need_week=False).run
        precision, span = Precision(info.cost_decimals, info.quantity_decimals), info
    try:
        frame = site_prices(db_engine, site, first, last, kind=kind, run_id=run_id)
    except ValueError as err:
        raise PlannerError(str(err)) from err
    money = currency(db_engine)
    if frame.empty:
        _say(_no_prices(site, first, last), output_format)
    _print_prices(frame, output_format, precision, money)
    if chart is not None and not frame.empty:
        from planner.reports.charts import price_chart

        title = None if span is None else f"{site}: price per unit, {span.describe()}"
        _write_png(chart, price_chart(frame, title=title, currency=money), f"price chart of {site}")


def _no_prices(site, first, last) -> str:
    what = f"site {site}" if site else "any site"
    span = f" between {first or 'the first week'} and {last or 'the last week'}" if first or last else ""
    return f"no prices for {what}{span}: no optimal run there yet; see `planner periods` and `planner runs`"


def _print_prices(frame, output_format: OutputFormat, precision, money: str) -> None:
    from planner.reports.formats import csv_text, records

    if output_format == OutputFormat.csv:
        print(csv_text(frame.assign(currency=money), precision), end="")
    elif output_format == OutputFormat.json:
        print(json.dumps(records(frame.assign(currency=money), precision), indent=2))
    elif not frame.empty:
        table = Table(
            "period", "site", "kind", "region", f"price ({money})", f"price low ({money})", f"price high ({money})",
            f"change ({money})", "degenerate",
            caption="price low/high '-': no further unit can be moved that way; degenerate: the price is not unique",
        )
        for row in frame.itertuples(index=False):
            table.add_row(
                row.period, row.site, row.kind or "", row.region or "", number(row.price),
                number(row.price_low), number(row.price_high), number(row.price_change),
                "yes" if row.degenerate else "",
            )
        console.print(table)


@app.command("rate-ranges")
def rate_ranges_command(
    period: Optional[str] = typer.Option(None, "--period", "-p", metavar="WEEK", help=PERIOD_OF_RUN),
    lane: Optional[list[str]] = typer.Option(None, "--lane", metavar="LANE", help="A lane as ORIGIN->DESTINATION MODE, e.g. \"W04->C34 road\" (repeatable)."),
    site: Optional[str] = typer.Option(None, "--site", metavar="SITE", help="Only lanes leaving or entering this site."),
    state: Optional[str] = typer.Option(None, "--state", metavar="STATE", help="Only lanes that are idle, in use, at capacity or at minimum."),
    routes: Optional[bool] = typer.Option(None, "--routes/--no-routes", help="Show the route behind each end (default: for one lane)."),
    run_id: Optional[int] = typer.Option(None, "--run", metavar="ID", help=RUN_OPTION),
    output_format: OutputFormat = FORMAT,
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """How far lane rates can move before the plan changes.

    With the route behind each end of the range.

    Example: planner rate-ranges -p 2026-W49 --lane "W04->C34 road"
    """
    import pandas as pd

    from planner.database.settings import currency
    from planner.reports.formats import Precision, csv_text, records
    from planner.reports.rates import lane_rate_ranges

    db_engine = engine(database_url)
    found = lane_rate_ranges(
        db_engine, period, lanes=lane, site=site, state=state, run_id=run_id,
        routes=routes if routes is not None else len(lane or []) == 1,
    )
    money = currency(db_engine)
    frame = pd.DataFrame(
        [{"period": r.period, "lane": r.lane, "state": r.state, "rate": r.rate, "flow": r.flow,
          "rate_low": r.low, "rate_high": r.high, "currency": money} for r in found],
        columns=["period", "lane", "state", "rate", "flow", "rate_low", "rate_high", "currency"], dtype=object,
    )
    exact = Precision(0, 0)  # the figures already carry the run's decimals
    if output_format == OutputFormat.json:
        print(json.dumps(records(frame, exact), indent=2))
    elif output_format == OutputFormat.csv:
        print(csv_text(frame, exact), end="")
    elif any(r.low_route or r.high_route for r in found):
        for r in found:
            console.print(r.text(), markup=False, highlight=False, soft_wrap=True)
    else:
        table = Table("lane", "state", "flow", f"rate ({money})", f"rate low ({money})", f"rate high ({money})",
                      title=f"Rate ranges in {found[0].period}", caption="'-': no limit that way")
        for r in found:
            table.add_row(r.lane, r.state, units(r.flow), number(r.rate), number(r.low), number(r.high))
        console.print(table)
