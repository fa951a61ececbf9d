"""Loads that cannot silently wipe data.

A truncated export (a file with a header only, a period missing from one file)
is refused unless an option says it is meant; the load summary says how each
period's totals move versus the current snapshot and warns above a threshold;
figures finer than the solve's precision, overlong text and files separated by
semicolons or tabs are refused at load with file, line, column and value; the
same content saved with a byte-order mark or CRLF line ends loads nothing.
Every refusal leaves the database exactly as it was.
"""

from __future__ import annotations

import csv
import io
from decimal import Decimal

import pytest
import sqlalchemy as sa

from planner.database.ingest import CHANGE_WARNING_ENV, LoadOptions, load_folder, validate_folder
from planner.database.snapshot import Scaling
from planner.errors import ValidationError
from tests.helpers import invoke

SNAPSHOT_TABLES = (
    "load_batch", "site", "site_version", "period", "period_snapshot", "supply", "demand", "lane", "lane_rate",
)


def row_counts(engine: sa.Engine) -> dict[str, int]:
    with engine.connect() as connection:
        return {
            table: connection.execute(sa.text(f"SELECT count(*) FROM {table}")).scalar_one()
            for table in SNAPSHOT_TABLES
        }


def refused(folder, options: LoadOptions = LoadOptions()) -> ValidationError:
    with pytest.raises(ValidationError) as raised:
        validate_folder(folder, options)
    return raised.value


def header_only(text: str) -> str:
    return text.splitlines(keepends=True)[0]


def without_period(text: str, period: str) -> str:
    return "".join(line for line in text.splitlines(keepends=True) if not line.startswith(period))


# ------------------------------------------------------------ empty files, missing periods


@pytest.mark.parametrize("name", ["sites.csv", "supply.csv", "demand.csv", "lanes.csv"])
def test_a_file_with_a_header_only_is_refused(engine, write_folder, network_files, name) -> None:
    load_folder(engine, write_folder(network_files))
    before = row_counts(engine)
    folder = write_folder({**network_files, name: header_only(network_files[name])})
    with pytest.raises(ValidationError) as raised:
        load_folder(engine, folder)
    [empty] = [problem for problem in raised.value.problems if "header but no rows" in problem.reason]
    assert empty.file == name
    assert "--allow-empty" in str(raised.value)
    assert row_counts(engine) == before


def test_allow_empty_loads_a_header_only_file(engine, write_folder, network_files) -> None:
    folder = write_folder({**network_files, "demand.csv": header_only(network_files["demand.csv"])})
    result = load_folder(engine, folder, LoadOptions(allow_empty=True))
    assert result.created
    assert result.rows["demand.csv"] == 0
    assert result.periods == ["2026-W40", "2026-W41"]
    assert row_counts(engine)["demand"] == 0


def test_a_period_missing_from_one_file_is_refused(engine, write_folder, network_files) -> None:
    load_folder(engine, write_folder(network_files))
    before = row_counts(engine)
    folder = write_folder({**network_files, "demand.csv": without_period(network_files["demand.csv"], "2026-W41")})
    with pytest.raises(ValidationError) as raised:
        load_folder(engine, folder)
    [problem] = raised.value.problems
    assert (problem.file, problem.column) == ("demand.csv", "period")
    assert "2026-W41" in problem.reason
    assert "supply.csv and lanes.csv" in problem.reason
    assert "--allow-missing-periods" in problem.reason
    assert row_counts(engine) == before


def test_a_new_period_in_one_file_only_is_named_in_each_other_file(write_folder, network_files) -> None:
    lanes = network_files["lanes.csv"] + "2026-W42,W1,C1,,1,,\n"
    problems = refused(write_folder({**network_files, "lanes.csv": lanes})).problems
    assert [(problem.file, problem.column) for problem in problems] == [
        ("supply.csv", "period"),
        ("demand.csv", "period"),
    ]
    assert all("2026-W42, which lanes.csv has" in problem.reason for problem in problems)


def test_allow_missing_periods_loads_them(engine, write_folder, network_files) -> None:
    folder = write_folder({**network_files, "supply.csv": without_period(network_files["supply.csv"], "2026-W41")})
    result = load_folder(engine, folder, LoadOptions(allow_missing_periods=True))
    assert result.periods == ["2026-W40", "2026-W41"]
    with engine.connect() as connection:
        week41 = connection.execute(
            sa.text("SELECT count(*) FROM supply s JOIN period p ON p.id = s.period_id WHERE p.code = '2026-W41'")
        ).scalar_one()
    assert week41 == 0


def test_cli_refuses_an_empty_file_and_accepts_it_with_the_option(database_url, write_folder, network_files) -> None:
    folder = write_folder({**network_files, "supply.csv": header_only(network_files["supply.csv"])})
    refused_run = invoke("load", str(folder))
    assert refused_run.exit_code == 2
    assert "supply.csv" in refused_run.output and "--allow-empty" in refused_run.output
    accepted = invoke("load", str(folder), "--allow-empty")
    assert accepted.exit_code == 0, accepted.output
    assert "loaded batch 1" in accepted.output


# ------------------------------------------------------------------------ change summary


def totals_by_period(files: dict[str, str]) -> dict[str, dict[str, Decimal]]:
    """Per period, total supply, demand, lanes and capacity, summed from the CSV text
    with the standard library (common practice, no source)."""
    totals: dict[str, dict[str, Decimal]] = {}

    def add(period: str, measure: str, amount: Decimal) -> None:
        row = totals.setdefault(period, dict.fromkeys(("supply", "demand", "lanes", "capacity"), Decimal(0)))
        row[measure] += amount

    for name, measure in (("supply.csv", "supply"), ("demand.csv", "demand")):
        for row in csv.DictReader(io.StringIO(files[name])):
            add(row["period"], measure, Decimal(row["quantity"]))
    for row in csv.DictReader(io.StringIO(files["lanes.csv"])):
        add(row["period"], "lanes", Decimal(1))
        add(row["period"], "capacity", Decimal(row["capacity"] or 0))
    return totals


def test_summary_compares_each_changed_period_with_its_current_snapshot(
    engine, write_folder, network_files
) -> None:
    load_folder(engine, write_folder(network_files))
    changed = dict(network_files)
    # Week 40 loses most of its demand (75 -> 20) and a capped lane; week 41 only moves a little.
    changed["demand.csv"] = (
        changed["demand.csv"].replace("2026-W40,C1,30,90", "2026-W40,C1,0,90").replace("2026-W40,C2,25,90", "2026-W40,C2,0,90")
        .replace("2026-W41,C1,35,90", "2026-W41,C1,45,90")
    )
    changed["lanes.csv"] = changed["lanes.csv"].replace("2026-W40,P1,C1,,6,10,\n", "")
    result = load_folder(engine, write_folder(changed))

    before, after = totals_by_period(network_files), totals_by_period(changed)
    assert [change.period for change in result.changes] == ["2026-W40", "2026-W41"]
    for change in result.changes:
        assert change.before == before[change.period]
        assert change.after == after[change.period]
    week40, week41 = result.changes
    assert "demand" in week40.warned  # 75 -> 20 is -73 %, beyond the default 50 %
    assert week41.warned == ()  # 75 -> 85 is +13 %
    assert "2026-W40: demand 75 -> 20 (-73 %)!" in result.message
    assert "lanes 7 -> 6 (-14 %)" in result.message
    assert "0 new, 2 changed, 0 unchanged" in result.message
    [warning] = result.warnings
    assert "1 period changed by more than 50 %" in warning and "2026-W40" in warning


def test_summary_of_a_first_load_and_of_unchanged_periods(engine, write_folder, network_files) -> None:
    first = load_folder(engine, write_folder(network_files))
    assert "2 new, 0 changed, 0 unchanged" in first.message
    assert first.changes == [] and first.warnings == []
    changed = {**network_files, "supply.csv": network_files["supply.csv"].replace("2026-W41,P2,40", "2026-W41,P2,41")}
    second = load_folder(engine, write_folder(changed))
    assert "0 new, 1 changed, 1 unchanged" in second.message
    assert [change.period for change in second.changes] == ["2026-W41"]


def test_change_threshold_from_option_and_environment(
    database_url, engine, write_folder, network_files, monkeypatch
) -> None:
    load_folder(engine, write_folder(network_files))
    # Week 41 supply 100 -> 80: -20 %.
    changed = {**network_files, "supply.csv": network_files["supply.csv"].replace("2026-W41,P2,40", "2026-W41,P2,20")}
    quiet = invoke("load", str(write_folder(changed)))
    assert quiet.exit_code == 0 and "warning" not in quiet.output
    back = invoke("load", str(write_folder(network_files)))
    assert back.exit_code == 0
    loud = invoke("load", str(write_folder(changed)), "--change-warning", "10")
    assert loud.exit_code == 0
    assert "warning: 1 period changed by more than 10 %" in " ".join(loud.output.split())
    monkeypatch.setenv(CHANGE_WARNING_ENV, "15")
    invoke("load", str(write_folder(network_files)))
    from_env = invoke("load", str(write_folder(changed)))
    assert "more than 15 %" in " ".join(from_env.output.split())
    monkeypatch.setenv(CHANGE_WARNING_ENV, "lots")
    bad = invoke("load", str(write_folder(network_files)))
    assert bad.exit_code == 2 and CHANGE_WARNING_ENV in bad.output


def test_summary_stays_compact_for_many_periods(engine, write_folder) -> None:
    weeks = [f"2026-W{week:02d}" for week in range(1, 41)]

    def folder(demand: int):
        return write_folder({
            "sites.csv": "site,kind\nP1,plant\nC1,customer\n",
            "supply.csv": "period,site,quantity\n" + "".join(f"{w},P1,100\n" for w in weeks),
            "demand.csv": "period,site,quantity\n" + "".join(f"{w},C1,{demand}\n" for w in weeks),
            "lanes.csv": "period,origin,destination,unit_cost\n" + "".join(f"{w},P1,C1,1\n" for w in weeks),
        })

    load_folder(engine, folder(50))
    result = load_folder(engine, folder(10))
    assert len(result.changes) == 40
    lines = result.message.splitlines()
    assert len(lines) <= 13
    assert lines[-1] == "  ... and 30 more changed periods"
    [warning] = result.warnings
    assert warning.startswith("40 periods changed by more than 50 %") and "and 30 more" in warning


# --------------------------------------------------------------------------------- precision


def test_a_figure_finer_than_the_solve_is_refused_at_load(engine, write_folder, network_files) -> None:
    files = {**network_files, "demand.csv": network_files["demand.csv"].replace("2026-W41,C2,25,90", "2026-W41,C2,80.5,90")}
    files["lanes.csv"] = files["lanes.csv"].replace("2026-W41,W1,C3,,2,,", "2026-W41,W1,C3,,2.123456,,")
    folder = write_folder(files)
    with pytest.raises(ValidationError) as raised:
        load_folder(engine, folder)
    problems = [(p.file, p.line, p.column, p.value) for p in raised.value.problems]
    assert problems == [("demand.csv", 6, "quantity", "80.5"), ("lanes.csv", 13, "unit_cost", "2.123456")]
    text = str(raised.value)
    assert "1 decimal, more than the 0 the solve keeps for quantities; load and solve with --quantity-decimals 1" in text
    assert "6 decimals, more than the 4 the solve keeps for costs; load and solve with --cost-decimals 6" in text
    assert row_counts(engine)["load_batch"] == 0

    # The options the message names accept the figures, at load and at the solve.
    result = load_folder(engine, folder, LoadOptions(scaling=Scaling(cost_decimals=6, quantity_decimals=1)))
    assert result.created
    solved = invoke("solve", "--period", "2026-W41", "--quantity-decimals", "1", "--cost-decimals", "6")
    assert solved.exit_code == 0, solved.output
    assert "optimal" in solved.output


def test_trailing_zeros_are_not_decimals(write_folder, network_files) -> None:
    files = {**network_files, "supply.csv": network_files["supply.csv"].replace("2026-W40,P1,60", "2026-W40,P1,60.000")}
    assert validate_folder(write_folder(files)).supply["quantity"].tolist()[0] == "60.000"


def test_cli_load_accepts_finer_figures_with_the_option(database_url, write_folder, network_files) -> None:
    files = {**network_files, "supply.csv": network_files["supply.csv"].replace("2026-W40,P1,60", "2026-W40,P1,60.25")}
    folder = write_folder(files)
    refused_run = invoke("load", str(folder))
    assert refused_run.exit_code == 2
    assert "supply.csv:2: column quantity: value '60.25'" in refused_run.output
    assert "--quantity-decimals 2" in " ".join(refused_run.output.split())
    assert invoke("load", str(folder), "--quantity-decimals", "2").exit_code == 0


def test_a_figure_beyond_the_finest_precision_says_to_round(write_folder, network_files) -> None:
    files = {**network_files, "supply.csv": network_files["supply.csv"].replace("2026-W40,P1,60", "2026-W40,P1,60.1234567")}
    [problem] = refused(write_folder(files)).problems
    assert "round it to at most 6 decimals" in problem.reason


# ----------------------------------------------------------------- byte-order mark, CRLF


def as_saved_by_another_editor(files: dict[str, str]) -> dict[str, bytes]:
    return {name: b"\xef\xbb\xbf" + text.replace("\n", "\r\n").encode() for name, text in files.items()}


def test_bom_and_crlf_are_the_same_content(engine, write_folder, network_files) -> None:
    first = load_folder(engine, write_folder(network_files))
    before = row_counts(engine)
    again = load_folder(engine, write_folder(as_saved_by_another_editor(network_files)))
    assert not again.created
    assert again.batch_id == first.batch_id
    assert row_counts(engine) == before


def test_bom_and_crlf_first_then_plain_is_the_same_content(engine, write_folder, network_files) -> None:
    first = load_folder(engine, write_folder(as_saved_by_another_editor(network_files)))
    again = load_folder(engine, write_folder(network_files))
    assert first.created and not again.created
    assert row_counts(engine)["load_batch"] == 1


# ------------------------------------------------------------------------------ separators


@pytest.mark.parametrize("separator, words", [(";", "semicolons"), ("\t", "tabs")])
def test_a_file_separated_by_another_character_gets_a_hint(write_folder, network_files, separator, words) -> None:
    supply = network_files["supply.csv"].replace(",", separator)
    [problem] = refused(write_folder({**network_files, "supply.csv": supply})).problems
    assert (problem.file, problem.line) == ("supply.csv", 1)
    assert f"separated by {words} instead of commas" in problem.reason


def test_semicolons_with_decimal_commas_get_the_hint_too(write_folder, network_files) -> None:
    lanes = network_files["lanes.csv"].replace(",", ";").replace("2.50", "2,50").replace("1.75", "1,75")
    [problem] = refused(write_folder({**network_files, "lanes.csv": lanes})).problems
    assert problem.file == "lanes.csv" and "semicolons" in problem.reason


# ---------------------------------------------------------------------------- long text


def test_an_overlong_site_code_is_refused_and_cut_in_the_message(engine, write_folder, network_files) -> None:
    load_folder(engine, write_folder(network_files))
    before = row_counts(engine)
    code = "Q" * 3000
    files = {**network_files, "sites.csv": network_files["sites.csv"] + f"{code},customer,,,,\n"}
    with pytest.raises(ValidationError) as raised:
        load_folder(engine, write_folder(files))
    [problem] = raised.value.problems
    assert (problem.file, problem.line, problem.column, problem.value) == ("sites.csv", 8, "site", code)
    assert "longer than 100 characters" in problem.reason
    text = str(raised.value)
    assert f"value '{'Q' * 60}'... (3,000 characters)" in text
    assert "Q" * 61 not in text
    assert row_counts(engine) == before


def test_overlong_mode_and_unknown_site_are_cut_too(write_folder, network_files) -> None:
    mode, site = "m" * 150, "Z" * 500
    lanes = network_files["lanes.csv"].replace("2026-W41,P2,W1,road", f"2026-W41,P2,W1,{mode}")
    demand = network_files["demand.csv"].replace("2026-W41,C3,15,", f"2026-W41,{site},15,")
    supply = network_files["supply.csv"].replace("2026-W41,P2,40", f"{'9' * 400},P2,40")
    error = refused(write_folder({**network_files, "lanes.csv": lanes, "demand.csv": demand, "supply.csv": supply}))
    located = [(p.file, p.line, p.column) for p in error.problems]
    assert located == [("supply.csv", 5, "period"), ("demand.csv", 7, "site"), ("lanes.csv", 10, "mode")]
    for line in str(error).splitlines():
        assert len(line) < 300, line


def test_a_long_name_is_refused_at_its_own_limit(write_folder, network_files) -> None:
    sites = network_files["sites.csv"].replace("Alder Works", "A" * 201)
    [problem] = refused(write_folder({**network_files, "sites.csv": sites})).problems
    assert (problem.file, problem.line, problem.column) == ("sites.csv", 2, "name")
    assert "longer than 200 characters" in problem.reason
    fits = network_files["sites.csv"].replace("Alder Works", "A" * 200)
    assert validate_folder(write_folder({**network_files, "sites.csv": fits})).sites["name"][0] == "A" * 200


def test_a_repeated_overlong_code_is_reported_once_and_references_to_it_add_nothing(
    write_folder, network_files
) -> None:
    code = "Q" * 3000
    sites = network_files["sites.csv"] + f"{code},customer,,,,\n{code},customer,,,,\n"
    demand = network_files["demand.csv"] + f"2026-W40,{code},5,\n"
    error = refused(write_folder({**network_files, "sites.csv": sites, "demand.csv": demand}))
    assert [(p.file, p.line, p.column) for p in error.problems] == [("sites.csv", 8, "site"), ("sites.csv", 9, "site")]
    assert max(len(line) for line in str(error).splitlines()) < 200
