"""The weekly report as one self-contained HTML file.

Everything is in the file: styles inline on each element (mail programs drop
style sheets), charts as base64 PNG ``data:`` images, no scripts, no links to
fetch. It opens in a browser and stays readable when forwarded by e-mail.

Content: the week's run and certificate, cost by echelon and mode, a picture of
the network, the biggest price moves versus the previous week with a price chart
of the sites that moved most, the top binding capacities and the shortages.
"""

from __future__ import annotations

import base64
import datetime
from html import escape
from pathlib import Path

import pandas as pd
from sqlalchemy import Engine

from planner.errors import PlannerError
from planner.reports.charts import network_chart, price_chart
from planner.reports.queries import (
    WeekReport,
    format_number,
    network_of_week,
    site_prices,
    week_report,
)

__all__ = ["render_week_report", "write_week_report"]

#: How many of the biggest movers get a price chart.
PRICE_CHARTS = 3

_FONT = "font-family: Helvetica, Arial, sans-serif; color: #222;"
_TABLE = "border-collapse: collapse; margin: 8px 0 20px 0; font-size: 14px;"
_TH = "text-align: left; padding: 4px 10px; border-bottom: 2px solid #555; background: #f0f0f0;"
_TD = "padding: 3px 10px; border-bottom: 1px solid #ddd;"
_TD_NUMBER = _TD + " text-align: right; font-variant-numeric: tabular-nums;"
_H2 = "font-size: 18px; margin: 24px 0 6px 0; border-bottom: 1px solid #ccc;"
_NOTE = "color: #555; font-size: 13px;"


def _text(value, decimals: int | None) -> str:
    if value is None or (isinstance(value, float) and pd.isna(value)):
        return "-"
    if isinstance(value, bool):
        return "yes" if value else ""
    if decimals is not None:
        return format_number(value, decimals)
    return str(value)


def _table(frame: pd.DataFrame, columns: dict[str, str], numeric: dict[str, int]) -> str:
    """HTML table of ``frame``'s ``columns`` (name -> heading); every cell escaped.

    ``numeric`` maps the number columns to their least decimal places.
    """
    titles = list(columns.values())
    head = "".join(f'<th style="{_TH}">{escape(title)}</th>' for title in titles)
    rows = [f"<tr>{head}</tr>"] if any(titles) else []
    for record in frame.to_dict(orient="records"):
        cells = "".join(
            f'<td style="{_TD_NUMBER if name in numeric else _TD}">'
            f"{escape(_text(record[name], numeric.get(name)))}</td>"
            for name in columns
        )
        rows.append(f"<tr>{cells}</tr>")
    return f'<table style="{_TABLE}">{"".join(rows)}</table>'


def _image(png: bytes, alt: str) -> str:
    data = base64.b64encode(png).decode("ascii")
    return (
        f'<p><img src="data:image/png;base64,{data}" alt="{escape(alt)}" '
        f'style="max-width: 100%; height: auto; border: 1px solid #ddd;"></p>'
    )


def _section(title: str, body: str) -> str:
    return f'<h2 style="{_H2}">{escape(title)}</h2>{body}'


def _summary(report: WeekReport) -> str:
    run = report.run
    certificate = {True: "exact (primal cost = dual objective)", False: "FAILED", None: "-"}[run["certificate_ok"]]
    facts = {
        "run": run["run_id"],
        "status": run["status"],
        "cost": format_number(run["cost"]),
        "dual objective": format_number(run["dual_objective"]),
        "certificate": certificate,
        "shortage (units)": format_number(run["shortage_units"], 0),
        "solved at": f"{run['solved_at']:%Y-%m-%d %H:%M %Z}",
        "solver time (s)": round(float(run["solver_seconds"] or 0), 3),
        "input fingerprint": str(run["input_fingerprint"])[:16] + "...",
    }
    frame = pd.DataFrame({"what": list(facts), "value": list(facts.values())}, dtype=object)
    return _table(frame, {"what": "", "value": ""}, numeric={})


def render_week_report(engine: Engine, report: WeekReport) -> str:
    """The HTML page of a :class:`~planner.reports.queries.WeekReport`, charts included.

    Parameters
    ----------
    engine : sqlalchemy.Engine
        Where the charts' data (network, price histories) is read from.
    report : WeekReport
        From :func:`planner.reports.queries.week_report`; must not be empty.

    Returns
    -------
    str
        A complete HTML document.

    Raises
    ------
    PlannerError
        If the report has no run (nothing to show).
    """
    if report.empty:
        raise PlannerError(report.message)
    period = report.period
    parts = [
        f'<h1 style="font-size: 24px; margin: 0 0 4px 0;">Weekly network plan: {escape(period)}</h1>',
        f'<p style="{_NOTE}">Generated {datetime.datetime.now(datetime.timezone.utc):%Y-%m-%d %H:%M} UTC. '
        "Prices are in currency per unit, relative to unused supply (worth 0). "
        "A plan is decision support, subject to your own rules and judgement.</p>",
    ]
    parts += [f'<p style="{_NOTE}">Note: {escape(note)}</p>' for note in report.notes]
    parts.append(_section("Run and certificate", _summary(report)))
    parts.append(_cost_section(report))
    parts.append(_network_section(engine, report))
    parts.append(_moves_section(engine, report))
    parts.append(_binding_section(report))
    parts.append(_shortages_section(report))
    body = "\n".join(parts)
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>Weekly network plan {escape(period)}</title></head>"
        f'<body style="{_FONT} margin: 24px; max-width: 960px;">\n{body}\n</body></html>\n'
    )


def _run_id(report: WeekReport) -> int | None:
    return None if report.run is None else int(report.run["run_id"])


def _cost_section(report: WeekReport) -> str:
    total = pd.DataFrame([{"echelon": "total", "mode": "", "units": None, "cost": report.cost_total}], dtype=object)
    cost = pd.concat([report.cost, total], ignore_index=True)
    return _section(
        "Cost by echelon and mode",
        _table(cost, {"echelon": "echelon", "mode": "mode", "units": "units", "cost": "cost"}, {"units": 0, "cost": 2}),
    )


def _network_section(engine: Engine, report: WeekReport) -> str:
    period = report.period
    sites, lanes, in_use = network_of_week(engine, period, run_id=_run_id(report))
    return _section(
        "Network",
        _image(
            network_chart(sites, lanes, title=f"Network of {period}", lanes_in_use=in_use),
            f"network of {period}: lanes by flow, lanes at capacity dashed red",
        ),
    )


def _moves_section(engine: Engine, report: WeekReport) -> str:
    period, previous = report.period, report.previous_period
    if report.moves.empty:
        moves = f'<p style="{_NOTE}">No price moved versus {escape(previous)}.</p>'
    else:
        moves = _table(
            report.moves,
            {
                "site": "site", "kind": "kind", "region": "region", "previous_price": previous,
                "price": period, "change": "change", "price_low": "low", "price_high": "high",
                "degenerate": "not unique",
            },
            {"previous_price": 2, "price": 2, "change": 2, "price_low": 2, "price_high": 2},
        )
        for site in report.moves["site"].head(PRICE_CHARTS):
            history = site_prices(engine, site, last=period)
            moves += _image(price_chart(history), f"price of {site} per week with its range")
    return _section(f"Biggest price moves versus {previous}", moves)


def _binding_section(report: WeekReport) -> str:
    if report.binding.empty:
        return _section("Top binding capacities", f'<p style="{_NOTE}">No lane or warehouse is at capacity.</p>')
    explained = (
        f'<p style="{_NOTE}">Exact one-sided values: what one more unit of capacity saves, and what one unit '
        "less costs. They differ where the plan is degenerate at that capacity; a capacity that is full but "
        "worth nothing more is not ranked.</p>"
    )
    return _section(
        "Top binding capacities",
        explained + _table(
            report.binding,
            {
                "rank": "rank", "kind": "kind", "label": "capacity of",
                "capacity_value": "value of one more unit", "value_less": "cost of one unit less",
                "capacity": "capacity", "flow": "flow",
            },
            {"rank": 0, "capacity_value": 2, "value_less": 2, "capacity": 0, "flow": 0},
        ),
    )


def _shortages_section(report: WeekReport) -> str:
    if report.shortages.empty:
        return _section("Shortages", f'<p style="{_NOTE}">No shortage: every customer\'s demand is met.</p>')
    return _section(
        "Shortages",
        _table(
            report.shortages,
            {
                "customer": "customer", "name": "name", "region": "region", "demand": "demand",
                "units_short": "units short", "penalty": "penalty per unit", "penalty_cost": "penalty cost",
            },
            {"demand": 0, "units_short": 0, "penalty": 2, "penalty_cost": 2},
        ),
    )


def write_week_report(
    engine: Engine, period: str, path: str | Path, *, top: int = 10, run_id: int | None = None
) -> WeekReport:
    """Build the weekly report of ``period`` and write it to ``path`` as HTML.

    Nothing is written when the week has no optimal run: check ``empty`` and
    ``message`` of the returned report.

    Parameters
    ----------
    engine : sqlalchemy.Engine
    period : str
        ISO week.
    path : str or pathlib.Path
        The HTML file to write.
    top : int
        How many binding capacities and price moves to show.
    run_id : int, optional
        A week run of ``period`` (default: its latest optimal run).

    Returns
    -------
    WeekReport
    """
    report = week_report(engine, period, top=top, run_id=run_id)
    if not report.empty:
        Path(path).write_text(render_week_report(engine, report), encoding="utf-8")
    return report
