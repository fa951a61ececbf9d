"""Load a folder of weekly CSV files into PostgreSQL as one new load batch.

A load folder holds four UTF-8, comma-separated files::

    sites.csv   site, kind, name, region, throughput_capacity, handling_cost,
                holding_cost, storage_capacity, x, y
    supply.csv  period, site, quantity
    demand.csv  period, site, quantity, shortage_penalty
    lanes.csv   period, origin, destination, mode, unit_cost, capacity, min_quantity

Columns not in :data:`REQUIRED_COLUMNS` may be left out of the header. Header names
are case-insensitive and cells are stripped of surrounding spaces; a blank cell means
"none" (a blank ``mode`` is the empty mode, a blank ``capacity`` is unlimited, a blank
``min_quantity`` is 0). Periods are ISO week codes such as ``2026-W40``; supply sites
must be plants, demand sites customers, lane origins plants or warehouses and lane
destinations warehouses or customers. A batch defines wholly every period that
appears in supply, demand or lanes.

Loading is *validate, then write*. :func:`validate_folder` reads the files with pandas
and checks them with vectorised column operations, collecting every problem of every
file; if there is any, :class:`~planner.errors.ValidationError` lists them all and
nothing is written. :func:`load_folder` then writes the whole folder in one
transaction as one ``load_batch``: identities of new sites and lanes are upserted, and
the snapshot rows are copied with PostgreSQL COPY into temporary staging tables and
inserted with joins that map codes to ids. Loads never overwrite history: a changed
folder makes a new batch, and a folder identical to the latest batch loads nothing.

Line numbers in messages are 1-based lines of the file, the header being line 1
(a quoted cell spanning several lines shifts the numbers of the rows after it).
"""

from __future__ import annotations

import datetime
import hashlib
import io
import itertools
import re
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from decimal import Decimal
from pathlib import Path

import numpy as np
import pandas as pd
import psycopg
import sqlalchemy as sa

from planner.contract import (
    DEMAND,
    FILE_COLUMNS,
    FILE_ORDER,
    LANES,
    REQUIRED_COLUMNS,
    SITES,
    SUPPLY,
)
from planner.database.connect import raw_copy_connection
from planner.database.history import ensure_partitions
from planner.database.locks import LOAD_LOCK, planner_lock
from planner.database.migrate import ensure_schema
from planner.database.models import SITE_KINDS, LoadBatch
from planner.errors import PlannerError, Problem, ValidationError
from planner.periods import parse_week

__all__ = [
    "FILE_COLUMNS",
    "REQUIRED_COLUMNS",
    "FileDigest",
    "LoadResult",
    "ValidatedFolder",
    "load_folder",
    "validate_folder",
]

# Plain decimal numbers only: no exponent, no thousands separator, no NaN or infinity,
# so that the stored NUMERIC is exactly the text of the file.
_DECIMAL = r"[+-]?(?:[0-9]+(?:\.[0-9]*)?|\.[0-9]+)"
_NOT_A_NUMBER = "not a number; write digits with an optional decimal point, for example 12 or 12.50"
_PARSER_FIELDS = re.compile(r"Expected (\d+) fields in line (\d+), saw (\d+)")
# Text around a cell edge that may need stripping (quoted or not). A clean file has
# none of them, and then stripping every cell, most of the parsing time, is skipped.
_EDGE_SPACE_MARKS = (" ,", ", ", " \n", "\n ", " \r", "\t", '" ', ' "')
_LINE = "_line"
_FINGERPRINT_VERSION = "planner period fingerprint v1"
_COPY_CHUNK = 8 * 1024 * 1024


@dataclass(frozen=True)
class FileDigest:
    """Checksum and data row count of one input file.

    Attributes
    ----------
    sha256 : str
        sha256 hex digest of the file's bytes.
    rows : int
        Data rows, not counting the header or blank lines.
    """

    sha256: str
    rows: int


@dataclass(frozen=True)
class ValidatedFolder:
    """A load folder that passed validation, ready to be written.

    Frames hold the cells as stripped text, ``""`` meaning blank, with one column per
    name of :data:`FILE_COLUMNS` (optional columns absent from a file are blank). Site
    kinds are lower-case.

    Attributes
    ----------
    folder : pathlib.Path
        Absolute path of the folder.
    files : dict of str to FileDigest
        Per file name.
    content_sha256 : str
        sha256 hex over the sorted (file name, file sha256) pairs; equal folders have
        equal values.
    sites, supply, demand, lanes : pandas.DataFrame
        The rows of each file.
    periods : list of str
        Week codes defined by this folder (every period in supply, demand or lanes),
        in calendar order.
    period_starts : dict of str to datetime.date
        Monday of each period.
    fingerprints : dict of str to str
        Per period, sha256 hex of a canonical text of its supply, demand and lane rows
        and of all site rows; the same content gives the same fingerprint whatever the
        row order or number formatting (``12.50`` equals ``12.5``).
    """

    folder: Path
    files: dict[str, FileDigest]
    content_sha256: str
    sites: pd.DataFrame
    supply: pd.DataFrame
    demand: pd.DataFrame
    lanes: pd.DataFrame
    periods: list[str]
    period_starts: dict[str, datetime.date]
    fingerprints: dict[str, str]


@dataclass(frozen=True)
class LoadResult:
    """Outcome of :func:`load_folder`.

    Attributes
    ----------
    batch_id : int or None
        The new batch, or the latest batch the folder was identical to.
    created : bool
        True if a new batch was written, False if the folder was identical to the
        latest batch and nothing was loaded.
    message : str
        One line for the user.
    rows : dict of str to int
        Data rows per file name (``"sites.csv"`` ...).
    periods : list of str
        Week codes the batch defines, in calendar order.
    """

    batch_id: int | None
    created: bool
    message: str
    rows: dict[str, int]
    periods: list[str]


# --------------------------------------------------------------------------- reading


def _read_sources(folder: str | Path) -> tuple[Path, dict[str, bytes | None]]:
    path = Path(folder).expanduser().resolve()
    if not path.is_dir():
        raise PlannerError(f"load folder {path} does not exist or is not a folder")
    sources = {}
    for name in FILE_ORDER:
        file = path / name
        sources[name] = file.read_bytes() if file.is_file() else None
    return path, sources


def _content_sha256(digests: dict[str, str]) -> str:
    text = "".join(f"{name}\t{digests[name]}\n" for name in sorted(digests))
    return hashlib.sha256(text.encode()).hexdigest()


def _parse(name: str, data: bytes, problems: list[Problem]) -> pd.DataFrame | None:
    """Frame of stripped text cells with normalised column names and a line column."""
    try:
        text = data.decode("utf-8").removeprefix("\ufeff")
    except UnicodeDecodeError as error:
        line = data.count(b"\n", 0, error.start) + 1
        problems.append(
            Problem(name, line, None, None, "the file is not UTF-8 text; save it as UTF-8 CSV")
        )
        return None
    columns = FILE_COLUMNS[name]
    try:
        # header=None keeps the header as row 0, so that the parser measures every row
        # against the header's field count instead of guessing an index column.
        cells = pd.read_csv(
            io.StringIO(text),
            header=None,
            dtype=str,
            keep_default_na=False,
            skip_blank_lines=False,
        )
    except pd.errors.EmptyDataError:
        problems.append(
            Problem(
                name,
                1,
                None,
                None,
                f"the file is empty; line 1 must be the header: {', '.join(columns)}",
            )
        )
        return None
    except pd.errors.ParserError as error:
        fields = _PARSER_FIELDS.search(str(error))
        if fields is None:
            problems.append(
                Problem(name, None, None, None, f"cannot read the file as CSV: {error}")
            )
        else:
            header_fields, line, found = fields.groups()
            problems.append(
                Problem(
                    name,
                    int(line),
                    None,
                    None,
                    f"the row has {found} fields but the header has {header_fields}; "
                    "quote cells that contain commas",
                )
            )
        return None

    header = [cell.strip().lower() for cell in cells.iloc[0]]
    if not _check_header(name, header, problems):
        return None
    known = {index: column for index, column in enumerate(header) if column in columns}
    frame = cells.iloc[1:][list(known)].rename(columns=known)
    if (
        text.startswith(" ")
        or text.endswith(" ")
        or any(mark in text for mark in _EDGE_SPACE_MARKS)
    ):
        for column in frame.columns:
            frame[column] = frame[column].str.strip()
    for column in columns:
        if column not in frame.columns:
            frame[column] = ""
    frame = frame[list(columns)]
    frame[_LINE] = np.arange(2, len(frame) + 2)
    blank_row = (frame[list(columns)] == "").all(axis=1)
    return frame[~blank_row].reset_index(drop=True)


def _check_header(name: str, header: list[str], problems: list[Problem]) -> bool:
    """Flag header problems; return whether the rows can still be checked."""
    columns = FILE_COLUMNS[name]
    seen: set[str] = set()
    usable = True
    for column in header:
        if column == "":
            problems.append(
                Problem(
                    name, 1, None, None, "the header has an empty column name (a trailing comma?)"
                )
            )
        elif column in seen:
            problems.append(
                Problem(name, 1, column, None, "the column appears twice in the header")
            )
            usable = False
        elif column not in columns:
            problems.append(
                Problem(
                    name, 1, column, None, f"unknown column; the columns are: {', '.join(columns)}"
                )
            )
        seen.add(column)
    for column in REQUIRED_COLUMNS[name]:
        if column not in seen:
            problems.append(
                Problem(name, 1, column, None, "required column is missing from the header")
            )
            usable = False
    return usable


# ------------------------------------------------------------------------ validating


_Reason = str | Callable[[pd.DataFrame], pd.Series]


class _Checks:
    """Problems of one file, flagged on boolean masks over its frame.

    Reasons that depend on the row are callables evaluated on the flagged rows only,
    so a clean file costs no string building.
    """

    def __init__(self, name: str, frame: pd.DataFrame, problems: list[Problem]) -> None:
        self.name = name
        self.frame = frame
        self.problems = problems

    def flag(
        self, mask: pd.Series, column: str | None, reason: _Reason, *, show_value: bool = True
    ) -> None:
        if not mask.any():
            return
        bad = self.frame[mask]
        lines = bad[_LINE].tolist()
        values = bad[column].tolist() if column is not None and show_value else [None] * len(bad)
        reasons = [reason] * len(bad) if isinstance(reason, str) else list(reason(bad))
        self.problems.extend(
            Problem(self.name, line, column, value, why)
            for line, value, why in zip(lines, values, reasons, strict=True)
        )

    def required(self, column: str, what: str) -> pd.Series:
        """Flag blank cells; return the mask of non-blank ones."""
        blank = self.frame[column] == ""
        self.flag(blank, column, f"{what} is blank; every row needs one", show_value=False)
        return ~blank

    def number(self, column: str, *, required: bool, nonnegative: bool) -> pd.Series:
        """Flag bad numbers; return their canonical text ('' where blank or flagged)."""
        codes, uniques = pd.factorize(self.frame[column])
        distinct = pd.Series(uniques, dtype=object)
        blank = distinct == ""
        valid = distinct.str.fullmatch(_DECIMAL).astype(bool)
        canonical = _canonical_decimal(distinct.where(valid, ""))
        negative = (
            canonical.str.startswith("-") if nonnegative else pd.Series(False, index=distinct.index)
        )

        def per_row(per_value: pd.Series) -> pd.Series:
            return pd.Series(per_value.to_numpy()[codes], index=self.frame.index)

        if required:
            self.flag(
                per_row(blank),
                column,
                f"{column} is blank; every row needs a number",
                show_value=False,
            )
        self.flag(per_row(~blank & ~valid), column, _NOT_A_NUMBER)
        self.flag(per_row(negative), column, f"{column} must be >= 0")
        return per_row(canonical.where(~negative, ""))

    def period(self) -> pd.Series:
        """Flag bad week codes; return the mask of valid ones."""
        codes = self.frame["period"]
        present = self.required("period", "period")
        reasons: dict[str, str] = {}
        for code in pd.unique(codes[present]):
            try:
                parse_week(code)
            except ValueError as error:
                reasons[code] = str(error)
        invalid = codes.isin(list(reasons))
        self.flag(invalid, "period", lambda bad: bad["period"].map(reasons))
        return present & ~invalid

    def site(
        self, column: str, sites: _SiteIndex | None, allowed: tuple[str, ...], role: str
    ) -> pd.Series:
        """Flag blank, unknown and wrong-kind sites; return the mask of good ones."""
        present = self.required(column, column)
        if sites is None:
            return present
        codes = self.frame[column]
        unknown = present & ~codes.isin(sites.codes)
        self.flag(unknown, column, f"unknown site; add it to {SITES}")
        wrong = codes.isin(sites.kinds.index) & ~codes.map(sites.kinds).isin(allowed)
        self.flag(
            wrong,
            column,
            lambda bad: f"{column} is a " + bad[column].map(sites.kinds) + "; " + role,
        )
        return present & ~unknown & ~wrong

    def duplicates(
        self,
        keys: list[str],
        usable: pd.Series,
        column: str,
        describe: Callable[[pd.DataFrame], pd.Series],
    ) -> None:
        """Flag rows repeating the key of an earlier row, naming the earlier line."""
        candidates = self.frame[usable]
        repeated = candidates.duplicated(keys, keep=False)
        if not repeated.any():
            return
        group = candidates[repeated]
        first_line = group.groupby(keys, sort=False)[_LINE].transform("min")
        later = pd.Series(False, index=self.frame.index)
        later[group.index] = (group[_LINE] != first_line).to_numpy()
        self.flag(
            later,
            column,
            lambda bad: (
                describe(bad) + " appears again; first on line " + first_line[bad.index].astype(str)
            ),
        )


@dataclass(frozen=True)
class _SiteIndex:
    codes: pd.Index  # every site code in sites.csv
    kinds: pd.Series  # code -> kind, for codes whose kind is valid


def _canonical_decimal(text: pd.Series) -> pd.Series:
    """Canonical text of decimal numbers: '+012.50' -> '12.5', '-0.0' -> '0'; '' stays ''.

    Examples
    --------
    >>> _canonical_decimal(pd.Series(["+012.50", "-0.0", ".5", "7.", "", "-3.20"])).tolist()
    ['12.5', '0', '0.5', '7', '', '-3.2']
    """
    negative = text.str.startswith("-")
    digits = text.str.lstrip("+-")
    has_point = digits.str.contains(".", regex=False)
    digits = digits.where(~has_point, digits.str.rstrip("0").str.rstrip("."))
    digits = digits.str.lstrip("0")
    digits = digits.where(~digits.str.startswith("."), "0" + digits)
    digits = digits.where(digits != "", "0")
    signed = digits.where(~negative | (digits == "0"), "-" + digits)
    return signed.where(text != "", "")


def _exceeds(numbers: pd.Series, limits: pd.Series) -> pd.Series:
    """Exact ``numbers > limits`` for canonical decimal texts (both non-blank)."""
    left, right = numbers.astype(float), limits.astype(float)
    # Rounding to float is monotonic, so unequal floats order the decimals exactly;
    # equal floats of different text are settled with Decimal (rare).
    result = left > right
    tie = (left == right) & (numbers != limits)
    if tie.any():
        result[tie] = [
            Decimal(a) > Decimal(b) for a, b in zip(numbers[tie], limits[tie], strict=True)
        ]
    return result


def _site_in_period(rows: pd.DataFrame) -> pd.Series:
    return "site " + rows["site"] + " in period " + rows["period"]


def _lane_in_period(rows: pd.DataFrame) -> pd.Series:
    mode = (" by mode " + rows["mode"]).where(rows["mode"] != "", "")
    return (
        "lane "
        + rows["origin"]
        + " -> "
        + rows["destination"]
        + mode
        + " in period "
        + rows["period"]
    )


def _validate_sites(
    frame: pd.DataFrame, problems: list[Problem]
) -> tuple[_SiteIndex, pd.DataFrame]:
    checks = _Checks(SITES, frame, problems)
    frame["kind"] = frame["kind"].str.lower()
    has_code = checks.required("site", "site")
    has_kind = checks.required("kind", "kind")
    valid_kind = frame["kind"].isin(SITE_KINDS)
    checks.flag(has_kind & ~valid_kind, "kind", "unknown kind; use plant, warehouse or customer")
    checks.duplicates(["site"], has_code, "site", lambda bad: "site " + bad["site"])
    canonical = frame[["site", "kind", "name", "region"]].copy()
    for column in ("throughput_capacity", "handling_cost", "holding_cost", "storage_capacity"):
        canonical[column] = checks.number(column, required=False, nonnegative=True)
    for column in ("x", "y"):
        canonical[column] = checks.number(column, required=False, nonnegative=False)
    unique_sites = frame[has_code].drop_duplicates("site")
    kinds = unique_sites[unique_sites["kind"].isin(SITE_KINDS)].set_index("site")["kind"]
    return _SiteIndex(pd.Index(unique_sites["site"]), kinds), canonical


def _validate_site_quantities(
    name: str, frame: pd.DataFrame, sites: _SiteIndex | None, problems: list[Problem],
    kind: str, role: str,
) -> tuple[_Checks, pd.DataFrame]:
    """The checks shared by supply.csv and demand.csv: period, site of ``kind``, one row
    per period and site, a non-negative quantity."""
    checks = _Checks(name, frame, problems)
    good_period = checks.period()
    good_site = checks.site("site", sites, (kind,), role)
    checks.duplicates(
        ["period", "site"],
        good_period & good_site,
        "site",
        _site_in_period,
    )
    canonical = frame[["period", "site"]].copy()
    canonical["quantity"] = checks.number("quantity", required=True, nonnegative=True)
    return checks, canonical


def _validate_supply(
    frame: pd.DataFrame, sites: _SiteIndex | None, problems: list[Problem]
) -> pd.DataFrame:
    _, canonical = _validate_site_quantities(
        SUPPLY, frame, sites, problems, "plant", "supply sites must be plants"
    )
    return canonical


def _validate_demand(
    frame: pd.DataFrame, sites: _SiteIndex | None, problems: list[Problem]
) -> pd.DataFrame:
    checks, canonical = _validate_site_quantities(
        DEMAND, frame, sites, problems, "customer", "demand sites must be customers"
    )
    canonical["shortage_penalty"] = checks.number(
        "shortage_penalty", required=False, nonnegative=True
    )
    return canonical


def _validate_lanes(
    frame: pd.DataFrame, sites: _SiteIndex | None, problems: list[Problem]
) -> pd.DataFrame:
    checks = _Checks(LANES, frame, problems)
    good_period = checks.period()
    good_origin = checks.site(
        "origin", sites, ("plant", "warehouse"), "lane origins must be plants or warehouses"
    )
    good_destination = checks.site(
        "destination",
        sites,
        ("warehouse", "customer"),
        "lane destinations must be warehouses or customers",
    )
    same_ends = good_origin & good_destination & (frame["origin"] == frame["destination"])
    checks.flag(
        same_ends, "destination", "destination equals origin; a lane joins two different sites"
    )
    checks.duplicates(
        ["period", "origin", "destination", "mode"],
        good_period & good_origin & good_destination & ~same_ends,
        "destination",
        _lane_in_period,
    )
    canonical = frame[["period", "origin", "destination", "mode"]].copy()
    canonical["unit_cost"] = checks.number("unit_cost", required=True, nonnegative=False)
    capacity = checks.number("capacity", required=False, nonnegative=True)
    minimum = checks.number("min_quantity", required=False, nonnegative=True)
    comparable = (capacity != "") & (minimum != "")
    above = pd.Series(False, index=frame.index)
    above[comparable] = _exceeds(minimum[comparable], capacity[comparable])
    checks.flag(
        above, "min_quantity", lambda bad: "min_quantity is above capacity " + bad["capacity"]
    )
    canonical["capacity"] = capacity
    canonical["min_quantity"] = minimum.where(minimum != "", "0")
    return canonical


def _split_by_period(frame: pd.DataFrame) -> dict[str, pd.DataFrame]:
    """Slices of a frame sorted by period, per period code."""
    codes = frame["period"].to_numpy()
    if len(codes) == 0:
        return {}
    starts = np.concatenate([[0], np.flatnonzero(codes[1:] != codes[:-1]) + 1, [len(codes)]])
    return {codes[begin]: frame.iloc[begin:end] for begin, end in itertools.pairwise(starts)}


def _csv_text(frame: pd.DataFrame) -> str:
    return frame.to_csv(index=False, header=False, lineterminator="\n")


def _period_fingerprints(
    periods: Sequence[str],
    sites: pd.DataFrame,
    sections: dict[str, tuple[pd.DataFrame, list[str]]],
) -> dict[str, str]:
    """sha256 per period over canonical, sorted text of its rows and of all sites."""
    site_text = _csv_text(sites.sort_values("site"))
    site_digest = hashlib.sha256(site_text.encode()).hexdigest()
    hashers = {
        code: hashlib.sha256(
            f"{_FINGERPRINT_VERSION}\nperiod {code}\nsites {site_digest}\n".encode()
        )
        for code in periods
    }
    for section, (frame, keys) in sections.items():
        by_period = _split_by_period(frame.sort_values(["period", *keys]))
        for code, hasher in hashers.items():
            rows = by_period.get(code)
            if rows is None:
                hasher.update(f"{section} 0\n".encode())
            else:
                hasher.update(f"{section} {len(rows)}\n".encode())
                hasher.update(_csv_text(rows.drop(columns="period")).encode())
    return {code: hasher.hexdigest() for code, hasher in hashers.items()}


def _validate_sources(folder: Path, sources: dict[str, bytes | None]) -> ValidatedFolder:
    problems: list[Problem] = []
    frames: dict[str, pd.DataFrame | None] = {}
    for name, data in sources.items():
        if data is None:
            problems.append(Problem(name, None, None, None, f"file is missing from {folder}"))
            frames[name] = None
        else:
            frames[name] = _parse(name, data, problems)

    site_index, canonical_sites = None, None
    if frames[SITES] is not None:
        site_index, canonical_sites = _validate_sites(frames[SITES], problems)
    validators = {SUPPLY: _validate_supply, DEMAND: _validate_demand, LANES: _validate_lanes}
    canonical = {
        name: validate(frames[name], site_index, problems)
        for name, validate in validators.items()
        if frames[name] is not None
    }
    if problems:
        order = {name: position for position, name in enumerate(FILE_ORDER)}
        problems.sort(key=lambda problem: (order[problem.file], problem.line or 0))
        raise ValidationError(problems)

    assert canonical_sites is not None  # no problems means every file was parsed
    period_codes = sorted(
        set().union(*(set(pd.unique(frames[name]["period"])) for name in (SUPPLY, DEMAND, LANES)))
    )
    digests = {
        name: hashlib.sha256(data).hexdigest() for name, data in sources.items() if data is not None
    }
    fingerprints = _period_fingerprints(
        period_codes,
        canonical_sites,
        {
            "supply": (canonical[SUPPLY], ["site"]),
            "demand": (canonical[DEMAND], ["site"]),
            "lanes": (canonical[LANES], ["origin", "destination", "mode"]),
        },
    )
    clean = {name: frames[name].drop(columns=_LINE) for name in FILE_ORDER}
    return ValidatedFolder(
        folder=folder,
        files={name: FileDigest(digests[name], len(clean[name])) for name in FILE_ORDER},
        content_sha256=_content_sha256(digests),
        sites=clean[SITES],
        supply=clean[SUPPLY],
        demand=clean[DEMAND],
        lanes=clean[LANES],
        periods=period_codes,
        period_starts={code: parse_week(code) for code in period_codes},
        fingerprints=fingerprints,
    )


def validate_folder(folder: str | Path) -> ValidatedFolder:
    """Read and check the four CSV files of a load folder, without a database.

    Every problem of every file is collected before failing: missing files and
    header columns, blank required cells, unknown or duplicate sites, sites of the
    wrong kind for their role, lanes from a site to itself, cells that are not plain
    decimal numbers, negative quantities, capacities, penalties and costs (unit_cost
    may be negative), min_quantity above capacity, duplicate rows, and bad or
    non-existent ISO week codes.

    Parameters
    ----------
    folder : str or pathlib.Path
        Folder holding sites.csv, supply.csv, demand.csv and lanes.csv.

    Returns
    -------
    ValidatedFolder
        The checked rows, file digests and period fingerprints.

    Raises
    ------
    PlannerError
        If ``folder`` is not a folder.
    ValidationError
        Listing every problem found, each with file, line, column and value.

    Examples
    --------
    >>> import tempfile
    >>> folder = Path(tempfile.mkdtemp())
    >>> _ = (folder / "sites.csv").write_text("site,kind\\nP1,plant\\nC1,customer\\n")
    >>> _ = (folder / "supply.csv").write_text("period,site,quantity\\n2026-W40,P1,10\\n")
    >>> _ = (folder / "demand.csv").write_text("period,site,quantity\\n2026-W40,C1,8\\n")
    >>> _ = (folder / "lanes.csv").write_text(
    ...     "period,origin,destination,unit_cost\\n2026-W40,P1,C1,-2.5\\n")
    >>> validated = validate_folder(folder)
    >>> validated.periods, validated.files["lanes.csv"].rows
    (['2026-W40'], 1)
    >>> _ = (folder / "lanes.csv").write_text(
    ...     "period,origin,destination,unit_cost,capacity\\n2026-W40,P1,C1,2.5,-5\\n")
    >>> validate_folder(folder)
    Traceback (most recent call last):
    ...
    planner.errors.ValidationError: 1 problem in the input files; nothing was loaded:
      lanes.csv:2: column capacity: value '-5': capacity must be >= 0
    >>> import shutil; shutil.rmtree(folder)
    """
    path, sources = _read_sources(folder)
    return _validate_sources(path, sources)


# --------------------------------------------------------------------------- writing

# Staging tables hold the validated text, typed; column names are those of the frames.
_STAGING = {
    "stage_site": (
        "site text, kind text, name text, region text, throughput_capacity numeric, "
        "handling_cost numeric, holding_cost numeric, storage_capacity numeric, "
        "x double precision, y double precision"
    ),
    "stage_supply": "period text, site text, quantity numeric",
    "stage_demand": "period text, site text, quantity numeric, shortage_penalty numeric",
    "stage_lane": (
        "period text, origin text, destination text, mode text, unit_cost numeric, "
        "capacity numeric, min_quantity numeric"
    ),
}

_INSERT_PERIODS = """
    INSERT INTO period (code, starts_on, ends_on)
    SELECT code, starts_on, starts_on + 6
    FROM unnest(%(codes)s::text[], %(starts)s::date[]) AS t (code, starts_on)
    ORDER BY starts_on
    ON CONFLICT (code) DO NOTHING"""

_INSERT_SNAPSHOTS = """
    INSERT INTO period_snapshot (period_id, batch_id, fingerprint)
    SELECT p.id, %(batch)s, t.fingerprint
    FROM unnest(%(codes)s::text[], %(fingerprints)s::text[]) AS t (code, fingerprint)
    JOIN period p ON p.code = t.code"""

_INSERT_SITES = """
    INSERT INTO site (code) SELECT site FROM stage_site ORDER BY site
    ON CONFLICT (code) DO NOTHING"""

_INSERT_SITE_VERSIONS = """
    INSERT INTO site_version (batch_id, site_id, kind, name, region, throughput_capacity,
                              handling_cost, holding_cost, storage_capacity, x, y)
    SELECT %(batch)s, s.id, st.kind, st.name, st.region, st.throughput_capacity,
           st.handling_cost, st.holding_cost, st.storage_capacity, st.x, st.y
    FROM stage_site st JOIN site s ON s.code = st.site"""

_INSERT_SUPPLY = """
    INSERT INTO supply (batch_id, period_id, site_id, quantity)
    SELECT %(batch)s, p.id, s.id, st.quantity
    FROM stage_supply st JOIN period p ON p.code = st.period JOIN site s ON s.code = st.site"""

_INSERT_DEMAND = """
    INSERT INTO demand (batch_id, period_id, site_id, quantity, shortage_penalty)
    SELECT %(batch)s, p.id, s.id, st.quantity, st.shortage_penalty
    FROM stage_demand st JOIN period p ON p.code = st.period JOIN site s ON s.code = st.site"""

# Lane rows are mapped to ids once, then used both to add new lane identities and to
# insert the rates.
_STAGE_LANE_IDS = """
    CREATE TEMP TABLE stage_lane_ids ON COMMIT DROP AS
    SELECT p.id AS period_id, o.id AS origin_id, d.id AS destination_id, st.mode,
           st.unit_cost, st.capacity, coalesce(st.min_quantity, 0) AS min_quantity
    FROM stage_lane st JOIN period p ON p.code = st.period
    JOIN site o ON o.code = st.origin JOIN site d ON d.code = st.destination"""

# The anti-join skips known lanes cheaply (most lanes exist after the first load);
# ON CONFLICT still covers a lane added by anyone else meanwhile. Sorted inserts
# append to the indexes instead of scattering over them.
_INSERT_LANES = """
    INSERT INTO lane (origin_id, destination_id, mode)
    SELECT DISTINCT st.origin_id, st.destination_id, st.mode FROM stage_lane_ids st
    WHERE NOT EXISTS (SELECT FROM lane l WHERE l.origin_id = st.origin_id
                      AND l.destination_id = st.destination_id AND l.mode = st.mode)
    ORDER BY st.origin_id, st.destination_id, st.mode
    ON CONFLICT (origin_id, destination_id, mode) DO NOTHING"""

_INSERT_LANE_RATES = """
    INSERT INTO lane_rate (batch_id, period_id, lane_id, unit_cost, capacity, min_quantity)
    SELECT %(batch)s, st.period_id, l.id, st.unit_cost, st.capacity, st.min_quantity
    FROM stage_lane_ids st JOIN lane l ON l.origin_id = st.origin_id
     AND l.destination_id = st.destination_id AND l.mode = st.mode
    ORDER BY st.period_id, l.id"""


def _copy_frame(
    cursor: psycopg.Cursor, table: str, frame: pd.DataFrame, keep_blank: Sequence[str] = ()
) -> None:
    """COPY a text frame into a staging table: blank cells become NULL except in ``keep_blank``."""
    options = "FORMAT csv"
    if keep_blank:
        options += f", FORCE_NOT_NULL ({', '.join(keep_blank)})"
    data = memoryview(_csv_text(frame).encode())
    columns = ", ".join(frame.columns)
    with cursor.copy(f"COPY {table} ({columns}) FROM STDIN ({options})") as copy:
        for start in range(0, len(data), _COPY_CHUNK):
            copy.write(data[start : start + _COPY_CHUNK])


def _write_batch(connection: sa.Connection, validated: ValidatedFolder) -> tuple[int, int, int]:
    """Write one batch in the caller's transaction; return (batch id, new sites, new lanes)."""
    files = {
        name: {"sha256": digest.sha256, "rows": digest.rows}
        for name, digest in validated.files.items()
    }
    batch_id = connection.execute(
        sa.insert(LoadBatch)
        .values(source=str(validated.folder), files=files, content_sha256=validated.content_sha256)
        .returning(LoadBatch.id)
    ).scalar_one()
    raw = raw_copy_connection(connection)
    with raw.cursor() as cursor:
        # Hash joins of the staging tables against sites and lanes need memory.
        cursor.execute("SET LOCAL work_mem = '256MB'")
        for table, columns in _STAGING.items():
            cursor.execute(f"CREATE TEMP TABLE {table} ({columns}) ON COMMIT DROP")
        _copy_frame(cursor, "stage_site", validated.sites)
        _copy_frame(cursor, "stage_supply", validated.supply)
        _copy_frame(cursor, "stage_demand", validated.demand)
        _copy_frame(cursor, "stage_lane", validated.lanes, keep_blank=["mode"])
        for table in _STAGING:
            cursor.execute(f"ANALYZE {table}")
        codes = validated.periods
        parameters = {
            "batch": batch_id,
            "codes": codes,
            "starts": [validated.period_starts[code] for code in codes],
            "fingerprints": [validated.fingerprints[code] for code in codes],
        }
        cursor.execute(_INSERT_PERIODS, parameters)
        cursor.execute(_INSERT_SNAPSHOTS, parameters)
        new_sites = cursor.execute(_INSERT_SITES, parameters).rowcount
        for statement in (_INSERT_SITE_VERSIONS, _INSERT_SUPPLY, _INSERT_DEMAND):
            cursor.execute(statement, parameters)
        cursor.execute(_STAGE_LANE_IDS)
        cursor.execute("ANALYZE stage_lane_ids")
        new_lanes = cursor.execute(_INSERT_LANES, parameters).rowcount
        cursor.execute(_INSERT_LANE_RATES, parameters)
    return batch_id, new_sites, new_lanes


def _latest_batch(connection: sa.Connection) -> sa.Row | None:
    return connection.execute(
        sa.select(LoadBatch.id, LoadBatch.content_sha256, LoadBatch.loaded_at, LoadBatch.files)
        .order_by(LoadBatch.id.desc())
        .limit(1)
    ).first()


def _unchanged(connection: sa.Connection, folder: Path, latest: sa.Row) -> LoadResult:
    periods = (
        connection.execute(
            sa.text(
                """SELECT p.code FROM period_snapshot ps JOIN period p ON p.id = ps.period_id
               WHERE ps.batch_id = :batch ORDER BY p.starts_on"""
            ),
            {"batch": latest.id},
        )
        .scalars()
        .all()
    )
    loaded_at = latest.loaded_at.astimezone().strftime("%Y-%m-%d %H:%M")
    return LoadResult(
        batch_id=latest.id,
        created=False,
        message=(
            f"{folder} is identical to batch {latest.id} (loaded {loaded_at}); nothing was loaded"
        ),
        rows={name: latest.files[name]["rows"] for name in FILE_ORDER},
        periods=list(periods),
    )


def _span(periods: list[str]) -> str:
    if not periods:
        return "no periods"
    if len(periods) == 1:
        return f"period {periods[0]}"
    return f"{len(periods)} periods {periods[0]}..{periods[-1]}"


def load_folder(engine: sa.Engine, folder: str | Path) -> LoadResult:
    """Validate a load folder and write it as one new load batch, in one transaction.

    The schema is migrated first if needed. If the folder's files are byte for byte
    those of the latest batch, nothing is written. Otherwise one ``load_batch`` row
    and all its snapshot rows are committed together; earlier batches stay as they
    were, so older snapshots remain queryable.

    Parameters
    ----------
    engine : sqlalchemy.Engine
        Target database (see :func:`planner.database.connect.get_engine`).
    folder : str or pathlib.Path
        Folder holding sites.csv, supply.csv, demand.csv and lanes.csv.

    Returns
    -------
    LoadResult
        ``created=False`` when the folder is identical to the latest batch.

    Raises
    ------
    PlannerError
        If ``folder`` is not a folder, or the database refuses the rows.
    ValidationError
        If any file has problems; the database is left unchanged.
    LockTimeout
        If another load held the load lock for longer than the lock timeout
        (``PLANNER_LOCK_TIMEOUT``); nothing was loaded.
    """
    ensure_schema(engine)
    path, sources = _read_sources(folder)
    if all(data is not None for data in sources.values()):
        content = _content_sha256(
            {name: hashlib.sha256(data).hexdigest() for name, data in sources.items()}
        )
        with engine.connect() as connection:
            latest = _latest_batch(connection)
            if latest is not None and latest.content_sha256 == content:
                return _unchanged(connection, path, latest)
    validated = _validate_sources(path, sources)
    # Loads are serialised, so that "identical to the latest batch" stays true until commit.
    with (
        planner_lock(engine, LOAD_LOCK, what="loading", advice="let that load finish and load again"),
        engine.begin() as connection,
    ):
        latest = _latest_batch(connection)
        if latest is not None and latest.content_sha256 == validated.content_sha256:
            return _unchanged(connection, path, latest)
        try:
            batch_id, new_sites, new_lanes = _write_batch(connection, validated)
        except (
            sa.exc.IntegrityError,
            sa.exc.DataError,
            psycopg.IntegrityError,
            psycopg.DataError,
        ) as error:
            raise PlannerError(
                f"the database refused the rows of {path} ({error}); nothing was loaded"
            ) from error
    # Fresh statistics, so that the solve that usually follows a load (cron)
    # plans its snapshot reads on the new row counts, whatever autovacuum does;
    # and the new weeks' result partitions, outside the load's transaction
    # (creating one locks its parent table; a store creates any still missing).
    with engine.begin() as connection:
        connection.execute(sa.text("ANALYZE site, site_version, period_snapshot, supply, demand, lane, lane_rate"))
        ensure_partitions(connection, validated.periods)
    rows = {name: digest.rows for name, digest in validated.files.items()}
    counts = ", ".join(f"{name} {count:,}" for name, count in rows.items())
    return LoadResult(
        batch_id=batch_id,
        created=True,
        message=(
            f"loaded batch {batch_id} from {path}: {_span(validated.periods)}; rows: {counts}; "
            f"{new_sites:,} new sites, {new_lanes:,} new lanes"
        ),
        rows=rows,
        periods=validated.periods,
    )
