"""Loading CSV folders: validation problems, one transaction, batches and fingerprints."""

import shutil
from concurrent.futures import ThreadPoolExecutor
from decimal import Decimal
from pathlib import Path

import pytest
import sqlalchemy as sa
from alembic import command

from planner.database.ingest import LoadOptions, load_folder, validate_folder
from planner.database.migrate import alembic_config
from planner.errors import PlannerError, Problem, ValidationError

SNAPSHOT_TABLES = (
    "load_batch",
    "site",
    "site_version",
    "period",
    "period_snapshot",
    "supply",
    "demand",
    "lane",
    "lane_rate",
)


def row_counts(engine: sa.Engine) -> dict[str, int]:
    with engine.connect() as connection:
        return {
            table: connection.execute(sa.text(f"SELECT count(*) FROM {table}")).scalar_one()
            for table in SNAPSHOT_TABLES
        }


#: Options of the tests whose folders define some periods in only some of the files.
SOME_PERIODS = LoadOptions(allow_missing_periods=True)


def problems_of(folder: Path, options: LoadOptions = LoadOptions()) -> list[Problem]:
    with pytest.raises(ValidationError) as raised:
        validate_folder(folder, options)
    return raised.value.problems


def fingerprints(engine: sa.Engine) -> dict[tuple[int, str], str]:
    with engine.connect() as connection:
        rows = connection.execute(
            sa.text(
                "SELECT ps.batch_id, p.code, ps.fingerprint FROM period_snapshot ps "
                "JOIN period p ON p.id = ps.period_id"
            )
        ).all()
    return {(batch, code): fingerprint for batch, code, fingerprint in rows}


# ------------------------------------------------------------------ valid loads


def test_load_writes_one_batch_with_every_row(engine, write_folder, network_files) -> None:
    folder = write_folder(network_files)
    result = load_folder(engine, folder)

    assert result.created
    assert result.batch_id == 1
    assert result.periods == ["2026-W40", "2026-W41"]
    assert result.rows == {"sites.csv": 6, "supply.csv": 4, "demand.csv": 6, "lanes.csv": 12}
    assert "loaded batch 1" in result.message
    assert row_counts(engine) == {
        "load_batch": 1,
        "site": 6,
        "site_version": 6,
        "period": 2,
        "period_snapshot": 2,
        "supply": 4,
        "demand": 6,
        "lane": 7,
        "lane_rate": 12,
    }
    with engine.connect() as connection:
        batch = connection.execute(
            sa.text("SELECT source, files, content_sha256 FROM load_batch")
        ).one()
        rates = connection.execute(
            sa.text(
                "SELECT o.code, d.code, l.mode, r.unit_cost, r.capacity, r.min_quantity "
                "FROM lane_rate r JOIN lane l ON l.id = r.lane_id JOIN period p ON p.id = r.period_id "
                "JOIN site o ON o.id = l.origin_id JOIN site d ON d.id = l.destination_id "
                "WHERE p.code = '2026-W40' ORDER BY 1, 2, 3"
            )
        ).all()
        warehouse = connection.execute(
            sa.text(
                "SELECT kind, name, region, throughput_capacity, handling_cost, holding_cost "
                "FROM site_version JOIN site ON site.id = site_id WHERE code = 'W1'"
            )
        ).one()
        period = connection.execute(
            sa.text("SELECT starts_on, ends_on FROM period WHERE code = '2026-W40'")
        ).one()
    assert batch.source == str(folder.resolve())
    assert set(batch.files) == {"sites.csv", "supply.csv", "demand.csv", "lanes.csv"}
    assert batch.files["lanes.csv"]["rows"] == 12
    assert len(batch.files["lanes.csv"]["sha256"]) == 64
    assert len(batch.content_sha256) == 64
    # The exact decimal text is kept: 2.50 stays 2.50.
    assert rates == [
        ("P1", "C1", "", Decimal("6"), Decimal("10"), Decimal("0")),
        ("P1", "W1", "road", Decimal("2.50"), Decimal("80"), Decimal("0")),
        ("P2", "W1", "rail", Decimal("1.75"), Decimal("30"), Decimal("10")),
        ("P2", "W1", "road", Decimal("3"), None, Decimal("0")),
        ("W1", "C1", "", Decimal("1"), None, Decimal("0")),
        ("W1", "C2", "", Decimal("1.5"), None, Decimal("0")),
        ("W1", "C3", "", Decimal("2"), None, Decimal("0")),
    ]
    assert warehouse == (
        "warehouse",
        "Central Depot",
        "central",
        Decimal("120"),
        Decimal("0.5"),
        None,
    )
    assert (period.ends_on - period.starts_on).days == 6
    assert period.starts_on.isoweekday() == 1


def test_a_load_leaves_fresh_statistics_on_the_tables_the_solve_and_reports_read(
    engine, write_folder, network_files
) -> None:
    # Autovacuum never analyses a table as small as period (50 changed rows are
    # needed first: PostgreSQL's autovacuum_analyze_threshold, common practice,
    # no source); without statistics the weekly report's comparison of two weeks
    # was planned as a nested loop over every pair of sites.
    load_folder(engine, write_folder(network_files))
    with engine.connect() as conn:
        analysed = set(conn.execute(sa.text(
            "SELECT relname FROM pg_stat_user_tables WHERE last_analyze IS NOT NULL"
        )).scalars())
    assert {"period", "site", "site_version", "period_snapshot", "supply", "demand", "lane", "lane_rate"} <= analysed


def test_validate_folder_needs_no_database(write_folder, network_files) -> None:
    validated = validate_folder(write_folder(network_files))
    assert validated.periods == ["2026-W40", "2026-W41"]
    assert list(validated.lanes.columns) == [
        "period",
        "origin",
        "destination",
        "mode",
        "unit_cost",
        "capacity",
        "min_quantity",
    ]
    assert validated.files["demand.csv"].rows == 6
    assert set(validated.fingerprints) == {"2026-W40", "2026-W41"}
    assert validated.period_starts["2026-W41"].isoformat() == "2026-10-05"


def test_optional_columns_may_be_absent(engine, write_folder) -> None:
    folder = write_folder(
        {
            "sites.csv": "site,kind\nP1,plant\nC1,customer\n",
            "supply.csv": "period,site,quantity\n2026-W40,P1,10\n",
            "demand.csv": "period,site,quantity\n2026-W40,C1,8\n",
            "lanes.csv": "period,origin,destination,unit_cost\n2026-W40,P1,C1,-2.5\n",
        }
    )
    assert load_folder(engine, folder).created
    with engine.connect() as connection:
        assert (
            connection.execute(
                sa.text("SELECT name, region, throughput_capacity, x FROM site_version")
            ).all()
            == [(None, None, None, None)] * 2
        )
        assert (
            connection.execute(sa.text("SELECT shortage_penalty FROM demand")).scalar_one() is None
        )
        assert connection.execute(sa.text("SELECT mode FROM lane")).scalar_one() == ""
        assert connection.execute(
            sa.text("SELECT unit_cost, capacity, min_quantity FROM lane_rate")
        ).one() == (Decimal("-2.5"), None, Decimal("0"))


def test_blank_cells_blank_lines_spaces_and_header_case(
    engine, write_folder, network_files
) -> None:
    network_files["sites.csv"] = (
        "\ufeff Site , KIND ,Name,x,y\n"
        " P1 , Plant ,  Alder Works ,1.5,-2\n"
        "\n"
        "W1,warehouse,,,\n"
        "C1,customer,Shop One,,\n"
        "C2,customer,,,\n"
        "C3,customer,,,\n"
        "P2,plant,,,\n"
        "   \n"
    )
    network_files["supply.csv"] = (
        "period,site,quantity\r\n2026-W40,P1, 60 \r\n2026-W40,P2,50\r\n2026-W41,P2,40\r\n"
    )
    folder = write_folder(network_files)
    result = load_folder(engine, folder)
    assert result.rows["sites.csv"] == 6
    with engine.connect() as connection:
        assert connection.execute(
            sa.text(
                "SELECT kind, name, x, y FROM site_version JOIN site ON site.id = site_id "
                "WHERE code = 'P1'"
            )
        ).one() == ("plant", "Alder Works", 1.5, -2.0)
        assert (
            connection.execute(
                sa.text(
                    "SELECT name FROM site_version JOIN site ON site.id = site_id WHERE code = 'W1'"
                )
            ).scalar_one()
            is None
        )
        assert connection.execute(
            sa.text("SELECT quantity FROM supply JOIN site ON site.id = site_id WHERE code = 'P1'")
        ).scalar_one() == Decimal("60")


def test_line_numbers_count_blank_lines(write_folder, network_files) -> None:
    network_files["supply.csv"] = "period,site,quantity\n2026-W40,P1,60\n\n\n2026-W40,P2,-4\n"
    [problem] = problems_of(write_folder(network_files), SOME_PERIODS)
    assert (problem.file, problem.line, problem.column, problem.value) == (
        "supply.csv",
        5,
        "quantity",
        "-4",
    )


def test_same_pair_with_another_mode_is_another_lane(engine, write_folder, network_files) -> None:
    load_folder(engine, write_folder(network_files))
    with engine.connect() as connection:
        modes = (
            connection.execute(
                sa.text(
                    "SELECT mode FROM lane JOIN site o ON o.id = origin_id JOIN site d ON d.id = destination_id "
                    "WHERE o.code = 'P2' AND d.code = 'W1' ORDER BY mode"
                )
            )
            .scalars()
            .all()
        )
    assert modes == ["rail", "road"]


# ------------------------------------------------------------- error reporting


def _replace(files: dict[str, str], name: str, old: str, new: str) -> dict[str, str]:
    assert old in files[name]
    return {**files, name: files[name].replace(old, new, 1)}


ERROR_CASES = {
    # id: (file, old text, new text, expected problem: file, line, column, value, words of reason)
    "unknown site": (
        "supply.csv",
        "2026-W40,P2,50",
        "2026-W40,P9,50",
        ("supply.csv", 3, "site", "P9", "unknown site"),
    ),
    "supply at a customer": (
        "supply.csv",
        "2026-W40,P2,50",
        "2026-W40,C2,50",
        ("supply.csv", 3, "site", "C2", "site is a customer; supply sites must be plants"),
    ),
    "demand at a plant": (
        "demand.csv",
        "2026-W40,C2,25,90",
        "2026-W40,P2,25,90",
        ("demand.csv", 3, "site", "P2", "site is a plant; demand sites must be customers"),
    ),
    "lane from a customer": (
        "lanes.csv",
        "2026-W40,W1,C2,,1.5,,",
        "2026-W40,C1,C2,,1.5,,",
        ("lanes.csv", 6, "origin", "C1", "lane origins must be plants or warehouses"),
    ),
    "lane into a plant": (
        "lanes.csv",
        "2026-W40,W1,C2,,1.5,,",
        "2026-W40,W1,P1,,1.5,,",
        ("lanes.csv", 6, "destination", "P1", "lane destinations must be warehouses or customers"),
    ),
    "lane to itself": (
        "lanes.csv",
        "2026-W40,W1,C2,,1.5,,",
        "2026-W40,W1,W1,,1.5,,",
        ("lanes.csv", 6, "destination", "W1", "destination equals origin"),
    ),
    "not a number": (
        "demand.csv",
        "2026-W40,C2,25,90",
        "2026-W40,C2,twenty,90",
        ("demand.csv", 3, "quantity", "twenty", "not a number"),
    ),
    "number with exponent": (
        "lanes.csv",
        "2026-W40,P2,W1,road,3,,",
        "2026-W40,P2,W1,road,3e2,,",
        ("lanes.csv", 3, "unit_cost", "3e2", "not a number"),
    ),
    "negative quantity": (
        "supply.csv",
        "2026-W40,P2,50",
        "2026-W40,P2,-50",
        ("supply.csv", 3, "quantity", "-50", "quantity must be >= 0"),
    ),
    "negative capacity": (
        "lanes.csv",
        "2026-W40,P1,W1,road,2.50,80,",
        "2026-W40,P1,W1,road,2.50,-5,",
        ("lanes.csv", 2, "capacity", "-5", "capacity must be >= 0"),
    ),
    "negative min_quantity": (
        "lanes.csv",
        "2026-W40,P2,W1,road,3,,",
        "2026-W40,P2,W1,road,3,,-1",
        ("lanes.csv", 3, "min_quantity", "-1", "min_quantity must be >= 0"),
    ),
    "negative penalty": (
        "demand.csv",
        "2026-W40,C2,25,90",
        "2026-W40,C2,25,-90",
        ("demand.csv", 3, "shortage_penalty", "-90", "shortage_penalty must be >= 0"),
    ),
    "negative handling cost": (
        "sites.csv",
        "central,120,0.5",
        "central,120,-0.5",
        ("sites.csv", 4, "handling_cost", "-0.5", "handling_cost must be >= 0"),
    ),
    "negative throughput": (
        "sites.csv",
        "central,120,0.5",
        "central,-120,0.5",
        ("sites.csv", 4, "throughput_capacity", "-120", "throughput_capacity must be >= 0"),
    ),
    "min above capacity": (
        "lanes.csv",
        "2026-W40,P2,W1,rail,1.75,30,10",
        "2026-W40,P2,W1,rail,1.75,30,30.5",
        ("lanes.csv", 4, "min_quantity", "30.5", "min_quantity is above capacity 30"),
    ),
    "min above capacity by a hair": (
        "lanes.csv",
        "2026-W40,P2,W1,rail,1.75,30,10",
        "2026-W40,P2,W1,rail,1.75,30,30.0000000000000000001",
        (
            "lanes.csv",
            4,
            "min_quantity",
            "30.0000000000000000001",
            "min_quantity is above capacity 30",
        ),
    ),
    "duplicate supply": (
        "supply.csv",
        "2026-W40,P2,50",
        "2026-W40,P1,50",
        (
            "supply.csv",
            3,
            "site",
            "P1",
            "site P1 in period 2026-W40 appears again; first on line 2",
        ),
    ),
    "duplicate lane": (
        "lanes.csv",
        "2026-W40,P2,W1,road,3,,",
        "2026-W40,P1,W1,road,3,,",
        (
            "lanes.csv",
            3,
            "destination",
            "W1",
            "lane P1 -> W1 by mode road in period 2026-W40 appears again; first on line 2",
        ),
    ),
    "duplicate site": (
        "sites.csv",
        "C3,customer",
        "C2,customer",
        ("sites.csv", 7, "site", "C2", "site C2 appears again; first on line 6"),
    ),
    "unknown kind": (
        "sites.csv",
        "W1,warehouse",
        "W1,depot",
        ("sites.csv", 4, "kind", "depot", "unknown kind; use plant, warehouse or customer"),
    ),
    "blank kind": (
        "sites.csv",
        "W1,warehouse",
        "W1,",
        ("sites.csv", 4, "kind", None, "kind is blank"),
    ),
    "blank site": (
        "supply.csv",
        "2026-W40,P2,50",
        "2026-W40,,50",
        ("supply.csv", 3, "site", None, "site is blank"),
    ),
    "blank quantity": (
        "supply.csv",
        "2026-W40,P2,50",
        "2026-W40,P2,",
        ("supply.csv", 3, "quantity", None, "quantity is blank"),
    ),
    "bad period format": (
        "demand.csv",
        "2026-W40,C2,25,90",
        "2026-40,C2,25,90",
        ("demand.csv", 3, "period", "2026-40", "is not an ISO week code"),
    ),
    "week 53 of a 52-week year": (
        "demand.csv",
        "2026-W40,C2,25,90",
        "2027-W53,C2,25,90",
        ("demand.csv", 3, "period", "2027-W53", "2027 has only 52 ISO weeks"),
    ),
    "missing required column": (
        "supply.csv",
        "period,site,quantity",
        "period,site,qty",
        ("supply.csv", 1, "quantity", None, "required column is missing"),
    ),
    "unknown column": (
        "demand.csv",
        "shortage_penalty",
        "shortage_penality",
        ("demand.csv", 1, "shortage_penality", None, "unknown column"),
    ),
    "repeated column": (
        "supply.csv",
        "period,site,quantity",
        "period,site,site",
        ("supply.csv", 1, "site", None, "the column appears twice"),
    ),
    "row with extra fields": (
        "supply.csv",
        "2026-W40,P2,50",
        "2026-W40,P2,50,7",
        ("supply.csv", 3, None, None, "the row has 4 fields but the header has 3"),
    ),
}


@pytest.mark.parametrize(
    ("name", "old", "new", "expected"), ERROR_CASES.values(), ids=ERROR_CASES.keys()
)
def test_each_problem_names_file_line_column_and_value(
    write_folder, network_files, name, old, new, expected
) -> None:
    problems = problems_of(write_folder(_replace(network_files, name, old, new)))
    file, line, column, value, reason = expected
    matching = [
        problem
        for problem in problems
        if (problem.file, problem.line, problem.column, problem.value)
        == (file, line, column, value)
        and reason in problem.reason
    ]
    assert len(matching) == 1, problems
    assert reason in matching[0].reason
    text = str(ValidationError(problems))
    assert f"{file}:{line}" in text
    if column is not None:
        assert f"column {column}" in text
    if value is not None:
        assert f"value {value!r}" in text


def test_negative_unit_cost_is_allowed(write_folder, network_files) -> None:
    files = _replace(
        network_files, "lanes.csv", "2026-W40,P2,W1,road,3,,", "2026-W40,P2,W1,road,-3.2,,"
    )
    assert validate_folder(write_folder(files)).lanes["unit_cost"].tolist()[1] == "-3.2"


def test_missing_file(write_folder, network_files) -> None:
    folder = write_folder({**network_files, "demand.csv": None})
    [problem] = problems_of(folder)
    assert problem.file == "demand.csv"
    assert problem.line is None
    assert "file is missing" in str(problem)


def test_empty_and_non_utf8_files(write_folder, network_files) -> None:
    folder = write_folder(
        {
            **network_files,
            "supply.csv": "",
            "demand.csv": b"period,site,quantity\n2026-W40,C\xe9,1\n",
        }
    )
    problems = problems_of(folder)
    assert [(problem.file, problem.line) for problem in problems] == [
        ("supply.csv", 1),
        ("demand.csv", 2),
    ]
    assert "empty" in problems[0].reason
    assert "UTF-8" in problems[1].reason


def test_missing_folder_is_a_planner_error(tmp_path) -> None:
    with pytest.raises(PlannerError, match="does not exist or is not a folder"):
        validate_folder(tmp_path / "nowhere")


def test_every_problem_of_every_file_is_reported_at_once(write_folder, network_files) -> None:
    files = _replace(network_files, "sites.csv", "W1,warehouse", "W1,depot")
    files = _replace(files, "supply.csv", "2026-W40,P2,50", "2026-W40,P2,-1")
    files = _replace(files, "supply.csv", "2026-W41,P1,60", "2026-W60,P1,x")
    files = _replace(files, "demand.csv", "2026-W40,C3,20,", "2026-W40,Z9,20,")
    files = _replace(files, "lanes.csv", "2026-W41,W1,C3,,2,,", "2026-W41,W1,C3,,2,5,6")
    with pytest.raises(ValidationError) as raised:
        validate_folder(write_folder(files))
    located = [(problem.file, problem.line, problem.column) for problem in raised.value.problems]
    assert located == [
        ("sites.csv", 4, "kind"),
        ("supply.csv", 3, "quantity"),
        ("supply.csv", 4, "period"),
        ("supply.csv", 4, "quantity"),
        ("demand.csv", 4, "site"),
        ("lanes.csv", 13, "min_quantity"),
    ]
    assert str(raised.value).startswith("6 problems in the input files; nothing was loaded:")


def test_long_problem_lists_are_capped(write_folder, network_files) -> None:
    rows = "".join(f"2026-W40,C{number},1\n" for number in range(100, 180))
    network_files["demand.csv"] = "period,site,quantity\n" + rows
    with pytest.raises(ValidationError) as raised:
        validate_folder(write_folder(network_files), SOME_PERIODS)
    assert len(raised.value.problems) == 80
    text = str(raised.value)
    assert "demand.csv:51: column site: value 'C149': unknown site" in text
    assert "demand.csv:52:" not in text
    assert text.endswith("... and 30 more problems")


def test_a_bad_folder_writes_nothing(engine, write_folder, network_files) -> None:
    load_folder(engine, write_folder(network_files))
    before = row_counts(engine)
    files = _replace(network_files, "lanes.csv", "2026-W41,W1,C3,,2,,", "2026-W41,W1,C3,,2,-1,")
    files = _replace(files, "sites.csv", "C3,customer,Shop Three", "C4,customer,Shop Four")
    with pytest.raises(ValidationError):
        load_folder(engine, write_folder(files))
    assert row_counts(engine) == before


def test_a_bad_first_folder_writes_nothing(engine, write_folder, network_files) -> None:
    with pytest.raises(ValidationError):
        load_folder(engine, write_folder({**network_files, "lanes.csv": None}))
    assert set(row_counts(engine).values()) == {0}


# ------------------------------------------------------------ batches, history


def test_identical_folder_is_a_no_op(engine, write_folder, network_files, tmp_path) -> None:
    first = load_folder(engine, write_folder(network_files))
    before = row_counts(engine)
    again = load_folder(engine, write_folder(network_files))
    copied = tmp_path / "copied"
    shutil.copytree(write_folder(network_files), copied)
    elsewhere = load_folder(engine, copied)

    for result in (again, elsewhere):
        assert not result.created
        assert result.batch_id == first.batch_id == 1
        assert "identical to batch 1" in result.message
        assert "nothing was loaded" in result.message
        assert result.rows == first.rows
        assert result.periods == first.periods
    assert row_counts(engine) == before


def test_changed_file_makes_a_new_batch_and_keeps_the_old_snapshot(
    engine, write_folder, network_files
) -> None:
    load_folder(engine, write_folder(network_files))
    changed = _replace(network_files, "demand.csv", "2026-W41,C1,35,90", "2026-W41,C1,45,90")
    second = load_folder(engine, write_folder(changed))

    assert second.created
    assert second.batch_id == 2
    counts = row_counts(engine)
    assert (counts["load_batch"], counts["demand"], counts["lane_rate"]) == (2, 12, 24)
    # Identities are shared by batches; snapshot rows are per batch.
    assert (counts["site"], counts["lane"], counts["period"]) == (6, 7, 2)
    with engine.connect() as connection:
        by_batch = connection.execute(
            sa.text(
                "SELECT d.batch_id, d.quantity FROM demand d JOIN site s ON s.id = d.site_id "
                "JOIN period p ON p.id = d.period_id WHERE s.code = 'C1' AND p.code = '2026-W41' "
                "ORDER BY d.batch_id"
            )
        ).all()
        current = connection.execute(
            sa.text(
                "SELECT max(batch_id) FROM period_snapshot ps JOIN period p ON p.id = ps.period_id "
                "WHERE p.code = '2026-W41'"
            )
        ).scalar_one()
    assert by_batch == [(1, Decimal("35")), (2, Decimal("45"))]
    assert current == 2


def test_reverting_to_an_older_folder_is_a_new_batch(engine, write_folder, network_files) -> None:
    changed = _replace(network_files, "supply.csv", "2026-W41,P2,40", "2026-W41,P2,45")
    results = [
        load_folder(engine, write_folder(files))
        for files in (network_files, changed, network_files)
    ]
    assert [result.batch_id for result in results] == [1, 2, 3]
    assert all(result.created for result in results)
    prints = fingerprints(engine)
    assert prints[(1, "2026-W41")] == prints[(3, "2026-W41")] != prints[(2, "2026-W41")]


def test_fingerprint_follows_period_content_only(engine, write_folder, network_files) -> None:
    load_folder(engine, write_folder(network_files))
    # Week 41 gets one changed number; week 40 is rewritten with the same content in
    # another row order and number spelling.
    lanes = network_files["lanes.csv"].splitlines(keepends=True)
    week40 = [line.replace("2.50", "2.5").replace(",1,,", ",1.000,,") for line in lanes[1:8]]
    reordered = lanes[:1] + week40[::-1] + lanes[8:]
    changed = {
        **network_files,
        "lanes.csv": "".join(reordered).replace("2026-W41,W1,C2,,1.5,,", "2026-W41,W1,C2,,1.6,,"),
        "demand.csv": network_files["demand.csv"].replace(
            "2026-W40,C1,30,90", "2026-W40,C1,30.0,+90"
        ),
    }
    assert load_folder(engine, write_folder(changed)).batch_id == 2
    prints = fingerprints(engine)
    assert prints[(1, "2026-W40")] == prints[(2, "2026-W40")]
    assert prints[(1, "2026-W41")] != prints[(2, "2026-W41")]
    assert prints[(1, "2026-W40")] != prints[(1, "2026-W41")]


def test_fingerprint_covers_site_attributes(write_folder, network_files) -> None:
    before = validate_folder(write_folder(network_files)).fingerprints
    changed = _replace(network_files, "sites.csv", "central,120,0.5", "central,120,0.6")
    after = validate_folder(write_folder(changed)).fingerprints
    assert before.keys() == after.keys()
    assert all(before[code] != after[code] for code in before)


def test_new_batch_reuses_lane_and_site_identities(engine, write_folder, network_files) -> None:
    load_folder(engine, write_folder(network_files))
    extra = network_files["lanes.csv"] + "2026-W42,W1,C1,,1,,\n"
    result = load_folder(engine, write_folder({**network_files, "lanes.csv": extra}), SOME_PERIODS)
    assert result.periods == ["2026-W40", "2026-W41", "2026-W42"]
    assert "0 new sites, 0 new lanes" in result.message
    counts = row_counts(engine)
    assert (counts["lane"], counts["period"], counts["period_snapshot"]) == (7, 3, 5)


def test_unreadable_sites_file_does_not_flood_other_files(write_folder, network_files) -> None:
    files = _replace(network_files, "sites.csv", "site,kind,", "site,type,")
    problems = problems_of(write_folder(files))
    assert [(problem.file, problem.line, problem.column) for problem in problems] == [
        ("sites.csv", 1, "type"),
        ("sites.csv", 1, "kind"),
    ]


def test_load_migrates_an_empty_database_first(engine, write_folder, network_files) -> None:
    with engine.begin() as connection:
        command.downgrade(alembic_config(connection), "base")
    assert load_folder(engine, write_folder(network_files)).created
    assert row_counts(engine)["lane_rate"] == 12


def test_concurrent_loads_of_one_folder_make_one_batch(engine, write_folder, network_files) -> None:
    folder = write_folder(network_files)
    with ThreadPoolExecutor(max_workers=2) as pool:
        results = list(pool.map(lambda _: load_folder(engine, folder), range(2)))
    assert sorted(result.created for result in results) == [False, True]
    assert {result.batch_id for result in results} == {1}
    assert row_counts(engine)["load_batch"] == 1
