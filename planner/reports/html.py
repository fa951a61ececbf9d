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
import dataclasses
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
from planner.reports.sections import SECTIONS, Section, cell_text

__all__ = ["render_comparison", "render_week_report", "write_week_report"]

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


def _spec_table(spec: Section, frame: pd.DataFrame, period: str, previous: str) -> str:
    """HTML table of a report section as :mod:`planner.reports.sections` defines it; every cell escaped."""
    head = "".join(f'<th style="{_TH}">{escape(spec.heading(f, period, previous))}</th>' for f in spec.fields)
    rows = [f"<tr>{head}</tr>"]
    for record in frame.to_dict(orient="records"):
        cells = "".join(
            f'<td style="{_TD_NUMBER if f.numeric else _TD}">{escape(cell_text(f, record.get(f.column)))}</td>'
            for f in spec.fields
        )
        rows.append(f"<tr>{cells}</tr>")
    return f'<table style="{_TABLE}">{"".join(rows)}</table>'


def _report_section(report: WeekReport, name: str, extra: str = "") -> str:
    """A report section by its spec: title, note, table (or what its emptiness means), then ``extra``."""
    spec = next(s for s in SECTIONS if s.name == name)
    period, previous = report.period, report.previous_period
    frame = report.sections()[name]
    note = f'<p style="{_NOTE}">{escape(spec.note)}</p>' if spec.note and not frame.empty else ""
    if frame.empty:
        said = spec.empty.format(period=period, previous=previous)
        body = f'<p style="{_NOTE}">{escape(said[0].upper() + said[1:])}.</p>'
    else:
        body = _spec_table(spec, frame, period, previous)
    return _section(spec.titled(period, previous), note + body + extra)


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
    with_total = dataclasses.replace(report, cost=pd.concat([report.cost, total], ignore_index=True))
    return _report_section(with_total, "cost")


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
    charts = ""
    for site in report.moves["site"].head(PRICE_CHARTS) if not report.moves.empty else []:
        history = site_prices(engine, site, last=report.period)
        charts += _image(price_chart(history), f"price of {site} per week with its range")
    return _report_section(report, "moves", charts)


def _binding_section(report: WeekReport) -> str:
    return _report_section(report, "binding")


def _shortages_section(report: WeekReport) -> str:
    return _report_section(report, "shortages")


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


#: The comparison's sections: title, columns (name -> heading), numeric columns (name -> decimals).
_COMPARISON = {
    "cost": ("Lane cost by echelon and mode",
             {"echelon": "echelon", "mode": "mode", "cost_a": "cost a", "cost_b": "cost b", "difference": "difference"},
             {"cost_a": 2, "cost_b": 2, "difference": 2}),
    "prices": ("Site prices, largest moves first",
               {"site": "site", "kind": "kind", "price_a": "price a", "low_a": "low a", "high_a": "high a",
                "price_b": "price b", "low_b": "low b", "high_b": "high b", "difference": "moved",
                "determined": "determined"},
               {c: 2 for c in ("price_a", "low_a", "high_a", "price_b", "low_b", "high_b", "difference")}),
    "flows": ("Lanes whose flow changed", {"lane": "lane", "flow_a": "flow a", "flow_b": "flow b",
                                          "difference": "change"}, {"flow_a": 0, "flow_b": 0, "difference": 0}),
    "binding": ("Limits that became or stopped binding",
                {"limit_kind": "limit", "label": "what", "value_a": "value a", "value_b": "value b", "change": "change"},
                {"value_a": 2, "value_b": 2}),
}


def render_comparison(comparison, *, rows: int = 25) -> str:
    """Two runs compared, as one self-contained HTML page (the first ``rows`` rows of each table).

    ``comparison`` is a :class:`planner.reports.compare.Comparison`. A price
    move marked *determined* is forced by the data (unique prices, or ranges
    that do not overlap); the others may be an artefact of degeneracy.
    """
    a, b = comparison.run_a, comparison.run_b
    title = f"Run {b['run_id']} ({b['label']}) compared with run {a['run_id']} ({a['label']})"
    parts = [
        f'<h1 style="font-size: 24px; margin: 0 0 4px 0;">{escape(title)}</h1>',
        f'<p style="{_NOTE}">' + "<br>".join(escape(line) for line in comparison.headline().splitlines()) + "</p>",
        f'<p style="{_NOTE}">A price move is determined when both prices are unique or their ranges do not '
        "overlap; otherwise another optimal set of prices could show no move.</p>",
    ]
    for name, (heading, columns, numeric) in _COMPARISON.items():
        frame = comparison.section(name)
        body = (_table(frame.head(rows), columns, numeric) if not frame.empty
                else f'<p style="{_NOTE}">Nothing changed.</p>')
        if len(frame) > rows:
            body += f'<p style="{_NOTE}">{len(frame) - rows} more rows: planner compare --format csv</p>'
        parts.append(_section(heading, body))
    body = "\n".join(parts)
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{escape(title)}</title></head>"
        f'<body style="{_FONT} margin: 24px; max-width: 1100px;">\n{body}\n</body></html>\n'
    )
