"""Errors the planner raises for problems a user can fix.

Every error the planner raises on purpose derives from :class:`PlannerError`, so a
command-line front end can print the message and exit without a traceback. Input
problems found while validating a load folder are collected as :class:`Problem`
records and raised together in one :class:`ValidationError`, so a user sees every
mistake in one go instead of fixing them one run at a time.
"""

from __future__ import annotations

from collections.abc import Iterable
from dataclasses import dataclass

__all__ = ["SHOWN_VALUE_CHARS", "DatabaseUnavailable", "LockTimeout", "NotOptimal", "PlannerError", "Problem",
           "ValidationError", "shown_value"]

#: Longest cell text an error line quotes in full; longer values are cut.
SHOWN_VALUE_CHARS = 60


def shown_value(value: str) -> str:
    """``value`` quoted for an error line, cut to :data:`SHOWN_VALUE_CHARS` characters.

    Examples
    --------
    >>> shown_value("P1")
    "'P1'"
    >>> shown_value("X" * 3000)[-28:]
    "XXXXX'... (3,000 characters)"
    """
    if len(value) <= SHOWN_VALUE_CHARS:
        return repr(value)
    return f"{value[:SHOWN_VALUE_CHARS]!r}... ({len(value):,} characters)"


class PlannerError(Exception):
    """Base class of errors whose message tells the user what to fix.

    Examples
    --------
    >>> str(PlannerError("PLANNER_DATABASE_URL is not a PostgreSQL URL"))
    'PLANNER_DATABASE_URL is not a PostgreSQL URL'
    """


class DatabaseUnavailable(PlannerError):
    """The database cannot be reached or started; the message says where and what to try.

    The command line exits with its own code for it (3), apart from bad input (2).

    Examples
    --------
    >>> isinstance(DatabaseUnavailable("the embedded server did not start"), PlannerError)
    True
    """


class NotOptimal(PlannerError):
    """A command was asked about a run that did not end optimal; the message gives its status and why.

    The command line exits 1 for it, as for a solve that did not end optimal.

    Examples
    --------
    >>> str(NotOptimal("run 7 (2026-W50) ended infeasible: customer C17 cannot be served"))
    'run 7 (2026-W50) ended infeasible: customer C17 cannot be served'
    """


class LockTimeout(PlannerError):
    """Another session held a lock the planner needed for longer than the lock timeout.

    Nothing that the lock guards was done; running the command again once the
    other session is done is safe. The command line exits with code 4.

    Parameters
    ----------
    message : str
        What is locked, by whom, and what to do.
    holder : str, optional
        The session holding the lock, in words (pid, user, application).
    seconds : float, optional
        How long the planner waited.

    Examples
    --------
    >>> err = LockTimeout("week 2026-W49: locked", holder="pid 4711", seconds=60.0)
    >>> isinstance(err, PlannerError), err.holder, err.seconds
    (True, 'pid 4711', 60.0)
    """

    def __init__(self, message: str, *, holder: str | None = None, seconds: float | None = None) -> None:
        super().__init__(message)
        self.holder = holder
        self.seconds = seconds


@dataclass(frozen=True)
class Problem:
    """One thing wrong with one input file, and where.

    Parameters
    ----------
    file : str
        File name inside the load folder, for example ``"lanes.csv"``.
    line : int or None
        1-based line of the file (the header is line 1), or None when the problem
        concerns the file as a whole (for example a missing file).
    column : str or None
        Column name, or None when the problem is not about one column.
    value : str or None
        The offending cell text, or None when there is no single value.
    reason : str
        What is wrong, phrased so the user knows what to change.

    Examples
    --------
    >>> str(Problem("lanes.csv", 17, "capacity", "-5", "capacity must be >= 0"))
    "lanes.csv:17: column capacity: value '-5': capacity must be >= 0"
    >>> str(Problem("supply.csv", None, None, None, "file is missing"))
    'supply.csv: file is missing'
    """

    file: str
    line: int | None
    column: str | None
    value: str | None
    reason: str

    def __str__(self) -> str:
        location = self.file if self.line is None else f"{self.file}:{self.line}"
        parts = [location]
        if self.column is not None:
            parts.append(f"column {self.column}")
        if self.value is not None:
            parts.append(f"value {shown_value(self.value)}")
        parts.append(self.reason)
        return ": ".join(parts)


class ValidationError(PlannerError):
    """Input files failed validation; nothing was written.

    Parameters
    ----------
    problems : iterable of Problem
        Every problem found, in reporting order.
    max_shown : int, default 50
        How many problems the message lists before summarising the rest as a count.

    Attributes
    ----------
    problems : list of Problem
        All problems, never truncated.

    Examples
    --------
    >>> error = ValidationError([Problem("sites.csv", 3, "kind", "depot",
    ...                                  "unknown kind; use plant, warehouse or customer")])
    >>> print(error)
    1 problem in the input files; nothing was loaded:
      sites.csv:3: column kind: value 'depot': unknown kind; use plant, warehouse or customer
    >>> many = ValidationError([Problem("demand.csv", n, None, None, "bad") for n in range(2, 6)],
    ...                        max_shown=2)
    >>> print(many)
    4 problems in the input files; nothing was loaded:
      demand.csv:2: bad
      demand.csv:3: bad
      ... and 2 more problems
    """

    def __init__(self, problems: Iterable[Problem], max_shown: int = 50) -> None:
        self.problems = list(problems)
        self.max_shown = max_shown
        super().__init__(self._message())

    def _message(self) -> str:
        count = len(self.problems)
        noun = "problem" if count == 1 else "problems"
        lines = [f"{count} {noun} in the input files; nothing was loaded:"]
        lines.extend(f"  {problem}" for problem in self.problems[: self.max_shown])
        hidden = count - self.max_shown
        if hidden > 0:
            lines.append(f"  ... and {hidden} more {'problem' if hidden == 1 else 'problems'}")
        return "\n".join(lines)
