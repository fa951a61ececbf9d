"""What-if commands: ``scenario create|solve|list|show``, ``compare`` and ``sweep``.

A scenario is a base week plus edits (``--edit "close W03"``, or a CSV/TOML
file of them); solving it stores a run of its own that the week views and
``resolve`` never see. ``compare`` shows what moved between any two week
runs, or between a scenario and its base week.
"""

from __future__ import annotations

import json
from pathlib import Path
from typing import Optional

import typer
from rich.table import Table
from rich.text import Text

from planner.cli.analysis import OutputFormat, number, units
from planner.cli.common import (
    COST_DECIMALS,
    DATABASE_URL,
    QUANTITY_DECIMALS,
    PlannerApp,
    app,
    console,
    engine,
    err_console,
    money,
    say,
)
from planner.errors import PlannerError

scenario_app = PlannerApp(help="What-if scenarios: a base week plus edits, solved without touching it.",
                          no_args_is_help=True, add_completion=False, rich_markup_mode=None)
app.add_typer(scenario_app, name="scenario")


@scenario_app.command("create")
def create(
    name: str = typer.Argument(..., metavar="NAME", help="A name of your choice, unique."),
    base: str = typer.Option(..., "--base", "-b", metavar="WEEK", help="The base week (ISO week, for example 2026-W40), or a linked horizon FIRST..LAST (the edits apply to every week)."),
    edit: Optional[list[str]] = typer.Option(None, "--edit", "-e", metavar="EDIT", help='An edit, for example "close W03" or '
                                             '"rate from P01 +8%" (repeatable).'),
    edits_file: Optional[Path] = typer.Option(None, "--edits-file", metavar="FILE", help="A CSV (action,target,value) or TOML file of edits."),
    description: Optional[str] = typer.Option(None, "--description", "-d", metavar="TEXT", help="Why the scenario exists."),
    cost_decimals: int = COST_DECIMALS,
    quantity_decimals: int = QUANTITY_DECIMALS,
    solve: bool = typer.Option(False, "--solve", help="Solve it right away."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Store a named what-if on a base week or linked horizon; its edits are checked first, the weeks are never changed.

    Example: planner scenario create no-w03 --base 2026-W52 --edit "close W03" --edit "rate mode rail -5%"
    (a horizon: --base 2026-W49..2026-W52)
    """
    from planner.database.snapshot import Scaling
    from planner.runs.scenarios import command_line_edits, create_scenario, read_edit_file

    edits = (read_edit_file(edits_file) if edits_file else []) + command_line_edits(edit or [])
    db = engine(database_url)
    create_scenario(db, name, base, edits, description=description,
                    scaling=Scaling(cost_decimals, quantity_decimals))
    say(f"scenario {name} on {base}: {len(edits)} edits stored")
    if solve:
        _solve_and_print(db, [name])


@scenario_app.command("solve")
def solve(
    names: list[str] = typer.Argument(..., metavar="NAMES", help="Scenario names."),
    cold: bool = typer.Option(False, "--cold", help="Solve from scratch (OR-Tools), not from the base run."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """Solve scenarios on their base week's current snapshot; each stores a pinned run of its own.

    Example: planner scenario solve no-w03 rail-cheaper
    """
    db = engine(database_url)
    _solve_and_print(db, names, warm=not cold)


def _solve_and_print(db, names: list[str], warm: bool = True) -> None:
    from planner.runs.scenarios import solve_scenario
    from planner.runs.weekly import certificate_word

    table = Table("scenario", "run", "status", "cost", "engine", "certificate", "seconds", title="Scenario runs")
    failed, errors = False, []
    for name in names:
        try:
            done = solve_scenario(db, name, warm=warm)
        except PlannerError as err:
            # the other scenarios go on; this one stored nothing
            errors.append(f"{name}: {err}")
            table.add_row(name, "-", "not solved", "-", "-", "-", "-")
            continue
        s = done.summary
        failed |= not s.ok
        table.add_row(name, str(s.run_id), s.status, money(s.cost), done.engine or "-",
                      certificate_word(s.certificate_ok), f"{s.seconds['total']:.2f}")
        if done.note:
            say(f"note: {done.note}")
        if not s.ok:
            say(f"{name}: {s.message}")
    console.print(table)
    for error in errors:
        err_console.print(Text.assemble(("error: ", "bold red"), error), highlight=False, soft_wrap=True)
    if errors or failed:
        raise typer.Exit(2 if errors else 1)


@scenario_app.command("list")
def list_command(database_url: Optional[str] = DATABASE_URL) -> None:
    """Every scenario, its base week, edits and latest run.

    Example: planner scenario list
    """
    from planner.runs.scenarios import list_scenarios

    rows = list_scenarios(engine(database_url))
    table = Table("scenario", "base", "edits", "latest run", "status", "cost", "engine", "made by", "description")
    for r in rows:
        table.add_row(r["name"], r["base"], str(r["edits"]), str(r["run_id"] or "-"), r["status"] or "-",
                      money(r["cost"]), r["engine"] or "-", r["created_by"], r["description"] or "")
    console.print(table)


@scenario_app.command("show")
def show(name: str = typer.Argument(..., metavar="NAME", help="Scenario name."), database_url: Optional[str] = DATABASE_URL) -> None:
    """A scenario's base week, its edits in order (with where each was written) and its runs.

    Example: planner scenario show no-w03
    """
    from planner.runs.scenarios import scenario_details

    sc, edits, runs = scenario_details(engine(database_url), name)
    made = f"batch {sc['batch_id']} when made" if sc["last_period"] is None else "a linked horizon"
    say(f"scenario {sc['name']} on {sc['base']} ({made}), by {sc['created_by']} "
        f"at {sc['created_at']:%Y-%m-%d %H:%M}" + (f": {sc['description']}" if sc["description"] else ""))
    table = Table("#", "edit", "written in", title="Edits, applied in this order")
    for k, e in enumerate(edits, start=1):
        table.add_row(str(k), e.text(), f"{e.source}:{e.line}")
    console.print(table)
    table = Table("run", "status", "cost", "engine", "batch", title="Runs")
    for r in runs:
        table.add_row(str(r["run_id"]), r["status"], money(r["cost"]), r["engine"] or "-",
                      "-" if r["batch_id"] is None else str(r["batch_id"]))
    console.print(table)


@app.command()
def compare(
    runs: Optional[list[int]] = typer.Argument(None, metavar="RUN_IDS", help="Two run ids: the reference, then the one compared."),
    scenario: Optional[str] = typer.Option(None, "--scenario", "-s", metavar="NAME", help="Compare a scenario's latest run with its base week's."),
    section: Optional[str] = typer.Option(None, "--section", metavar="SECTION", help="Only cost, prices, flows or binding."),
    rows: int = typer.Option(15, "--rows", metavar="N", help="Rows per table (table and HTML)."),
    html: Optional[Path] = typer.Option(None, "--html", metavar="FILE", help="Also write the comparison as one self-contained HTML file."),
    output_format: OutputFormat = typer.Option(OutputFormat.table, "--format", metavar="FORMAT", help="table, csv or json."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """What moved between two week runs: cost by echelon and mode, site prices, lane flows, binding limits.

    Example: planner compare 41 57      planner compare --scenario no-w03 --format csv --section prices
    """
    from planner.reports.compare import SECTIONS, compare_runs
    from planner.reports.formats import records
    from planner.runs.scenarios import scenario_runs

    if section is not None and section not in SECTIONS:
        raise PlannerError(f"unknown section {section!r}; use one of {', '.join(SECTIONS)}")
    if (scenario is None) == (len(runs or []) != 2):
        raise PlannerError("give two run ids, or --scenario NAME")
    db = engine(database_url)
    a, b = scenario_runs(db, scenario) if scenario else runs
    result = compare_runs(db, a, b)
    if html is not None:
        from planner.reports.html import render_comparison

        html.write_text(render_comparison(result, rows=rows), encoding="utf-8")
        err_console.print(f"comparison written to {html}", highlight=False, soft_wrap=True)
    chosen = [section] if section else list(SECTIONS)
    if output_format == OutputFormat.json:
        out = {name: records(result.section(name)) for name in chosen}
        print(json.dumps(out if section is None else out[section], indent=2))
    elif output_format == OutputFormat.csv:
        for name in chosen:
            frame = result.section(name)
            print(frame.assign(section=name).to_csv(index=False) if section is None else frame.to_csv(index=False),
                  end="")
    else:
        say(result.headline())
        for name in chosen:
            console.print(comparison_table(result, name, rows))


def comparison_table(result, name: str, rows: int) -> Table:
    """One section of a comparison as a rich table (the first ``rows`` rows)."""
    frame = result.section(name).head(rows)
    if name == "cost":
        table = Table("echelon", "mode", "cost a", "cost b", "difference", title="Lane cost by echelon and mode")
        for r in frame.itertuples():
            table.add_row(r.echelon or "", r.mode or "", money(r.cost_a), money(r.cost_b), money(r.difference))
    elif name == "prices":
        table = Table("site", "kind", "price a", "range a", "price b", "range b", "moved", "determined",
                      title="Site prices, largest moves first")
        for r in frame.itertuples():
            table.add_row(r.site, r.kind or "", number(r.price_a), f"{number(r.low_a)} .. {number(r.high_a)}",
                          number(r.price_b), f"{number(r.low_b)} .. {number(r.high_b)}", number(r.difference),
                          "yes" if r.determined else "no (ranges overlap)")
    elif name == "flows":
        table = Table("lane", "flow a", "flow b", "change", title="Lanes whose flow changed")
        for r in frame.itertuples():
            table.add_row(r.lane, units(r.flow_a), units(r.flow_b), units(r.difference))
    else:
        table = Table("limit", "what", "value a", "value b", "change", title="Limits that became or stopped binding")
        for r in frame.itertuples():
            table.add_row(r.limit_kind, r.label, number(r.value_a), number(r.value_b), r.change)
    return table


#: Per figure swept: the slope's key in CSV/JSON, its column title, the sign
#: that turns the cost's slope into it (a capacity's slope is minus the saving),
#: and the table title's words for the figure.
_SWEEP_COLUMNS = {
    "rate": ("flow", "flow on the lane (slope)", 1, "the rate of"),
    "capacity": ("saving_per_unit", "saving of one more unit", -1, "the capacity of"),
    "throughput": ("saving_per_unit", "saving of one more unit", -1, "the throughput capacity of"),
    "demand": ("cost_per_unit", "cost of one more unit", 1, "the demand of"),
}


@app.command()
def sweep(
    rate: Optional[str] = typer.Option(None, "--rate", "--lane", metavar="LANE",
                                       help="Vary this lane's rate (ORIGIN->DESTINATION MODE)."),
    capacity: Optional[str] = typer.Option(None, "--capacity", metavar="LANE", help="Vary this lane's capacity."),
    throughput: Optional[str] = typer.Option(None, "--throughput", metavar="WAREHOUSE",
                                             help="Vary this warehouse's throughput capacity."),
    demand: Optional[str] = typer.Option(None, "--demand", metavar="CUSTOMER", help="Vary this customer's demand."),
    low: str = typer.Option(..., "--from", metavar="FIGURE", help="Lowest figure (money for a rate, units otherwise)."),
    high: str = typer.Option(..., "--to", metavar="FIGURE", help="Highest figure."),
    at: list[str] = typer.Option([], "--at", metavar="FIGURE",
                                 help="Also give the optimal cost at this figure (repeatable)."),
    period: Optional[str] = typer.Option(None, "--period", "-p", metavar="WEEK", help="The week (its current snapshot)."),
    scenario: Optional[str] = typer.Option(None, "--scenario", "-s", metavar="NAME", help="A scenario instead of a week."),
    output_format: OutputFormat = typer.Option(OutputFormat.table, "--format", metavar="FORMAT", help="table, csv or json."),
    database_url: Optional[str] = DATABASE_URL,
) -> None:
    """The optimal cost as one figure varies: exact breakpoints, with the slope on each piece.

    Vary a lane's rate (the slope is the lane's flow), a lane's capacity or a
    warehouse's throughput (the saving of one more unit), or a customer's demand
    (the cost of one more unit). With --at, also the cost at those figures; csv
    then prints those rows, json an object with "pieces" and "at".

    Example: planner sweep -p 2026-W52 --rate "P02->W03 road" --from 3 --to 8
    """
    from decimal import Decimal, InvalidOperation

    from planner.runs.scenarios import cost_at
    from planner.runs.scenarios import sweep as sweep_figure

    chosen = {k: v for k, v in (("rate", rate), ("capacity", capacity), ("throughput", throughput),
                                ("demand", demand)) if v is not None}
    if len(chosen) != 1:
        raise PlannerError("name one figure to vary: --rate LANE, --capacity LANE, --throughput WAREHOUSE "
                           "or --demand CUSTOMER")
    (figure, target), = chosen.items()
    pieces = sweep_figure(engine(database_url), figure, target, low, high, period=period, scenario=scenario)
    slope_key, slope_title, sign, what = _SWEEP_COLUMNS[figure]

    def value(text_: str) -> Decimal:
        try:
            return Decimal(text_)
        except InvalidOperation:
            raise PlannerError(f"--at {text_!r} is not a number") from None

    grid = [(value(x), *cost_at(pieces, value(x))) for x in at]
    rows = [{f"{figure}_from": p.start, f"{figure}_to": p.end, slope_key: _signed(sign, p.slope),
             "cost_from": p.cost_from, "cost_to": p.cost_to} for p in pieces]
    grid_rows = [{figure: x, "cost": cost, slope_key: _signed(sign, slope)} for x, cost, slope in grid]
    if output_format == OutputFormat.json:
        from planner.reports.formats import json_value

        def listed(items: list[dict]) -> list[dict]:
            return [{k: json_value(v) for k, v in r.items()} for r in items]

        print(json.dumps({"pieces": listed(rows), "at": listed(grid_rows)} if at else listed(rows), indent=2))
    elif output_format == OutputFormat.csv:
        import pandas as pd

        shown = grid_rows if at else rows
        print(pd.DataFrame(shown, columns=list(shown[0])).to_csv(index=False), end="")
    else:
        table = Table(f"{figure} from", f"{figure} to", slope_title, "cost from", "cost to",
                      title=f"Optimal cost as {what} {target} varies", caption="breakpoints are exact")
        for row in rows:
            table.add_row(_figure_text(figure, row[f"{figure}_from"]), _figure_text(figure, row[f"{figure}_to"]),
                          _slope_text(figure, row[slope_key]), money(row["cost_from"]), money(row["cost_to"]))
        console.print(table)
        if grid:
            table = Table(figure, slope_title, "optimal cost", title="At the figures asked for")
            for row in grid_rows:
                table.add_row(_figure_text(figure, row[figure]), _slope_text(figure, row[slope_key]),
                              money(row["cost"]))
            console.print(table)


def _signed(sign: int, slope):
    """``slope`` or minus it, never a negative zero."""
    return slope if sign > 0 else 0 - slope


def _figure_text(figure: str, value) -> str:
    """A swept figure for a table: a rate as money, a capacity or a demand as units."""
    return number(value) if figure == "rate" else units(value)


def _slope_text(figure: str, slope) -> str:
    """A slope for a table: a lane's flow as units, a saving or cost per unit as money."""
    return units(slope) if figure == "rate" else number(slope)
