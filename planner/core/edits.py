"""What-if edits of one week's input, applied to its arrays without touching the original.

A scenario is a base week plus an ordered list of edits. Each :class:`Edit`
names what it changes in plain words, a target (a site, a lane, a group of
lanes) and a value. :func:`apply_edits` resolves the targets against the
week's site codes and lane labels (:class:`WeekNames`), checks that the week
stays solvable as written (no negative capacity, no minimum above its
capacity) and returns a new :class:`~planner.core.week.WeekData`; the input
arrays are never modified. Every edit is a vectorised update of a mask of
sites or lanes.

Edits (``VALUE`` is a decimal figure that replaces the old one, or a
percentage change such as ``+8%`` or ``-12.5%``; ``none`` removes a limit):

==============================  ==============================================
``close SITE``                  every lane into or out of SITE carries nothing
                                (capacity 0, minimum 0); a customer's demand
                                becomes 0
``open SITE``                   every lane of SITE with capacity 0 gets the
                                base week's capacity and minimum back
                                (unlimited where the base had 0); a closed
                                customer its demand (undoes a closure)
``demand CUSTOMERS VALUE``      demand of a customer, ``region NAME`` or ``all``
``supply PLANTS VALUE``         supply of a plant, ``region NAME`` or ``all``
``rate LANES VALUE``            unit cost of the lanes
``capacity LANES VALUE|none``   lane capacity
``minimum LANES VALUE|none``    lane minimum commitment (``none``: 0)
``throughput SITE VALUE|none``  a warehouse's throughput capacity
``handling SITE VALUE``         a warehouse's handling cost per unit
``holding SITE VALUE``          a site's holding cost per unit carried
``storage SITE VALUE|none``     a site's storage capacity
``add-lane O->D [MODE] RATE``   a lane that the week does not have
==============================  ==============================================

``LANES`` is one lane (``O->D`` or ``O->D MODE``), ``from SITE``, ``to SITE``,
``from region NAME``, ``to region NAME``, ``mode MODE`` or ``all``. A percentage change is rounded half away from zero to
the week's precision; a figure given with more decimals than the precision is
refused.
"""

from __future__ import annotations

import dataclasses
from dataclasses import dataclass
from decimal import Decimal, InvalidOperation

import numpy as np

from planner.core.week import INT64_MAX, NONE, SiteKind, WeekData
from planner.errors import Problem, ValidationError

__all__ = ["ACTIONS", "Edit", "WeekNames", "apply_edits", "parse_edit"]

#: Every edit action, and whether it takes a value.
ACTIONS = {
    "close": False, "open": False, "demand": True, "supply": True, "rate": True, "capacity": True,
    "minimum": True, "throughput": True, "handling": True, "holding": True, "storage": True, "add-lane": True,
}
_LANE_ACTIONS = ("rate", "capacity", "minimum")
#: Site figures and the WeekData field each edits.
_SITE_FIELDS = {"throughput": "throughput_capacity", "handling": "handling_cost", "holding": "holding_cost",
                "storage": "storage_capacity"}
#: Figures counted in quantity units (the others are costs).
_QUANTITIES = {"demand", "supply", "capacity", "minimum", "throughput", "storage"}
#: Figures whose ``none`` removes the limit.
_REMOVABLE = {"capacity", "minimum", "throughput", "storage"}


@dataclass(frozen=True)
class Edit:
    """One edit as written, with where it was written.

    Parameters
    ----------
    action : str
        One of :data:`ACTIONS`.
    target : str
        A site code, a lane (``O->D`` or ``O->D MODE``), ``from SITE``,
        ``to SITE``, ``mode MODE`` or ``all``.
    value : str
        The figure as written: ``120``, ``+8%``, ``none``; empty for close/open.
    source : str
        Where the edit comes from (a file name, or ``--edit``).
    line : int
        Line in the file (the position on the command line).
    target_column, value_column : str
        Names of the columns the target and the value came from, for errors.
    """

    action: str
    target: str
    value: str = ""
    source: str = "--edit"
    line: int = 1
    target_column: str = "target"
    value_column: str = "value"
    #: Line of the value where it differs from ``line`` (a TOML table's keys).
    value_line: int | None = None

    def text(self) -> str:
        """The edit as one command-line word list, for example ``rate from W01 +8%``."""
        return " ".join(part for part in (self.action, self.target, self.value) if part)


@dataclass(frozen=True)
class WeekNames:
    """Codes of a week's sites and modes of its lanes, beside its :class:`WeekData`."""

    site_code: np.ndarray
    lane_mode: np.ndarray
    #: Region of each site (None where unknown); targets ``region NAME`` need it.
    site_region: np.ndarray | None = None

    def lane_keys(self, week: WeekData) -> np.ndarray:
        """``ORIGIN->DESTINATION MODE`` of every lane (no trailing space without a mode)."""
        label = np.char.add(np.char.add(self.site_code[week.lane_origin].astype(str), "->"),
                            self.site_code[week.lane_destination].astype(str))
        modes = self.lane_mode.astype(str)
        return np.where(modes == "", label, np.char.add(np.char.add(label, " "), modes))


def parse_edit(words: str, *, source: str = "--edit", line: int = 1) -> Edit:
    """An edit from one command-line string, for example ``"rate from W01 +8%"``.

    The action is the first word and the value the last (close and open take
    none); the target is what lies between.

    Examples
    --------
    >>> e = parse_edit("rate W01->C02 road +8%")
    >>> e.action, e.target, e.value
    ('rate', 'W01->C02 road', '+8%')
    >>> parse_edit("close W03").text()
    'close W03'
    >>> parse_edit("shut W03")
    Traceback (most recent call last):
    ...
    planner.errors.ValidationError: 1 problem in the input files; nothing was loaded:
      --edit:1: column action: value 'shut': unknown edit; use one of close, open, demand, supply, rate, capacity, minimum, throughput, handling, holding, storage, add-lane
    """
    parts = words.split()
    if not parts or parts[0] not in ACTIONS:
        raise ValidationError([_unknown_action(source, line, parts[0] if parts else "")])
    action = parts[0]
    if ACTIONS[action]:
        if len(parts) < 3:
            raise ValidationError([Problem(source, line, "value", words, f"{action} needs a target and a value")])
        return Edit(action, " ".join(parts[1:-1]), parts[-1], source, line)
    return Edit(action, " ".join(parts[1:]), "", source, line)


def _unknown_action(source: str, line: int, action: str) -> Problem:
    return Problem(source, line, "action", action, "unknown edit; use one of " + ", ".join(ACTIONS))


def apply_edits(
    week: WeekData, names: WeekNames, edits, *, cost_decimals: int = 4, quantity_decimals: int = 0
) -> tuple[WeekData, WeekNames]:
    """The week with ``edits`` applied in order, and its names (added lanes at the end).

    Parameters
    ----------
    week : WeekData
        The base week; never modified.
    names : WeekNames
    edits : sequence of Edit
    cost_decimals, quantity_decimals : int
        The precision ``week`` was scaled with.

    Returns
    -------
    (WeekData, WeekNames)

    Raises
    ------
    ValidationError
        Listing every edit that names an unknown site or lane, a site of the
        wrong kind, an invalid figure, or leaves a limit negative or a minimum
        above its capacity; nothing is applied then.

    Examples
    --------
    >>> w = WeekData.from_arrays([0, 1, 2], [0, 1], [1, 2], [10_000, 20_000], supply=[9, 0, 0], demand=[0, 0, 5])
    >>> names = WeekNames(np.array(["P1", "W1", "C1"], dtype=object), np.array(["road", "road"], dtype=object))
    >>> edited, _ = apply_edits(w, names, [parse_edit("rate all +10%"), parse_edit("demand C1 7")])
    >>> edited.lane_cost.tolist(), edited.demand.tolist(), w.demand.tolist()
    ([11000, 22000], [0, 0, 7], [0, 0, 5])
    """
    state = _Editing(week, names, cost_decimals, quantity_decimals)
    for edit in edits:
        state.apply(edit)
    state.check_solvable()
    if state.problems:
        raise ValidationError(state.problems)
    return state.week(), WeekNames(state.site_code, state.lane_mode, names.site_region)


class _Editing:
    """The arrays being edited (copies), and the problems found so far."""

    def __init__(self, week: WeekData, names: WeekNames, cost_decimals: int, quantity_decimals: int) -> None:
        self.base = week
        self.fields = {f.name: None if getattr(week, f.name) is None else np.array(getattr(week, f.name))
                       for f in dataclasses.fields(week)}
        for name in ("holding_cost", "storage_capacity"):
            if self.fields[name] is None:
                self.fields[name] = np.zeros(week.n_sites, np.int64)
        self.site_code = np.asarray(names.site_code, dtype=object)
        self.site_region = names.site_region
        self.lane_mode = np.array(names.lane_mode, dtype=object)
        self.decimals = {"cost": cost_decimals, "quantity": quantity_decimals}
        self.problems: list[Problem] = []
        self.last_edit: dict[str, Edit] = {}
        self._keys: np.ndarray | None = None

    def lane_keys(self) -> np.ndarray:
        """Every lane's ``O->D MODE`` as str, built once (added lanes are appended)."""
        if self._keys is None:
            self._keys = WeekNames(self.site_code, self.lane_mode).lane_keys(self.week()).astype(str)
        return self._keys

    def week(self) -> WeekData:
        return WeekData(**self.fields)

    def _problem(self, edit: Edit, column: str, value: str, reason: str) -> None:
        line = edit.value_line if column == edit.value_column and edit.value_line else edit.line
        self.problems.append(Problem(edit.source, line, column, value, reason))

    def apply(self, edit: Edit) -> None:
        if edit.action not in ACTIONS:
            self.problems.append(_unknown_action(edit.source, edit.line, edit.action))
            return
        if edit.action in ("close", "open"):
            site = self._site(edit, edit.target, None)
            if site is not None:
                self._close_or_open(site, edit.action == "close")
            return
        if edit.action == "add-lane":
            self._add_lane(edit)
            return
        if edit.action in _LANE_ACTIONS:
            mask = self._lanes(edit)
            field = {"rate": "lane_cost", "capacity": "lane_capacity", "minimum": "lane_min"}[edit.action]
        elif edit.action in ("demand", "supply"):
            mask = self._sites_of_kind(edit, SiteKind.CUSTOMER if edit.action == "demand" else SiteKind.PLANT)
            field = edit.action
        else:
            kind = SiteKind.WAREHOUSE if edit.action in ("throughput", "handling") else None
            site = self._site(edit, edit.target, kind)
            mask = None if site is None else np.arange(self.fields["site_kind"].shape[0]) == site
            field = _SITE_FIELDS[edit.action]
        if mask is not None:
            self._change(edit, field, mask)
            self.last_edit[field] = edit

    def _close_or_open(self, site: int, close: bool) -> None:
        f = self.fields
        touches = (f["lane_origin"] == site) | (f["lane_destination"] == site)
        if close:
            f["lane_capacity"][touches] = 0
            f["lane_min"][touches] = 0
            if f["site_kind"][site] == SiteKind.CUSTOMER:
                f["demand"][site] = 0
        else:
            # Figures closed to 0 get the base week's back (unlimited where the base had them at 0).
            shut = np.flatnonzero(touches & (f["lane_capacity"] == 0))
            shut = shut[shut < self.base.n_lanes]
            base_capacity = self.base.lane_capacity[shut]
            f["lane_capacity"][shut] = np.where(base_capacity == 0, NONE, base_capacity)
            f["lane_min"][shut] = np.where(base_capacity == 0, 0, self.base.lane_min[shut])
            if f["site_kind"][site] == SiteKind.CUSTOMER and f["demand"][site] == 0:
                f["demand"][site] = self.base.demand[site]

    def _site(self, edit: Edit, code: str, kind: SiteKind | None) -> int | None:
        found = np.flatnonzero(self.site_code == code)
        if found.shape[0] == 0:
            self._problem(edit, edit.target_column, code, "no such site in the base week")
            return None
        site = int(found[0])
        if kind is not None and self.fields["site_kind"][site] != kind:
            self._problem(edit, edit.target_column, code, f"{edit.action} applies to a {kind.name.lower()} only")
            return None
        return site

    def _region(self, edit: Edit, name: str) -> np.ndarray | None:
        """Sites of region ``name``, or None (a problem recorded)."""
        inside = None if self.site_region is None else self.site_region == name
        if inside is None or not inside.any():
            self._problem(edit, edit.target_column, name, "no site of the base week is in this region")
            return None
        return inside

    def _sites_of_kind(self, edit: Edit, kind: SiteKind) -> np.ndarray | None:
        if edit.target == "all":
            return self.fields["site_kind"] == kind
        words = edit.target.split(maxsplit=1)
        if len(words) == 2 and words[0] == "region":
            inside = self._region(edit, words[1])
            return None if inside is None else inside & (self.fields["site_kind"] == kind)
        site = self._site(edit, edit.target, kind)
        return None if site is None else np.arange(self.fields["site_kind"].shape[0]) == site

    def _lanes(self, edit: Edit) -> np.ndarray | None:
        f, words = self.fields, edit.target.split()
        if words == ["all"]:
            return np.ones(f["lane_origin"].shape[0], bool)
        if len(words) >= 3 and words[0] in ("from", "to") and words[1] == "region":
            inside = self._region(edit, " ".join(words[2:]))
            if inside is None:
                return None
            return inside[f["lane_origin" if words[0] == "from" else "lane_destination"]]
        if len(words) == 2 and words[0] in ("from", "to"):
            site = self._site(edit, words[1], None)
            if site is None:
                return None
            return f["lane_origin" if words[0] == "from" else "lane_destination"] == site
        if len(words) == 2 and words[0] == "mode":
            mask = self.lane_mode == words[1]
        else:
            mask = self._lane_key(edit, words)
            if mask is None:
                return None
        if not mask.any():
            self._problem(edit, edit.target_column, edit.target, "no such lane in the base week")
            return None
        return mask

    def _lane_key(self, edit: Edit, words: list[str]) -> np.ndarray | None:
        if not 1 <= len(words) <= 2 or "->" not in words[0]:
            self._problem(edit, edit.target_column, edit.target,
                          "a lane target is O->D, O->D MODE, from SITE, to SITE, mode MODE or all")
            return None
        keys = self.lane_keys()
        key = " ".join(words)
        mask = keys == key
        if len(words) == 1 and not mask.any():
            # O->D without a mode names the pair's lanes of every mode.
            mask = np.char.startswith(keys, key + " ")
        return mask

    def _scaled(self, edit: Edit, text: str, quantity: bool, column: str) -> int | None:
        """A figure at the week's precision, or None (a problem recorded)."""
        decimals = self.decimals["quantity" if quantity else "cost"]
        try:
            figure = Decimal(text)
        except InvalidOperation:
            self._problem(edit, column, text, "not a number; give a figure, a change such as +8%, or none")
            return None
        scaled = figure.scaleb(decimals)
        if not figure.is_finite() or scaled != scaled.to_integral_value():
            self._problem(edit, column, text, f"more than {decimals} decimals; raise the precision")
            return None
        if abs(scaled) >= 2**62:
            self._problem(edit, column, text, "too large for 64-bit integers at this precision")
            return None
        return int(scaled)

    def _change(self, edit: Edit, field: str, mask: np.ndarray) -> None:
        values, text = self.fields[field], edit.value.strip()
        if text.lower() == "none" and edit.action in _REMOVABLE:
            values[mask] = 0 if field == "lane_min" else NONE
            return
        if text.endswith("%"):
            try:
                percent = Decimal(text[:-1])
            except InvalidOperation:
                percent = None
            if percent is None or not percent.is_finite() or (text[0] not in "+-"):
                self._problem(edit, edit.value_column, text, "a percentage change is written +8% or -12.5%")
                return
            values[mask] = _scale_by(values[mask], Decimal(100) + percent, edit, self)
            return
        scaled = self._scaled(edit, text, edit.action in _QUANTITIES, edit.value_column)
        if scaled is not None:
            values[mask] = scaled

    def _add_lane(self, edit: Edit) -> None:
        words = edit.target.split()
        if not 1 <= len(words) <= 2 or words[0].count("->") != 1:
            self._problem(edit, edit.target_column, edit.target, "add-lane names its lane as O->D or O->D MODE")
            return
        origin_code, destination_code = words[0].split("->")
        origin = self._site(edit, origin_code, None)
        destination = self._site(edit, destination_code, None)
        rate = self._scaled(edit, edit.value, False, edit.value_column)
        if origin is None or destination is None or rate is None:
            return
        mode = words[1] if len(words) == 2 else ""
        keys = self.lane_keys()
        if origin == destination or (keys == " ".join(words)).any():
            self._problem(edit, edit.target_column, edit.target,
                          "the base week already has this lane (change it with rate/capacity)"
                          if origin != destination else "a lane joins two different sites")
            return
        f = self.fields
        for name, value in (("lane_origin", origin), ("lane_destination", destination), ("lane_cost", rate),
                            ("lane_capacity", NONE), ("lane_min", 0)):
            f[name] = np.append(f[name], np.int64(value))
        self.lane_mode = np.append(self.lane_mode, np.array([mode], dtype=object))
        self._keys = np.append(keys, " ".join(words))

    def check_solvable(self) -> None:
        """Refuse figures no plan can meet as written: negative limits or needs, minimums above capacity."""
        f = self.fields
        checks = [
            ("lane_capacity", f["lane_capacity"] < NONE, "a capacity below 0"),
            ("lane_min", f["lane_min"] < 0, "a minimum below 0"),
            ("lane_min", (f["lane_capacity"] >= 0) & (f["lane_min"] > f["lane_capacity"]),
             "a minimum above the lane's capacity"),
            ("demand", f["demand"] < 0, "a demand below 0"),
            ("supply", f["supply"] < 0, "a supply below 0"),
            ("throughput_capacity", f["throughput_capacity"] < NONE, "a throughput capacity below 0"),
            ("handling_cost", f["handling_cost"] < 0, "a handling cost below 0"),
            ("holding_cost", f["holding_cost"] < 0, "a holding cost below 0"),
            ("storage_capacity", f["storage_capacity"] < NONE, "a storage capacity below 0"),
        ]
        for field, bad, what in checks:
            if bad.any():
                edit = self.last_edit.get(field) or self.last_edit.get("lane_capacity") or Edit("", "")
                self._problem(edit, edit.value_column, edit.value,
                              f"leaves {int(bad.sum())} figure(s) with {what}; the week could not be solved as written")


def _scale_by(values: np.ndarray, factor_percent: Decimal, edit: Edit, state: _Editing) -> np.ndarray:
    """``values * factor_percent / 100`` rounded half away from zero; NONE (no limit) stays."""
    numerator, denominator = (factor_percent / 100).as_integer_ratio()
    keep = values == NONE if edit.action in _REMOVABLE else np.zeros(values.shape, bool)
    if values.size and int(np.abs(values).max()) > INT64_MAX // max(abs(numerator), 1) // 2:
        state._problem(edit, edit.value_column, edit.value, "the change overflows 64-bit integers")
        return values
    product = values * numerator
    out = np.sign(product) * ((2 * np.abs(product) + denominator) // (2 * denominator))
    return np.where(keep, values, out)
