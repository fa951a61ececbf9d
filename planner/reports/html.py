"""The weekly report as one self-contained HTML file.

Everything is in the file: styles inline on each element (mail programs drop
style sheets), charts as base64 PNG ``data:`` images, no scripts, no links to
fetch. It opens in a browser and stays readable when forwarded by e-mail.

Content: the week's run and certificate, then the report's sections in the
order of :data:`planner.reports.sections.SECTIONS` (the same as on the command
line): cost by echelon and mode with a picture of the network, the top binding
capacities, the biggest price moves versus the previous week with a price chart
of the sites that moved most, and the shortages. Money headings carry the
database's currency code.
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


def _spec_table(spec: Section, frame: pd.DataFrame, report: WeekReport) -> str:
    """HTML table of a report section as :mod:`planner.reports.sections` defines it; every cell escaped."""
    period, previous = report.period, report.previous_period
    head = "".join(
        f'<th style="{_TH}">{escape(spec.heading(f, period, previous, report.currency))}</th>' for f in spec.fields
    )
    rows = [f"<tr>{head}</tr>"]
    for record in frame.to_dict(orient="records"):
        cells = "".join(
            f'<td style="{_TD_NUMBER if f.numeric else _TD}">{escape(cell_text(f, record.get(f.column)))}</td>'
            for f in spec.fields
        )
        rows.append(f"<tr>{cells}</tr>")
    return f'<table style="{_TABLE}">{"".join(rows)}</table>'


def _report_section(report: WeekReport, spec: Section, extra: str = "") -> str:
    """A report section by its spec: title, note, table (or what its emptiness means), then ``extra``."""
    period, previous = report.period, report.previous_period
    frame = report.sections()[spec.name]
    note = f'<p style="{_NOTE}">{escape(spec.note)}</p>' if spec.note and not frame.empty else ""
    if frame.empty:
        said = spec.said_when_empty(period, previous)
        body = f'<p style="{_NOTE}">{escape(said[0].upper() + said[1:])}.</p>'
    else:
        body = _spec_table(spec, frame, report)
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
    run, money = report.run, report.currency
    certificate = {True: "exact (primal cost = dual objective)", False: "FAILED", None: "-"}[run["certificate_ok"]]
    facts = {"run": f"{run['run_id']} ({run_words(report)})", "status": run["status"]}
    if report.horizon:
        facts[f"cost of {report.period} ({money})"] = format_number(report.cost_total)
        facts[f"cost of the horizon ({money})"] = format_number(run["cost"])
    else:
        facts[f"cost ({money})"] = format_number(run["cost"])
    facts.update({
        f"dual objective ({money})": format_number(run["dual_objective"]),
        "certificate": certificate,
        "shortage (units)": format_number(run["shortage_units"], 0),
        "solved at": f"{run['solved_at']:%Y-%m-%d %H:%M %Z}",
        "solver time (s)": round(float(run["solver_seconds"] or 0), 3),
        "input fingerprint": str(run["input_fingerprint"])[:16] + "...",
    })
    frame = pd.DataFrame({"what": list(facts), "value": list(facts.values())}, dtype=object)
    return _table(frame, {"what": "", "value": ""}, numeric={})


def run_words(report: WeekReport) -> str:
    """``week 2026-W47`` or ``week 2026-W47 of the linked horizon 2026-W45..2026-W52``."""
    if report.horizon:
        return f"week {report.period} of the linked horizon {report.run['period']}"
    return f"week {report.period}"


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
    title = f"Weekly network plan: {period}" + (f" (linked horizon {report.run['period']})" if report.horizon else "")
    parts = [
        f'<h1 style="font-size: 24px; margin: 0 0 4px 0;">{escape(title)}</h1>',
        f'<p style="{_NOTE}">Generated {datetime.datetime.now(datetime.timezone.utc):%Y-%m-%d %H:%M} UTC. '
        f"Money is in {escape(report.currency)}; prices are per unit, relative to unused supply (worth 0). "
        "A plan is decision support, subject to your own safety, labour and transport rules and judgement.</p>",
    ]
    parts += [f'<p style="{_NOTE}">Note: {escape(note)}</p>' for note in report.notes]
    parts.append(_section("Run and certificate", _summary(report)))
    extras = {"cost": lambda: _network_image(engine, report), "moves": lambda: _price_charts(engine, report)}
    for spec in SECTIONS:
        extra = extras.get(spec.name, lambda: "")()
        parts.append(_report_section(_with_total(report) if spec.name == "cost" else report, spec, extra))
    body = "\n".join(parts)
    return (
        "<!DOCTYPE html>\n"
        '<html lang="en"><head><meta charset="utf-8">'
        '<meta name="viewport" content="width=device-width, initial-scale=1">'
        f"<title>{escape(title)}</title></head>"
        f'<body style="{_FONT} margin: 24px; max-width: 960px;">\n{body}\n</body></html>\n'
    )


def _run_id(report: WeekReport) -> int | None:
    return None if report.run is None else int(report.run["run_id"])


def _with_total(report: WeekReport) -> WeekReport:
    label = f"total of {report.period}" if report.horizon else "total"
    total = pd.DataFrame([{"echelon": label, "mode": "", "units": None, "cost": report.cost_total}], dtype=object)
    return dataclasses.replace(report, cost=pd.concat([report.cost, total], ignore_index=True))


def _network_image(engine: Engine, report: WeekReport) -> str:
    period = report.period
    sites, lanes, in_use = network_of_week(engine, period, run_id=_run_id(report))
    title = f"Network of {period}" + (f" in linked horizon {report.run['period']}" if report.horizon else "")
    return _image(
        network_chart(sites, lanes, title=title, lanes_in_use=in_use),
        f"{title}: lanes by flow, lanes at capacity dashed red, customers left short ringed",
    )


def _price_charts(engine: Engine, report: WeekReport) -> str:
    charts = ""
    for site in report.moves["site"].head(PRICE_CHARTS) if not report.moves.empty else []:
        if report.horizon:
            history = site_prices(engine, site, run_id=_run_id(report))
            title = f"{site}: price per unit in linked horizon {report.run['period']}"
        else:
            history = site_prices(engine, site, last=report.period)
            title = f"{site}: price per unit"
        chart = price_chart(history, title=title, currency=report.currency)
        charts += _image(chart, f"{title}, per week with its range")
    return charts


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
