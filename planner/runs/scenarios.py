"""What-if scenarios: a base week plus edits, stored, solved into runs of their own.

``create_scenario`` checks the edits against the base week's current snapshot
(unknown sites or lanes, invalid figures, limits no plan can meet) and stores
the scenario and its edits in one transaction; nothing is written when any
edit is wrong. ``solve_scenario`` reads the base week's current snapshot,
applies the edits to its arrays (:mod:`planner.core.edits`; the snapshot rows
are never changed), solves warm from the base week's latest optimal run where
the arc layout allows (:func:`planner.core.engines.solve_with`; the
certificate decides, OR-Tools otherwise) and stores an ordinary week run tagged
with the scenario, pinned so that retention keeps it. ``latest_week_run``,
the week views and ``planner resolve`` never see scenario runs.

Edit files are CSV (header ``action,target,value``) or TOML (``[[edit]]``
tables with ``action``, ``target`` and ``value`` keys).
"""

from __future__ import annotations

import csv
import hashlib
import io
import time
from dataclasses import dataclass
from decimal import Decimal, InvalidOperation
from pathlib import Path
from types import SimpleNamespace

import numpy as np
from sqlalchemy import Connection, Engine, text
from sqlalchemy.exc import IntegrityError

from planner.core.edits import ACTIONS, Edit, WeekNames, apply_edits, parse_edit
from planner.core.engines import state_of
from planner.core.network import assemble_instance, time_expand
from planner.core.optimize import optimize
from planner.core.week import NONE, WeekData
from planner.database.linked import horizon_fingerprint, horizon_snapshots
from planner.database.reopen import edited_lane_ids, reopen_week, scenario_edits
from planner.database.results import NULL, RunKey, copy_text_rows, decimal_text, to_decimal
from planner.database.snapshot import Scaling, current_batch, read_snapshot, run_fingerprint, snapshot_names
from planner.errors import PlannerError, Problem, ValidationError
from planner.periods import parse_week_span, week_range
from planner.runs.weekly import RunSummary, store_and_summarise

__all__ = ["SWEEP_FIGURES", "ScenarioRun", "SweepPiece", "cost_at", "create_scenario", "list_scenarios",
           "read_edit_file", "scenario_details", "scenario_runs", "solve_scenario", "sweep", "sweep_rate"]

_COLUMNS = ("action", "target", "value")


@dataclass(frozen=True)
class ScenarioRun:
    """A solved scenario: its run, the engine that produced it, and what to know about its base."""

    scenario: str
    summary: RunSummary
    engine: str | None
    base_run_id: int | None
    note: str


def read_edit_file(path: Path) -> list[Edit]:
    """The edits of a CSV (``action,target,value``) or TOML (``[[edit]]``) file, in order.

    Raises
    ------
    ValidationError
        Naming file, line, column and value of a missing column, an unknown
        action or an edit without its value.
    """
    name = str(path)
    try:
        raw = Path(path).read_text(encoding="utf-8")
    except (OSError, UnicodeDecodeError) as err:
        raise ValidationError([Problem(name, None, None, None, f"cannot read the edit file: {err}")]) from None
    if Path(path).suffix.lower() == ".toml":
        return _toml_edits(name, raw)
    reader = csv.DictReader(io.StringIO(raw))
    missing = [c for c in ("action", "target") if c not in (reader.fieldnames or [])]
    if missing:
        raise ValidationError([Problem(name, 1, c, None, "missing column; the header is action,target,value")
                               for c in missing])
    edits, problems = [], []
    for line, row in enumerate(reader, start=2):
        edit = Edit((row.get("action") or "").strip(), (row.get("target") or "").strip(),
                    (row.get("value") or "").strip(), name, line)
        problems += _shape_problems(edit)
        edits.append(edit)
    if problems:
        raise ValidationError(problems)
    return edits


def _toml_edits(name: str, raw: str) -> list[Edit]:
    import tomllib

    try:
        data = tomllib.loads(raw)
    except tomllib.TOMLDecodeError as err:
        raise ValidationError([Problem(name, None, None, None, f"not valid TOML: {err}")]) from None
    tables = data.get("edit")
    if not isinstance(tables, list):
        raise ValidationError([Problem(name, None, "edit", None, "no [[edit]] tables with action, target, value")])
    # tomllib keeps no line numbers: each [[edit]] header starts a table, in order.
    lines = raw.splitlines()
    headers = [i + 1 for i, line in enumerate(lines) if line.strip().replace(" ", "") == "[[edit]]"]
    edits, problems = [], []
    for k, table in enumerate(tables):
        start = headers[k] if k < len(headers) else 1
        end = headers[k + 1] if k + 1 < len(headers) else len(lines) + 1

        def line_of(key: str) -> int:
            return next((i + 1 for i in range(start, end - 1) if lines[i].split("=")[0].strip() == key), start)

        edit = Edit(str(table.get("action", "")).strip(), str(table.get("target", "")).strip(),
                    str(table.get("value", "")).strip(), name, line_of("target"), value_line=line_of("value"))
        problems += _shape_problems(edit, action_line=line_of("action"))
        edits.append(edit)
    if problems:
        raise ValidationError(problems)
    return edits


def _shape_problems(edit: Edit, action_line: int | None = None) -> list[Problem]:
    if edit.action not in ACTIONS:
        return [Problem(edit.source, action_line or edit.line, "action", edit.action,
                        "unknown edit; use one of " + ", ".join(ACTIONS))]
    if not edit.target:
        return [Problem(edit.source, edit.line, "target", "", f"{edit.action} needs a target")]
    if ACTIONS[edit.action] and not edit.value:
        return [Problem(edit.source, edit.value_line or edit.line, "value", "", f"{edit.action} needs a value")]
    return []


def command_line_edits(words: list[str]) -> list[Edit]:
    """Edits given as ``--edit`` strings; the n-th is reported as ``--edit:n``."""
    return [parse_edit(w, source="--edit", line=n) for n, w in enumerate(words, start=1)]


def _change_of(edit: Edit) -> str | None:
    if not ACTIONS.get(edit.action):
        return None
    if edit.value.lower() == "none":
        return "remove"
    return "percent" if edit.value.endswith("%") else "set"


def create_scenario(
    engine: Engine, name: str, base: str, edits: list[Edit], *, description: str | None = None,
    scaling: Scaling = Scaling(),
) -> int:
    """Check ``edits`` against the current snapshot of week ``base`` and store the scenario.

    Returns
    -------
    int
        The scenario's id.

    Raises
    ------
    ValidationError
        When an edit is wrong (file, line, column, value); nothing is stored.
    PlannerError
        When the name is taken or the week has no snapshot.
    """
    if not name.strip():
        raise PlannerError("a scenario needs a name")
    periods = parse_week_span(base) if ".." in base else [base]
    last_period_id = fingerprint = None
    with engine.connect() as conn:
        if len(periods) == 1:
            period_id, batch_id, _ = current_batch(conn, base)
            snap = read_snapshot(conn, base, scaling, batch_id=batch_id)
            apply_edits(snap.week, snapshot_names(conn, snap), edits,
                        cost_decimals=scaling.cost_decimals, quantity_decimals=scaling.quantity_decimals)
        else:
            horizon = _edited_horizon(conn, periods, edits, scaling)
            period_id, last_period_id = horizon.snaps[0].period_id, horizon.snaps[-1].period_id
            batch_id, fingerprint = horizon.snaps[0].batch_id, horizon_fingerprint(horizon.snaps, scaling)
    try:
        with engine.begin() as conn:
            scenario_id = conn.execute(
                text("INSERT INTO scenario (name, description, period_id, last_period_id, batch_id, base_fingerprint, "
                     "cost_decimals, quantity_decimals) VALUES (:n, :d, :p, :lp, :b, :fp, :cd, :qd) RETURNING id"),
                {"n": name, "d": description, "p": period_id, "lp": last_period_id, "b": batch_id, "fp": fingerprint,
                 "cd": scaling.cost_decimals, "qd": scaling.quantity_decimals},
            ).scalar_one()
            if edits:
                conn.execute(
                    text("INSERT INTO scenario_edit (scenario_id, position, action, target, value, change, source, "
                         "source_line) VALUES (:s, :pos, :a, :t, :v, :c, :src, :line)"),
                    [{"s": scenario_id, "pos": k, "a": e.action, "t": e.target, "v": e.value, "c": _change_of(e),
                      "src": e.source, "line": e.line} for k, e in enumerate(edits, start=1)],
                )
    except IntegrityError:
        raise PlannerError(f"a scenario named {name!r} exists already; choose another name") from None
    return int(scenario_id)


def _scenario(conn: Connection, name: str):
    row = conn.execute(
        text("SELECT s.*, p.code AS period, lp.code AS last_period, "
             "p.code || coalesce('..' || lp.code, '') AS base FROM scenario s JOIN period p ON p.id = s.period_id "
             "LEFT JOIN period lp ON lp.id = s.last_period_id WHERE s.name = :n"),
        {"n": name},
    ).mappings().first()
    if row is None:
        raise PlannerError(f"no scenario named {name!r}; list them with `planner scenario list`")
    return row, scenario_edits(conn, row["id"])


def solve_scenario(engine: Engine, name: str, *, warm: bool = True) -> ScenarioRun:
    """Solve scenario ``name`` on its base week's current snapshot and store the run.

    Returns
    -------
    ScenarioRun
        The run's summary, the engine that produced it, the base run it was
        started from, and a note when the base week was reloaded since the
        scenario was made or last solved.

    Raises
    ------
    PlannerError
        When there is no such scenario, or its edits no longer fit the reloaded base week.
    """
    start = time.perf_counter()
    with engine.connect() as conn:
        sc, edits = _scenario(conn, name)
    if sc["last_period"] is not None:
        return _solve_horizon_scenario(engine, sc, edits, start)
    with engine.connect() as conn:
        period = sc["period"]
        scaling = Scaling(sc["cost_decimals"], sc["quantity_decimals"])
        period_id, batch_id, snapshot_fp = current_batch(conn, period)
        note = _base_note(conn, sc, batch_id)
        snap = read_snapshot(conn, period, scaling, batch_id=batch_id)
        names = snapshot_names(conn, snap)
        week, names = apply_edits(snap.week, names, edits, cost_decimals=scaling.cost_decimals,
                                  quantity_decimals=scaling.quantity_decimals)
        base = _base_run(conn, snap, scaling) if warm else None
        lane_ids = edited_lane_ids(conn, snap, week, names.lane_mode, register=True)
        conn.commit()
    inst = assemble_instance(week, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
    state = state_of(base.instance, base.flow) if base is not None else None
    outcome = optimize(inst, site_codes=snap.site_code, lane_labels=names.lane_keys(week), period_codes=[period],
                       warm=state)
    fingerprint = hashlib.sha256(
        (run_fingerprint(snapshot_fp, scaling) + "|" + "\n".join(e.text() for e in edits)).encode()
    ).hexdigest()
    key = RunKey("week", period_id, period_id, period_id, batch_id, fingerprint, scenario_id=int(sc["id"]))

    def also_store(conn: Connection, run_id: int) -> None:
        _pin_run(conn, run_id, name)
        _store_lane_edits(conn, run_id, snap.week, week, lane_ids, scaling)

    summary = store_and_summarise(
        engine, key, scaling, inst, outcome, start, label=f"{period} {name}", periods=[period],
        site_ids=snap.site_id, lane_ids=lane_ids, site_kind=week.site_kind,
        also_store=also_store,
    )
    return ScenarioRun(name, summary, outcome.engine if outcome.ok else None,
                       None if base is None else base.run_id, note)


@dataclass(frozen=True)
class _Horizon:
    """A linked horizon's snapshots on one site and lane list, with a scenario's edits applied to every week."""

    snaps: list
    merged: dict
    weeks: list[WeekData]
    names: WeekNames
    lane_present: np.ndarray


def _edited_horizon(conn: Connection, periods: list[str], edits: list[Edit], scaling: Scaling) -> _Horizon:
    """The current snapshots of ``periods`` with ``edits`` applied to each week (checked like a week's)."""
    snaps, merged = horizon_snapshots(conn, periods, scaling)
    site_id, lane_id = merged["site_id"], merged["lane_id"]
    mode = np.empty(lane_id.shape[0], dtype=object)
    region = np.full(site_id.shape[0], None, dtype=object)
    for snap in snaps:
        names = snapshot_names(conn, snap)
        mode[np.searchsorted(lane_id, snap.lane_id)] = names.lane_mode
        region[np.searchsorted(site_id, snap.site_id)] = names.site_region
    base_names = WeekNames(merged["site_code"], mode, region)
    weeks, names = [], base_names
    for week in merged["weeks"]:
        edited, names = apply_edits(week, base_names, edits, cost_decimals=scaling.cost_decimals,
                                    quantity_decimals=scaling.quantity_decimals)
        weeks.append(edited)
    added = weeks[0].n_lanes - lane_id.shape[0]  # added lanes exist in every week of the horizon
    present = np.hstack([merged["lane_present"], np.ones((len(weeks), added), dtype=bool)])
    return _Horizon(snaps, merged, weeks, names, present)


def _solve_horizon_scenario(engine: Engine, sc, edits: list[Edit], start: float) -> ScenarioRun:
    """A scenario on a linked horizon: its edits in every week, solved cold as one run tagged with it."""
    name, scaling = sc["name"], Scaling(sc["cost_decimals"], sc["quantity_decimals"])
    periods = week_range(sc["period"], sc["last_period"])
    with engine.connect() as conn:
        horizon = _edited_horizon(conn, periods, edits, scaling)
        merged = horizon.merged
        ids = SimpleNamespace(lane_id=merged["lane_id"], site_id=merged["site_id"])
        lane_ids = edited_lane_ids(conn, ids, horizon.weeks[0], horizon.names.lane_mode, register=True)
        conn.commit()
    base_fingerprint = horizon_fingerprint(horizon.snaps, scaling)
    note = "" if sc["base_fingerprint"] in (None, base_fingerprint) else (
        f"a week of the base horizon {sc['base']} was reloaded since the scenario was made")
    inst = time_expand(horizon.weeks, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale)
    outcome = optimize(inst, site_codes=merged["site_code"], lane_labels=horizon.names.lane_keys(horizon.weeks[0]),
                       period_codes=periods)
    fingerprint = hashlib.sha256((base_fingerprint + "|" + "\n".join(e.text() for e in edits)).encode()).hexdigest()
    key = RunKey("horizon", None, horizon.snaps[0].period_id, horizon.snaps[-1].period_id, None, fingerprint,
                 scenario_id=int(sc["id"]))

    summary = store_and_summarise(
        engine, key, scaling, inst, outcome, start, label=f"{sc['base']} {name}", periods=periods,
        site_ids=merged["site_id"], lane_ids=lane_ids, site_kind=merged["site_kind"],
        lane_present=horizon.lane_present, also_store=lambda conn, run_id: _pin_run(conn, run_id, name),
    )
    return ScenarioRun(name, summary, outcome.engine if outcome.ok else None, None, note)


def _pin_run(conn: Connection, run_id: int, scenario: str) -> None:
    """Pin a scenario's run in the transaction that stores it, so that retention keeps it."""
    conn.execute(text("INSERT INTO run_pin (run_id, note) VALUES (:r, :n)"), {"r": run_id, "n": f"scenario {scenario}"})


def _base_note(conn: Connection, sc, batch_id: int) -> str:
    last = conn.execute(
        text("SELECT id, batch_id FROM solve_run WHERE scenario_id = :s ORDER BY id DESC LIMIT 1"), {"s": sc["id"]}
    ).first()
    if last is not None and last.batch_id != batch_id:
        return (f"the base week {sc['period']} was reloaded since run {last.id} of this scenario "
                f"(batch {last.batch_id} then, {batch_id} now)")
    if last is None and sc["batch_id"] != batch_id:
        return (f"the base week {sc['period']} was reloaded since the scenario was made "
                f"(batch {sc['batch_id']} then, {batch_id} now)")
    return ""


def _base_run(conn: Connection, snap, scaling: Scaling):
    """The base week's latest optimal run, when it was solved on this snapshot (``snap``) at this precision."""
    period, batch_id = snap.period, snap.batch_id
    row = conn.execute(
        text("SELECT r.id FROM latest_week_run lw JOIN solve_run r ON r.id = lw.run_id WHERE lw.period = :p "
             "AND r.batch_id = :b AND r.cost_decimals = :cd AND r.quantity_decimals = :qd"),
        {"p": period, "b": batch_id, "cd": scaling.cost_decimals, "qd": scaling.quantity_decimals},
    ).first()
    return None if row is None else reopen_week(conn, period, int(row[0]), snapshot=snap)


def _store_lane_edits(conn: Connection, run_id: int, base, week, lane_ids: np.ndarray, scaling: Scaling) -> None:
    """The lane figures of the run that differ from the base snapshot (edited and added lanes)."""
    n = base.n_lanes
    changed = np.ones(week.n_lanes, bool)
    changed[:n] = ((week.lane_cost[:n] != base.lane_cost) | (week.lane_capacity[:n] != base.lane_capacity)
                   | (week.lane_min[:n] != base.lane_min))
    rows = np.flatnonzero(changed)
    if rows.shape[0] == 0:
        return
    capacity = np.array(decimal_text(week.lane_capacity[rows], scaling.quantity_decimals), dtype=object)
    capacity[week.lane_capacity[rows] == NONE] = NULL
    copy_text_rows(conn, "run_lane_edit", ["run_id", "lane_id", "unit_cost", "capacity", "min_quantity"], [
        [str(run_id)] * rows.shape[0],
        list(map(str, lane_ids[rows].tolist())),
        decimal_text(week.lane_cost[rows], scaling.cost_decimals),
        capacity.tolist(),
        decimal_text(week.lane_min[rows], scaling.quantity_decimals),
    ])


def list_scenarios(engine: Engine) -> list[dict]:
    """Every scenario with its base week, edits, who made it, and its latest run."""
    with engine.connect() as conn:
        rows = conn.execute(text(
            "SELECT s.name, p.code || coalesce('..' || lp.code, '') AS base, s.description, s.created_by, s.created_at, "
            "(SELECT count(*) FROM scenario_edit e WHERE e.scenario_id = s.id) AS edits, "
            "r.id AS run_id, r.status, r.primal_cost AS cost, r.engine "
            "FROM scenario s JOIN period p ON p.id = s.period_id LEFT JOIN period lp ON lp.id = s.last_period_id "
            "LEFT JOIN LATERAL (SELECT * FROM solve_run sr WHERE sr.scenario_id = s.id "
            "ORDER BY sr.id DESC LIMIT 1) r ON true ORDER BY s.name"
        )).mappings()
        return [dict(r) for r in rows]


def scenario_details(engine: Engine, name: str) -> tuple[dict, list[Edit], list[dict]]:
    """A scenario's row (with its base week), its edits in order, and its runs (newest first).

    Raises
    ------
    PlannerError
        When there is no such scenario.
    """
    with engine.connect() as conn:
        sc, edits = _scenario(conn, name)
        runs = conn.execute(text(
            "SELECT r.id AS run_id, r.status, r.primal_cost AS cost, r.engine, r.batch_id, r.finished_at "
            "FROM solve_run r WHERE r.scenario_id = :s ORDER BY r.id DESC"), {"s": sc["id"]}).mappings()
        return dict(sc), edits, [dict(r) for r in runs]


def scenario_runs(engine: Engine, name: str) -> tuple[int, int]:
    """``(base run, scenario run)``: the scenario's latest optimal run and the base week's latest optimal run.

    Raises
    ------
    PlannerError
        When the scenario has no optimal run or its base week none.
    """
    with engine.connect() as conn:
        sc, _ = _scenario(conn, name)
        if sc["last_period"] is not None:
            raise PlannerError(f"scenario {name!r} is on a linked horizon ({sc['base']}); comparisons take runs of "
                               "one week: compare week runs, or read its run with `planner report --run ID`")
        run = conn.execute(text("SELECT id FROM solve_run WHERE scenario_id = :s AND status = 'optimal' "
                                "ORDER BY id DESC LIMIT 1"), {"s": sc["id"]}).scalar()
        base = conn.execute(text("SELECT run_id FROM latest_week_run WHERE period_id = :p"),
                            {"p": sc["period_id"]}).scalar()
    if run is None:
        raise PlannerError(f"scenario {name!r} has no optimal run; solve it with `planner scenario solve {name}`")
    if base is None:
        raise PlannerError(f"the base week {sc['period']} has no optimal run; solve it with `planner solve`")
    return int(base), int(run)


#: What a sweep can vary, and what it names: a lane's rate or capacity, a
#: warehouse's throughput capacity, a customer's demand.
SWEEP_FIGURES = {"rate": "lane", "capacity": "lane", "throughput": "warehouse", "demand": "customer"}


@dataclass(frozen=True)
class SweepPiece:
    """One piece of a sweep in currency and units: the optimal cost is linear from ``start`` to ``end``.

    ``slope`` is the change of the optimal cost per unit of the figure: the
    lane's flow (rate), minus the saving of one more unit (capacity,
    throughput), the cost of one more unit (demand). ``engine`` produced the
    plan at ``start``.
    """

    start: Decimal
    end: Decimal
    slope: Decimal
    cost_from: Decimal
    cost_to: Decimal
    engine: str

    def cost_at(self, figure: Decimal) -> Decimal:
        """The optimal cost at ``figure`` (inside the piece)."""
        return self.cost_from + (figure - self.start) * self.slope


def sweep(
    engine: Engine, figure: str, target: str, low: str, high: str, *, period: str | None = None,
    scenario: str | None = None, scaling: Scaling = Scaling(),
) -> list[SweepPiece]:
    """Exact pieces of the optimal cost of a week (or a scenario) as one figure goes from ``low`` to ``high``.

    Parameters
    ----------
    figure : {"rate", "capacity", "throughput", "demand"}
        What varies (:data:`SWEEP_FIGURES`).
    target : str
        The lane (``O->D`` or ``O->D MODE``) for a rate or a capacity, the
        warehouse for a throughput, the customer for a demand.
    low, high : str
        Decimal figures at the precision of the week (or of the scenario):
        money for a rate, units otherwise.
    period, scenario : str
        The week, or a scenario (its base week with its edits applied).

    Raises
    ------
    PlannerError
        For an unknown lane, site or week, figures beyond the precision, or a
        week without a plan somewhere in the range (the message says where).
    """
    from planner.core import sweep as core

    if figure not in SWEEP_FIGURES:
        raise PlannerError(f"a sweep varies one of {', '.join(SWEEP_FIGURES)}, not {figure!r}")
    if (period is None) == (scenario is None):
        raise PlannerError("give --period P or --scenario NAME")
    with engine.connect() as conn:
        edits: list[Edit] = []
        if scenario is not None:
            sc, edits = _scenario(conn, scenario)
            if sc["last_period"] is not None:
                raise PlannerError(f"scenario {scenario!r} is on a linked horizon ({sc['base']}); a sweep varies a "
                                   "figure of one week")
            period, scaling = sc["period"], Scaling(sc["cost_decimals"], sc["quantity_decimals"])
        snap = read_snapshot(conn, period, scaling)
        names = snapshot_names(conn, snap)
        base = _base_run(conn, snap, scaling)
    week, names = apply_edits(snap.week, names, edits,
                              cost_decimals=scaling.cost_decimals, quantity_decimals=scaling.quantity_decimals)
    # The week's stored optimum starts the first solve (warm, certified, cold otherwise).
    warm = state_of(base.instance, base.flow) if base is not None else None
    cd, qd = scaling.cost_decimals, scaling.quantity_decimals
    figure_decimals, slope_decimals = (cd, qd) if figure == "rate" else (qd, cd)
    start, end = (_scaled(v, figure_decimals, figure) for v in (low, high))
    index = _sweep_target(week, names, figure, target, period)
    swept = {"rate": core.rate_sweep, "capacity": core.capacity_sweep, "throughput": core.throughput_sweep,
             "demand": core.demand_sweep}[figure]
    try:
        pieces = swept(week, index, start, end, cost_scale=scaling.cost_scale, quantity_scale=scaling.quantity_scale,
                       warm=warm)
    except core.NoPlanInSweep as error:
        at = to_decimal(error.figure, figure_decimals)
        where = f"above {figure} {at}" if error.above else f"at {figure} {at}"
        raise PlannerError(f"{period} has no plan {where} of {target}"
                           + (": one more unit cannot be had at any cost" if error.above else "")) from None
    return [SweepPiece(to_decimal(p.start, figure_decimals), to_decimal(p.end, figure_decimals),
                       to_decimal(p.slope, slope_decimals), to_decimal(p.cost_at_start, cd + qd),
                       to_decimal(p.cost_at(p.end), cd + qd), p.engine)
            for p in pieces]


def sweep_rate(engine: Engine, lane: str, rate_from: str, rate_to: str, **where) -> list[SweepPiece]:
    """:func:`sweep` of one lane's rate (the slope of each piece is the lane's flow)."""
    return sweep(engine, "rate", lane, rate_from, rate_to, **where)


def cost_at(pieces: list[SweepPiece], figure: Decimal) -> tuple[Decimal, Decimal]:
    """The optimal cost at ``figure`` and the slope just above it (just below it at the sweep's end).

    Raises
    ------
    PlannerError
        When ``figure`` lies outside the sweep.
    """
    if not pieces or not pieces[0].start <= figure <= pieces[-1].end:
        raise PlannerError(f"{figure} lies outside the sweep")
    piece = next((p for p in pieces if p.start <= figure < p.end), pieces[-1])
    return piece.cost_at(figure), piece.slope


def _sweep_target(week, names, figure: str, target: str, period: str) -> int:
    if SWEEP_FIGURES[figure] == "lane":
        found = np.flatnonzero(names.lane_keys(week) == " ".join(target.split()))
        if found.shape[0] != 1:
            raise PlannerError(f"no lane {target!r} in {period}; name it as ORIGIN->DESTINATION MODE")
        return int(found[0])
    found = np.flatnonzero(names.site_code == target.strip())
    if found.shape[0] != 1:
        raise PlannerError(f"no site {target!r} in {period}")
    return int(found[0])


def _scaled(value: str, decimals: int, what: str) -> int:
    try:
        scaled = Decimal(value).scaleb(decimals)
    except InvalidOperation:
        scaled = None
    if scaled is None or not scaled.is_finite():
        raise PlannerError(f"{what} {value!r} is not a number")
    if scaled != scaled.to_integral_value():
        raise PlannerError(f"{what} {value!r} has more than {decimals} decimals")
    return int(scaled)
