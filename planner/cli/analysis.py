"""Commands that look at stored runs: ``prices``, ``report``, ``explain``.

``planner prices`` lists site prices with their ranges; ``planner report`` shows one
week: cost by echelon and mode, top binding capacities, biggest price moves versus
the previous week and shortages. Both print rich tables, or CSV / JSON for scripts
(``--format``), and can write PNG charts; ``report --html`` writes the weekly HTML
report. When there is nothing to show they say so and exit 0. ``planner explain``
prints the marginal route behind a site's price.
"""

from __future__ import annotations

import json
from enum import Enum
from pathlib import Path
from typing import TYPE_CHECKING, Optional

import typer
from rich.table import Table

from planner.cli.common import DATABASE_URL, app, console, engine, err_console, fail
from planner.errors import PlannerError
from planner.reports.formats import json_value, records

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
    target.print(message, highlight=False, soft_wrap=True)


def _write_png(path: Path, data: bytes, what: str) -> None:
    path.write_bytes(data)
    err_console.print(f"{what} written to {path}", highlight=False, soft_wrap=True)


@app.command()
def prices(
    site: Optional[str] = typer.Argument(None, help="Site code (default: every site)."),
    first: Optional[str] = typer.Option(None, "--from", help="First ISO week, e.g. 2026-W45."),
    last: Optional[str] = typer.Option(None, "--to", help="Last ISO week, e.g. 2026-W52."),
    kind: Optional[str] = typer.Option(None, "--kind", help="Only plant, warehouse or customer sites."),
    run_id: Optional[int] = typer.Option(None, "--run", help="Prices of this run instead of each week's latest optimal run."),
    output_format: OutputFormat = typer.Option(OutputFormat.table, "--format", help="table, csv or json."),
    chart: Optional[Path] = typer.Option(None, "--chart", help="Write a PNG of SITE's price with its [low, high] range."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Site shadow prices per week with their valid [low, high] range.

    Example: planner prices C017 --from 2026-W45 --to 2026-W52
    """
    from planner.reports.queries import site_prices

    try:
        if chart is not None and site is None:
            raise PlannerError("--chart draws one site: name it, e.g. planner prices C017 --chart c017.png")
        frame = site_prices(engine(database_url), site, first, last, kind=kind, run_id=run_id)
    except (PlannerError, ValueError) as err:
        fail(err)
    if frame.empty:
        what = f"site {site}" if site else "any site"
        span = f" between {first or 'the first week'} and {last or 'the last week'}" if first or last else ""
        _say(
            f"no prices for {what}{span}: no optimal run there yet; solve weeks with `planner solve --all`",
            output_format,
        )
    if output_format == OutputFormat.csv:
        print(frame.to_csv(index=False), end="")
    elif output_format == OutputFormat.json:
        print(json.dumps(records(frame), indent=2))
    elif not frame.empty:
        table = Table(
            "period", "site", "kind", "region", "price", "low", "high", "change", "degenerate",
            caption="low/high '-': no further unit can be moved that way",
        )
        for row in frame.itertuples(index=False):
            table.add_row(
                row.period, row.site, row.kind or "", row.region or "", number(row.price),
                number(row.price_low), number(row.price_high), number(row.price_change),
                "yes" if row.degenerate else "",
            )
        console.print(table)
    if chart is not None and not frame.empty:
        from planner.reports.charts import price_chart

        _write_png(chart, price_chart(frame), f"price chart of {site}")

@app.command()
def report(
    period: str = typer.Option(..., "--period", "-p", help="ISO week, e.g. 2026-W49."),
    top: int = typer.Option(10, "--top", min=1, help="How many binding capacities and price moves to show."),
    section: Optional[Section] = typer.Option(None, "--section", help="Only this table: cost, binding, moves or shortages."),
    run_id: Optional[int] = typer.Option(None, "--run", help="Report this week run instead of the latest optimal one."),
    output_format: OutputFormat = typer.Option(OutputFormat.table, "--format", help="table, csv or json."),
    html: Optional[Path] = typer.Option(None, "--html", help="Also write the weekly report as one self-contained HTML file."),
    chart: Optional[Path] = typer.Option(None, "--chart", help="Also write a PNG picture of the week's network."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """One week: cost by echelon and mode, binding capacities, price moves, shortages.

    Example: planner report --period 2026-W49 --html week49.html
    """
    from planner.reports.queries import week_report

    try:
        db_engine = engine(database_url)
        result = week_report(db_engine, period, top=top, run_id=run_id)
    except (PlannerError, ValueError) as err:
        fail(err)
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
        _print_report(console, result, section)
    if html is not None:
        from planner.reports.html import render_week_report

        html.write_text(render_week_report(db_engine, result), encoding="utf-8")
        err_console.print(f"weekly report of {period} written to {html}", highlight=False, soft_wrap=True)
    if chart is not None:
        from planner.reports.charts import network_chart
        from planner.reports.queries import network_of_week

        sites, lanes, in_use = network_of_week(db_engine, period, run_id=run_id)
        png = network_chart(sites, lanes, title=f"Network of {period}", lanes_in_use=in_use)
        _write_png(chart, png, f"network picture of {period}")


def _sections(section: Section | None):
    from planner.reports.sections import SECTIONS

    return [s for s in SECTIONS if section is None or s.name == section.value]


def _section_frame(result, spec) -> "pd.DataFrame":
    frame = result.sections()[spec.name]
    return frame[[c for c in spec.columns if c in frame.columns]] if not frame.empty else frame


def _report_csv(result, section: Section | None) -> str:
    """One CSV: the chosen section's columns, or every section with a ``section`` column."""
    import pandas as pd

    if section is not None:
        (spec,) = _sections(section)
        frame = _section_frame(result, spec)
        return (frame if not frame.empty else pd.DataFrame(columns=spec.columns)).to_csv(index=False)
    frames = [_section_frame(result, spec).assign(section=spec.name) for spec in _sections(None)]
    frames = [f for f in frames if not f.empty]
    if not frames:
        return "section\n"
    stacked = pd.concat(frames, ignore_index=True)
    return stacked[["section"] + [c for c in stacked.columns if c != "section"]].to_csv(index=False)


def _report_json(result, section: Section | None) -> dict | list:
    if section is not None:
        (spec,) = _sections(section)
        return records(_section_frame(result, spec))
    run = None if result.run is None else {k: json_value(v) for k, v in result.run.items()}
    body = {"period": result.period, "previous_period": result.previous_period, "run": run}
    body.update({spec.name: records(_section_frame(result, spec)) for spec in _sections(None)})
    body["notes"] = list(result.notes) + ([result.message] if result.message else [])
    return body


def _print_report(console, result, section: Section | None) -> None:
    from planner.reports.sections import cell_text
    from planner.runs.weekly import certificate_word

    run = result.run
    if section is None:
        certificate = certificate_word(run["certificate_ok"])
        console.print(
            f"[bold]{result.period}[/]: run {run['run_id']}, {run['status']}, cost {number(run['cost'])}, "
            f"dual objective {number(run['dual_objective'])}, certificate {certificate}, "
            f"shortage {units(run['shortage_units'])} units, solved at {run['solved_at']:%Y-%m-%d %H:%M %Z}",
            highlight=False, soft_wrap=True,
        )
        for note in result.notes:
            console.print(f"note: {note}", highlight=False, soft_wrap=True, markup=False)
    period, previous = result.period, result.previous_period
    for spec in _sections(section):
        frame = result.sections()[spec.name]
        if frame.empty:
            console.print(spec.empty.format(period=period, previous=previous), highlight=False, markup=False)
            continue
        table = Table(
            *(spec.heading(f, period, previous) for f in spec.fields),
            title=spec.titled(period, previous), caption=spec.note or None,
        )
        for record in frame.to_dict(orient="records"):
            table.add_row(*(cell_text(f, record.get(f.column)) for f in spec.fields))
        if spec.name == "cost":
            table.add_row("total", "", "", number(result.cost_total), style="bold")
        console.print(table)


@app.command()
def explain(
    site: str = typer.Argument(..., help="Site code."),
    period: str = typer.Option(..., "--period", "-p", help="ISO week."),
    run_id: Optional[int] = typer.Option(None, "--run", help="A run id (default: latest optimal run)."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Show the chain of lanes the marginal unit to SITE travels, with the running cost.

    Example: planner explain C017 --period 2026-W49
    """
    from planner.reports.explain import explain_site

    try:
        explanation = explain_site(engine(database_url), site, period, run_id=run_id)
    except PlannerError as err:
        fail(err)
    console.print(explanation.text(), markup=False, highlight=False, soft_wrap=True)
    if explanation.steps:
        table = Table("step", "unit cost", "running")
        for step in explanation.steps:
            if step.kind == "spare":
                what = f"spare supply of {step.label}"
            else:
                what = step.label if step.forward else f"one unit less: {step.label}"
            table.add_row(f"{step.kind}: {what}", f"{step.unit_cost:,.4f}", f"{step.running:,.4f}")
        console.print(table)


@app.command("rate-ranges")
def rate_ranges_command(
    period: str = typer.Option(..., "--period", "-p", help="ISO week."),
    lane: Optional[list[str]] = typer.Option(None, "--lane", help="A lane as ORIGIN->DESTINATION MODE (repeatable)."),
    site: Optional[str] = typer.Option(None, "--site", help="Only lanes leaving or entering this site."),
    state: Optional[str] = typer.Option(None, "--state", help="Only lanes that are idle, in use, at capacity or at minimum."),
    routes: Optional[bool] = typer.Option(None, "--routes/--no-routes", help="Show the route behind each end (default: for one lane)."),
    run_id: Optional[int] = typer.Option(None, "--run", help="A week run of the period (default: its latest optimal run)."),
    output_format: OutputFormat = typer.Option(OutputFormat.table, "--format", help="table, csv or json."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """How far each lane's rate can move before the stored plan changes, and why.

    Example: planner rate-ranges -p 2026-W49 --lane "W04->C34 road"
    """
    from planner.reports.rates import lane_rate_ranges

    try:
        found = lane_rate_ranges(
            engine(database_url), period, lanes=lane, site=site, state=state, run_id=run_id,
            routes=routes if routes is not None else len(lane or []) == 1,
        )
    except PlannerError as err:
        fail(err)
    rows = [
        {"period": r.period, "lane": r.lane, "state": r.state, "rate": r.rate, "flow": r.flow,
         "rate_low": r.low, "rate_high": r.high}
        for r in found
    ]
    if output_format == OutputFormat.json:
        print(json.dumps([{k: json_value(v) for k, v in row.items()} for row in rows], indent=2))
    elif output_format == OutputFormat.csv:
        import pandas as pd

        print(pd.DataFrame(rows, columns=list(rows[0])).to_csv(index=False), end="")
    elif any(r.low_route or r.high_route for r in found):
        for r in found:
            console.print(r.text(), markup=False, highlight=False, soft_wrap=True)
    else:
        table = Table("lane", "state", "flow", "rate", "lowest rate", "highest rate",
                      title=f"Rate ranges in {period}", caption="'-': no limit that way")
        for r in found:
            table.add_row(r.lane, r.state, units(r.flow), number(r.rate), number(r.low), number(r.high))
        console.print(table)
