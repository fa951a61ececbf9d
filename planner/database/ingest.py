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
appears in supply, demand or lanes; so that a truncated export cannot empty
periods silently, a file with a header but no rows and a period missing from one
of those files are refused unless :class:`LoadOptions` allow them. Figures may
have at most the decimals the solve keeps (``LoadOptions.scaling``), text at most
:data:`planner.contract.TEXT_LIMITS` characters. A UTF-8 byte-order mark and CRLF
line ends are dropped before anything is hashed or parsed.

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

import dataclasses
import datetime
import hashlib
import io
import itertools
import os
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
    COST_COLUMNS,
    DEMAND,
    FILE_COLUMNS,
    FILE_ORDER,
    LANES,
    QUANTITY_COLUMNS,
    REQUIRED_COLUMNS,
    SITES,
    SUPPLY,
    TEXT_LIMITS,
)
from planner.database.connect import raw_copy_connection
from planner.database.history import ensure_partitions
from planner.database.locks import LOAD_LOCK, planner_lock
from planner.database.migrate import ensure_schema
from planner.database.models import SITE_KINDS, LoadBatch
from planner.database.snapshot import Scaling
from planner.errors import PlannerError, Problem, ValidationError, shown_value
from planner.periods import parse_week

__all__ = [
    "FILE_COLUMNS",
    "REQUIRED_COLUMNS",
    "FileDigest",
    "LoadOptions",
    "LoadResult",
    "PeriodChange",
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
_UTF8_BOM = b"\xef\xbb\xbf"
#: Environment variable with the default of :attr:`LoadOptions.change_warning`.
CHANGE_WARNING_ENV = "PLANNER_CHANGE_WARNING"
#: Percent change of a period total above which a load warns, unless configured.
DEFAULT_CHANGE_WARNING = 50.0
#: Changed periods a load summary lists one per line before counting the rest.
_SUMMARY_LINES = 10
# What each file holds, in words, for the messages about empty files and missing periods.
_CONTENT = {SITES: "sites", SUPPLY: "supply", DEMAND: "demand", LANES: "lanes"}


def change_warning_percent(value: float | None = None) -> float:
    """The change threshold in percent: ``value``, else ``$PLANNER_CHANGE_WARNING``, else 50.

    Raises
    ------
    PlannerError
        If the value is not a number >= 0.

    Examples
    --------
    >>> change_warning_percent(20)
    20.0
    """
    raw = value if value is not None else os.environ.get(CHANGE_WARNING_ENV, DEFAULT_CHANGE_WARNING)
    try:
        percent = float(raw)
    except ValueError:
        percent = -1.0
    if not percent >= 0:  # also refuses NaN
        raise PlannerError(
            f"the change warning threshold {raw!r} (${CHANGE_WARNING_ENV} or --change-warning) "
            "must be a number of percent >= 0, for example 50"
        )
    return percent


@dataclass(frozen=True)
class LoadOptions:
    """What a load accepts beyond the safe defaults, and when its summary warns.

    Attributes
    ----------
    allow_empty : bool
        Accept a file with a header but no rows (by default refused: a truncated
        export would replace every period's rows of that file with nothing).
    allow_missing_periods : bool
        Accept a period that has rows in some of supply.csv, demand.csv and
        lanes.csv but none in another (by default refused for the same reason).
    scaling : Scaling
        The precision the weeks will be solved with: a figure with more decimals
        is refused at load, as the solve would refuse it.
    change_warning : float
        Percent change of a period's total supply, demand, lane count or lane
        capacity versus its current snapshot above which the load warns.
    """

    allow_empty: bool = False
    allow_missing_periods: bool = False
    scaling: Scaling = Scaling()
    change_warning: float = DEFAULT_CHANGE_WARNING


#: Period totals compared with the current snapshot, in summary order.
CHANGE_MEASURES = ("supply", "demand", "lanes", "capacity")


@dataclass(frozen=True)
class PeriodChange:
    """How a period's totals move from its current snapshot to the new batch.

    Attributes
    ----------
    period : str
    before, after : dict of str to Decimal
        Per measure of :data:`CHANGE_MEASURES`: total supply, total demand, number
        of lanes, total capacity of the lanes that have one.
    warned : tuple of str
        The measures whose change exceeds the threshold.
    """

    period: str
    before: dict[str, Decimal]
    after: dict[str, Decimal]
    warned: tuple[str, ...]

    def text(self) -> str:
        """``2026-W41: demand 75 -> 0 (-100 %)``, only the measures that moved."""
        moves = []
        for measure in CHANGE_MEASURES:
            old, new = self.before[measure], self.after[measure]
            if old != new:
                percent = "new" if old == 0 else _percent((new - old) / old * 100)
                flag = "!" if measure in self.warned else ""
                moves.append(f"{measure} {_number(old)} -> {_number(new)} ({percent}){flag}")
        return f"{self.period}: " + (", ".join(moves) or "same totals, other figures changed")


def _percent(change: Decimal) -> str:
    """A signed percentage, whole above 1 %, with two decimals below (never ``-0 %``).

    Examples
    --------
    >>> _percent(Decimal("-72.7")), _percent(Decimal("-0.0089")), _percent(Decimal("13.3"))
    ('-73 %', '-0.01 %', '+13 %')
    """
    return f"{change:+.0f} %" if abs(change) >= 1 else f"{change:+.2f} %"


def _number(value: Decimal) -> str:
    return format(value.normalize(), ",f")


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
    changes : list of PeriodChange
        The periods whose content differs from their current snapshot.
    warnings : list of str
        Lines about changes above the threshold (empty when none).
    """

    batch_id: int | None
    created: bool
    message: str
    rows: dict[str, int]
    periods: list[str]
    changes: list[PeriodChange] = dataclasses.field(default_factory=list)
    warnings: list[str] = dataclasses.field(default_factory=list)


# --------------------------------------------------------------------------- reading


def _read_sources(folder: str | Path) -> tuple[Path, dict[str, bytes | None]]:
    path = Path(folder).expanduser().resolve()
    if not path.is_dir():
        raise PlannerError(f"load folder {path} does not exist or is not a folder")
    sources = {}
    for name in FILE_ORDER:
        file = path / name
        sources[name] = _normalised(file.read_bytes()) if file.is_file() else None
    return path, sources


def _normalised(data: bytes) -> bytes:
    """The bytes without a UTF-8 byte-order mark and with LF line ends.

    The same content saved by another editor (a BOM, CRLF line ends) hashes the
    same, so it is recognised as the same content and loads nothing.

    Examples
    --------
    >>> _normalised(b"\\xef\\xbb\\xbfsite,kind\\r\\nP1,plant\\r\\n")
    b'site,kind\\nP1,plant\\n'
    """
    return data.removeprefix(_UTF8_BOM).replace(b"\r\n", b"\n")


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
    if _other_separator(name, text, problems):
        return None
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


def _other_separator(name: str, text: str, problems: list[Problem]) -> bool:
    """Flag a header line separated by semicolons, tabs or bars instead of commas.

    Examples
    --------
    >>> problems = []
    >>> _other_separator("supply.csv", "period;site;quantity\\n", problems), problems[0].reason[:40]
    (True, 'the header is separated by semicolons in')
    >>> _other_separator("sites.csv", "site,kind\\n", problems)
    False
    """
    header = text.split("\n", 1)[0]
    if "," in header:
        return False
    for mark, words in ((";", "semicolons"), ("\t", "tabs"), ("|", "vertical bars")):
        if mark in header:
            problems.append(
                Problem(
                    name, 1, None, None,
                    f"the header is separated by {words} instead of commas; save the file as "
                    "comma-separated CSV (columns separated by ',', a '.' as decimal point)",
                )
            )
            return True
    return False


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

    def __init__(
        self, name: str, frame: pd.DataFrame, problems: list[Problem], scaling: Scaling = Scaling()
    ) -> None:
        self.name = name
        self.frame = frame
        self.problems = problems
        self.scaling = scaling

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
        self._precision(column, canonical, per_row)
        return per_row(canonical.where(~negative, ""))

    def _precision(self, column: str, canonical: pd.Series, per_row) -> None:
        """Flag figures with more decimals than the solve keeps for the column's unit."""
        if column in QUANTITY_COLUMNS:
            kept, option, unit, most = self.scaling.quantity_decimals, "--quantity-decimals", "quantities", 6
        elif column in COST_COLUMNS:
            kept, option, unit, most = self.scaling.cost_decimals, "--cost-decimals", "costs", 12
        else:
            return
        if canonical.empty:
            return
        places = canonical.str.partition(".")[2].str.len()
        too_fine = places > kept
        if not too_fine.any():
            return
        places_of = dict(zip(canonical[too_fine], places[too_fine], strict=True))

        def why(places: int) -> str:
            advice = (
                f"load and solve with {option} {places}" if places <= most
                else f"round it to at most {most} decimals"
            )
            return (
                f"{places} decimal{'s' if places != 1 else ''}, more than the {kept} "
                f"the solve keeps for {unit}; {advice}"
            )

        def reason(bad: pd.DataFrame) -> pd.Series:
            return _canonical_decimal(bad[column]).map(places_of).map(why)

        self.flag(per_row(too_fine), column, reason)

    def text_limits(self) -> pd.Series:
        """Flag cells longer than :data:`planner.contract.TEXT_LIMITS` allows; return the
        mask of rows whose text fits (so that later checks do not quote the long text)."""
        fits = pd.Series(True, index=self.frame.index)
        for column, limit in TEXT_LIMITS.get(self.name, {}).items():
            codes, uniques = pd.factorize(self.frame[column])
            long = pd.Series(uniques, dtype=object).str.len().to_numpy() > limit
            if long.any():
                too_long = pd.Series(long[codes], index=self.frame.index)
                self.flag(too_long, column, f"longer than {limit} characters, the most a {column} may have")
                fits &= ~too_long
        return fits

    def period(self) -> pd.Series:
        """Flag bad week codes; return the mask of valid ones."""
        codes = self.frame["period"]
        present = self.required("period", "period")
        reasons: dict[str, str] = {}
        for code in pd.unique(codes[present]):
            try:
                parse_week(code)
            except ValueError as error:
                reasons[code] = str(error).replace(repr(code), shown_value(code))
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
    frame: pd.DataFrame, problems: list[Problem], scaling: Scaling
) -> tuple[_SiteIndex, pd.DataFrame]:
    checks = _Checks(SITES, frame, problems, scaling)
    frame["kind"] = frame["kind"].str.lower()
    has_code = checks.required("site", "site")
    fits = checks.text_limits()
    has_kind = checks.required("kind", "kind")
    valid_kind = frame["kind"].isin(SITE_KINDS)
    checks.flag(has_kind & ~valid_kind, "kind", "unknown kind; use plant, warehouse or customer")
    checks.duplicates(["site"], has_code & fits, "site", lambda bad: "site " + bad["site"])
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
    kind: str, role: str, scaling: Scaling,
) -> tuple[_Checks, pd.DataFrame]:
    """The checks shared by supply.csv and demand.csv: period, site of ``kind``, one row
    per period and site, a non-negative quantity."""
    checks = _Checks(name, frame, problems, scaling)
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
    frame: pd.DataFrame, sites: _SiteIndex | None, problems: list[Problem], scaling: Scaling
) -> pd.DataFrame:
    _, canonical = _validate_site_quantities(
        SUPPLY, frame, sites, problems, "plant", "supply sites must be plants", scaling
    )
    return canonical


def _validate_demand(
    frame: pd.DataFrame, sites: _SiteIndex | None, problems: list[Problem], scaling: Scaling
) -> pd.DataFrame:
    checks, canonical = _validate_site_quantities(
        DEMAND, frame, sites, problems, "customer", "demand sites must be customers", scaling
    )
    canonical["shortage_penalty"] = checks.number(
        "shortage_penalty", required=False, nonnegative=True
    )
    return canonical


def _validate_lanes(
    frame: pd.DataFrame, sites: _SiteIndex | None, problems: list[Problem], scaling: Scaling
) -> pd.DataFrame:
    checks = _Checks(LANES, frame, problems, scaling)
    good_period = checks.period() & checks.text_limits()
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


def _coverage_problems(
    frames: dict[str, pd.DataFrame | None], options: LoadOptions, problems: list[Problem]
) -> dict[str, set[str]]:
    """Flag files with no rows and periods missing from a file; return each file's periods.

    A file with a header but no rows, or a period with rows in some files but none
    in another, is what a truncated export looks like: loaded, it would replace that
    content of every (or of that) period with nothing. Both need an explicit option.
    """
    for name in FILE_ORDER:
        if frames[name] is not None and frames[name].empty and not options.allow_empty:
            problems.append(
                Problem(
                    name, None, None, None,
                    f"the file has a header but no rows, so every period of this load would have "
                    f"no {_CONTENT[name]} (a truncated export?); add the rows, or load with "
                    "--allow-empty if that is meant",
                )
            )
    periods: dict[str, set[str]] = {}
    for name in (SUPPLY, DEMAND, LANES):
        if frames[name] is not None:
            periods[name] = {code for code in pd.unique(frames[name]["period"]) if _is_week(code)}
    if options.allow_missing_periods:
        return periods
    every = set().union(*periods.values())
    for name, own in periods.items():
        missing = sorted(every - own)
        if missing and not frames[name].empty:
            others = [other for other in periods if other != name and periods[other] & set(missing)]
            shown = ", ".join(missing[:5]) + (f" and {len(missing) - 5} more" if len(missing) > 5 else "")
            problems.append(
                Problem(
                    name, None, "period", None,
                    f"no rows for {shown}, which {' and '.join(others)} "
                    f"{'has' if len(others) == 1 else 'have'}; the load would leave "
                    f"{'that period' if len(missing) == 1 else 'those periods'} without "
                    f"{_CONTENT[name]}: add the rows, or load with --allow-missing-periods if that is meant",
                )
            )
    return periods


def _is_week(code: str) -> bool:
    try:
        parse_week(code)
    except ValueError:
        return False
    return True


def _validate_sources(
    folder: Path, sources: dict[str, bytes | None], options: LoadOptions = LoadOptions()
) -> ValidatedFolder:
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
        site_index, canonical_sites = _validate_sites(frames[SITES], problems, options.scaling)
    validators = {SUPPLY: _validate_supply, DEMAND: _validate_demand, LANES: _validate_lanes}
    canonical = {
        name: validate(frames[name], site_index, problems, options.scaling)
        for name, validate in validators.items()
        if frames[name] is not None
    }
    period_sets = _coverage_problems(frames, options, problems)
    if problems:
        order = {name: position for position, name in enumerate(FILE_ORDER)}
        problems.sort(key=lambda problem: (order[problem.file], problem.line or 0))
        raise ValidationError(problems)

    assert canonical_sites is not None  # no problems means every file was parsed
    period_codes = sorted(set().union(*period_sets.values()))
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


def validate_folder(folder: str | Path, options: LoadOptions = LoadOptions()) -> ValidatedFolder:
    """Read and check the four CSV files of a load folder, without a database.

    Every problem of every file is collected before failing: missing files and
    header columns, blank required cells, unknown or duplicate sites, sites of the
    wrong kind for their role, lanes from a site to itself, cells that are not plain
    decimal numbers, negative quantities, capacities, penalties and costs (unit_cost
    may be negative), min_quantity above capacity, duplicate rows, bad or
    non-existent ISO week codes, figures with more decimals than the solve keeps
    (``options.scaling``), text longer than :data:`planner.contract.TEXT_LIMITS`,
    files separated by semicolons or tabs, and, unless ``options`` allow them,
    files with a header but no rows and periods missing from one of the files.

    Parameters
    ----------
    folder : str or pathlib.Path
        Folder holding sites.csv, supply.csv, demand.csv and lanes.csv.
    options : LoadOptions, optional
        Whether empty files and periods missing from a file are accepted, and the
        precision figures must fit.

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
    return _validate_sources(path, sources, options)


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

# Sites and lanes are inserted under _LOCK_IDENTITIES, so that an anti-join finds
# exactly the new ones: an ON CONFLICT clause (a speculative insertion per row)
# doubled the time of a first load's 500,000 new lanes.
_LOCK_IDENTITIES = "LOCK TABLE site, lane IN SHARE ROW EXCLUSIVE MODE"

_INSERT_SITES = """
    INSERT INTO site (code) SELECT st.site FROM stage_site st
    WHERE NOT EXISTS (SELECT FROM site s WHERE s.code = st.site)
    ORDER BY st.site"""

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
# the lock keeps anyone else (a scenario adding a lane) from adding one meanwhile.
# Sorted inserts append to the indexes instead of scattering over them.
_INSERT_LANES = """
    INSERT INTO lane (origin_id, destination_id, mode)
    SELECT DISTINCT st.origin_id, st.destination_id, st.mode FROM stage_lane_ids st
    WHERE NOT EXISTS (SELECT FROM lane l WHERE l.origin_id = st.origin_id
                      AND l.destination_id = st.destination_id AND l.mode = st.mode)
    ORDER BY st.origin_id, st.destination_id, st.mode"""

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


# The current snapshot of each period the load defines (before the load writes its own).
_CURRENT_SNAPSHOTS = """
    SELECT DISTINCT ON (p.id) p.code, p.id, ps.batch_id, ps.fingerprint
    FROM period p JOIN period_snapshot ps ON ps.period_id = p.id
    WHERE p.code = ANY(%(codes)s) ORDER BY p.id, ps.batch_id DESC"""

# Totals of those snapshots, through the primary keys (batch, period, ...).
_CURRENT_TOTALS = """
    SELECT c.code,
           (SELECT coalesce(sum(quantity), 0) FROM supply x
             WHERE x.batch_id = c.batch_id AND x.period_id = c.period_id),
           (SELECT coalesce(sum(quantity), 0) FROM demand x
             WHERE x.batch_id = c.batch_id AND x.period_id = c.period_id),
           (SELECT count(*) FROM lane_rate x WHERE x.batch_id = c.batch_id AND x.period_id = c.period_id),
           (SELECT coalesce(sum(capacity), 0) FROM lane_rate x
             WHERE x.batch_id = c.batch_id AND x.period_id = c.period_id)
    FROM unnest(%(codes)s::text[], %(period_ids)s::int[], %(batches)s::bigint[])
         AS c (code, period_id, batch_id)"""

# Totals of the new rows of those periods: one scan of each staging table.
_STAGED_TOTALS = {
    "supply": "SELECT period, sum(quantity) FROM stage_supply WHERE period = ANY(%(codes)s) GROUP BY period",
    "demand": "SELECT period, sum(quantity) FROM stage_demand WHERE period = ANY(%(codes)s) GROUP BY period",
    "lanes": "SELECT period, count(*), coalesce(sum(capacity), 0) FROM stage_lane "
    "WHERE period = ANY(%(codes)s) GROUP BY period",
}


def _compare_with_current(
    cursor: psycopg.Cursor, validated: ValidatedFolder, threshold: float
) -> tuple[list[PeriodChange], int]:
    """The periods whose content changes, with their totals before and after, and how
    many periods are new. Periods whose fingerprint is unchanged cost nothing."""
    current = cursor.execute(_CURRENT_SNAPSHOTS, {"codes": validated.periods}).fetchall()
    changed = [row for row in current if row[3] != validated.fingerprints[row[0]]]
    new_periods = len(validated.periods) - len(current)
    if not changed:
        return [], new_periods
    codes = [row[0] for row in changed]
    zero = Decimal(0)
    after = {code: dict.fromkeys(CHANGE_MEASURES, zero) for code in codes}
    for measure, query in _STAGED_TOTALS.items():
        for code, *totals in cursor.execute(query, {"codes": codes}):
            if measure == "lanes":
                after[code]["lanes"], after[code]["capacity"] = Decimal(totals[0]), totals[1]
            else:
                after[code][measure] = totals[0]
    rows = cursor.execute(
        _CURRENT_TOTALS,
        {"codes": codes, "period_ids": [row[1] for row in changed], "batches": [row[2] for row in changed]},
    ).fetchall()
    changes = []
    for code, *totals in rows:
        before = dict(zip(CHANGE_MEASURES, (Decimal(total) for total in totals), strict=True))
        warned = tuple(
            measure for measure in CHANGE_MEASURES
            if _beyond(before[measure], after[code][measure], threshold)
        )
        changes.append(PeriodChange(code, before, after[code], warned))
    changes.sort(key=lambda change: validated.period_starts[change.period])
    return changes, new_periods


def _beyond(old: Decimal, new: Decimal, threshold: float) -> bool:
    """Whether ``old -> new`` moves by more than ``threshold`` percent (any move from 0 does)."""
    if old == 0:
        return new != 0
    return abs(new - old) * 100 > abs(old) * Decimal(str(threshold))


def _write_batch(
    connection: sa.Connection, validated: ValidatedFolder, threshold: float
) -> tuple[int, int, int, list[PeriodChange], int]:
    """Write one batch in the caller's transaction; return (batch id, new sites, new lanes,
    changed periods, count of new periods)."""
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
        changes, new_periods = _compare_with_current(cursor, validated, threshold)
        codes = validated.periods
        parameters = {
            "batch": batch_id,
            "codes": codes,
            "starts": [validated.period_starts[code] for code in codes],
            "fingerprints": [validated.fingerprints[code] for code in codes],
        }
        cursor.execute(_INSERT_PERIODS, parameters)
        cursor.execute(_INSERT_SNAPSHOTS, parameters)
        cursor.execute(_LOCK_IDENTITIES)
        new_sites = cursor.execute(_INSERT_SITES, parameters).rowcount
        for statement in (_INSERT_SITE_VERSIONS, _INSERT_SUPPLY, _INSERT_DEMAND):
            cursor.execute(statement, parameters)
        cursor.execute(_STAGE_LANE_IDS)
        cursor.execute("ANALYZE stage_lane_ids")
        new_lanes = cursor.execute(_INSERT_LANES, parameters).rowcount
        cursor.execute(_INSERT_LANE_RATES, parameters)
    return batch_id, new_sites, new_lanes, changes, new_periods


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


def _change_summary(
    changes: list[PeriodChange], new_periods: int, unchanged: int, threshold: float
) -> tuple[list[str], list[str]]:
    """Summary lines (one per changed period, at most a screenful) and warning lines."""
    counts = [f"{new_periods} new", f"{len(changes)} changed", f"{unchanged} unchanged"]
    lines = [f"periods versus their current snapshots: {', '.join(counts)}"]
    if changes:
        lines[0] += f" (! marks a change above {threshold:g} %)"
    # Periods with a warning first, so that a long summary never hides them.
    ordered = sorted(changes, key=lambda change: not change.warned)
    lines += [f"  {change.text()}" for change in ordered[:_SUMMARY_LINES]]
    if len(changes) > _SUMMARY_LINES:
        lines.append(f"  ... and {len(changes) - _SUMMARY_LINES} more changed periods")
    warned = [change for change in changes if change.warned]
    warnings = []
    if warned:
        names = ", ".join(change.period for change in warned[:_SUMMARY_LINES])
        more = f" and {len(warned) - _SUMMARY_LINES} more" if len(warned) > _SUMMARY_LINES else ""
        warnings.append(
            f"{len(warned)} period{'s' if len(warned) != 1 else ''} changed by more than "
            f"{threshold:g} % versus the current snapshot ({names}{more}); check the files "
            "(the previous snapshots are kept)"
        )
    return lines, warnings


def load_folder(engine: sa.Engine, folder: str | Path, options: LoadOptions = LoadOptions()) -> LoadResult:
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
    options : LoadOptions, optional
        What the load accepts beyond the safe defaults, and its change threshold.

    Returns
    -------
    LoadResult
        ``created=False`` when the folder is identical to the latest batch (a
        byte-order mark or CRLF line ends make no difference). The message says,
        per period, how total supply, demand, lanes and lane capacity move versus
        the current snapshot; ``warnings`` name the periods that move by more than
        ``options.change_warning`` percent.

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
    validated = _validate_sources(path, sources, options)
    # Loads are serialised, so that "identical to the latest batch" stays true until commit.
    with (
        planner_lock(engine, LOAD_LOCK, what="loading", advice="let that load finish and load again"),
        engine.begin() as connection,
    ):
        latest = _latest_batch(connection)
        if latest is not None and latest.content_sha256 == validated.content_sha256:
            return _unchanged(connection, path, latest)
        try:
            batch_id, new_sites, new_lanes, changes, new_periods = _write_batch(
                connection, validated, options.change_warning
            )
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
    # plans its snapshot reads on the new row counts, whatever autovacuum does
    # (which never analyses a table as small as period: without statistics the
    # reports' week comparisons were planned as nested loops, 10 s at 10,000 sites);
    # and the new weeks' result partitions, outside the load's transaction
    # (creating one locks its parent table; a store creates any still missing).
    with engine.begin() as connection:
        connection.execute(sa.text("ANALYZE period, site, site_version, period_snapshot, supply, demand, lane, lane_rate"))
        ensure_partitions(connection, validated.periods)
    return _created(validated, batch_id, new_sites, new_lanes, changes, new_periods, options)


def _created(
    validated: ValidatedFolder, batch_id: int, new_sites: int, new_lanes: int,
    changes: list[PeriodChange], new_periods: int, options: LoadOptions,
) -> LoadResult:
    """The result of a load that wrote a new batch, with its summary lines."""
    path = validated.folder
    rows = {name: digest.rows for name, digest in validated.files.items()}
    counts = ", ".join(f"{name} {count:,}" for name, count in rows.items())
    unchanged = len(validated.periods) - new_periods - len(changes)
    summary, warnings = _change_summary(changes, new_periods, unchanged, options.change_warning)
    return LoadResult(
        batch_id=batch_id,
        created=True,
        message="\n".join(
            [
                f"loaded batch {batch_id} from {path}: {_span(validated.periods)}; rows: {counts}; "
                f"{new_sites:,} new sites, {new_lanes:,} new lanes",
                *summary,
            ]
        ),
        rows=rows,
        periods=validated.periods,
        changes=changes,
        warnings=warnings,
    )
