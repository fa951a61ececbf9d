"""What-if edits: each changes exactly the figures it names, and the edited week solves like HiGHS solves it."""

from __future__ import annotations

import dataclasses

import numpy as np
import pytest
from hypothesis import given
from hypothesis import strategies as st

from planner.core.edits import Edit, WeekNames, apply_edits, parse_edit
from planner.core.network import assemble_instance
from planner.core.optimize import optimize
from planner.core.week import WeekData
from planner.errors import ValidationError
from tests.reference_model import optimal_cost
from tests.strategies import week_data

CODES = ["P1", "P2", "W1", "W2", "C1", "C2"]
# lanes:      0: P1->W1 road  1: P1->W2 road  2: P2->W2 rail  3: P2->W1 road  4: W1->C1 road
#             5: W1->C2 road  6: W2->C1 road  7: W2->C2 rail  8: P1->C1 road
ORIGIN = [0, 0, 1, 1, 2, 2, 3, 3, 0]
DESTINATION = [2, 3, 3, 2, 4, 5, 4, 5, 4]
MODES = ["road", "road", "rail", "road", "road", "road", "road", "rail", "road"]


def week() -> WeekData:
    """Two plants, two warehouses (W1 with a throughput limit and handling), two customers (C2 with a penalty)."""
    return WeekData.from_arrays(
        [0, 0, 1, 1, 2, 2], ORIGIN, DESTINATION,
        [25_000, 31_000, 17_500, 30_000, 10_000, 15_000, 12_000, 9_000, 60_000],
        supply=[60, 50, 0, 0, 0, 0], demand=[0, 0, 0, 0, 30, 45],
        shortage_penalty=[-1, -1, -1, -1, -1, 900_000],
        throughput_capacity=[-1, -1, 70, -1, -1, -1], handling_cost=[0, 0, 5_000, 0, 0, 0],
        lane_capacity=[80, -1, 30, -1, -1, -1, -1, 25, 10], lane_min=[0, 0, 10, 0, 0, 0, 0, 0, 0],
    )


REGIONS = ["north", "south", "north", "south", "north", "south"]
NAMES = WeekNames(np.array(CODES, dtype=object), np.array(MODES, dtype=object), np.array(REGIONS, dtype=object))


def edited(*words: str) -> WeekData:
    return apply_edits(week(), NAMES, [parse_edit(w) for w in words])[0]


def changes(base: WeekData, new: WeekData) -> dict[str, list[tuple[int, int, int]]]:
    """Every figure that differs: field -> [(index, old, new)]."""
    out = {}
    for f in dataclasses.fields(base):
        old, now = getattr(base, f.name), getattr(new, f.name)
        if old.shape != now.shape:
            out[f.name] = ("length", old.shape[0], now.shape[0])
            continue
        at = np.flatnonzero(old != now)
        if at.shape[0]:
            out[f.name] = [(int(i), int(old[i]), int(now[i])) for i in at]
    return out


# Expected changes worked out by hand from the edit's wording (common practice, no source).
CASES = [
    (["close W2"], {"lane_capacity": [(1, -1, 0), (2, 30, 0), (6, -1, 0), (7, 25, 0)], "lane_min": [(2, 10, 0)]}),
    (["close C1"], {"lane_capacity": [(4, -1, 0), (6, -1, 0), (8, 10, 0)], "demand": [(4, 30, 0)]}),
    (["close W2", "open W2"], {}),
    # open P1 gives back every lane of P1 shut to 0, the one C1's closure shut too
    (["capacity P1->W1 road 0", "close C1", "open P1"], {"lane_capacity": [(4, -1, 0), (6, -1, 0)],
                                                         "demand": [(4, 30, 0)]}),
    (["close C1", "open C1"], {}),
    (["demand C1 40"], {"demand": [(4, 30, 40)]}),
    (["demand all +10%"], {"demand": [(4, 30, 33), (5, 45, 50)]}),  # 49.5 rounds half away from zero
    (["demand region south +20%"], {"demand": [(5, 45, 54)]}),
    (["supply region north 10"], {"supply": [(0, 60, 10)]}),
    (["rate from region south +100%"], {"lane_cost": [(2, 17_500, 35_000), (3, 30_000, 60_000), (6, 12_000, 24_000),
                                                     (7, 9_000, 18_000)]}),
    # W1->C1 costs 1 already: it is named but does not change
    (["rate to region north 1"], {"lane_cost": [(0, 25_000, 10_000), (3, 30_000, 10_000), (6, 12_000, 10_000),
                                                (8, 60_000, 10_000)]}),
    (["supply P2 35"], {"supply": [(1, 50, 35)]}),
    (["supply all -50%"], {"supply": [(0, 60, 30), (1, 50, 25)]}),
    (["rate P1->W1 road 2.6"], {"lane_cost": [(0, 25_000, 26_000)]}),
    (["rate P1->W1 +8%"], {"lane_cost": [(0, 25_000, 27_000)]}),
    (["rate from P2 -10%"], {"lane_cost": [(2, 17_500, 15_750), (3, 30_000, 27_000)]}),
    (["rate to C2 2"], {"lane_cost": [(5, 15_000, 20_000), (7, 9_000, 20_000)]}),
    (["rate mode rail +100%"], {"lane_cost": [(2, 17_500, 35_000), (7, 9_000, 18_000)]}),
    (["capacity W2->C2 rail 40"], {"lane_capacity": [(7, 25, 40)]}),
    (["capacity from P1 none"], {"lane_capacity": [(0, 80, -1), (8, 10, -1)]}),
    (["capacity all +20%"], {"lane_capacity": [(0, 80, 96), (2, 30, 36), (7, 25, 30), (8, 10, 12)]}),
    (["minimum P2->W2 rail none"], {"lane_min": [(2, 10, 0)]}),
    (["minimum W1->C1 5"], {"lane_min": [(4, 0, 5)]}),
    (["throughput W1 90"], {"throughput_capacity": [(2, 70, 90)]}),
    (["throughput W1 none"], {"throughput_capacity": [(2, 70, -1)]}),
    (["handling W1 0.25"], {"handling_cost": [(2, 5_000, 2_500)]}),
    (["holding W2 0.1"], {"holding_cost": [(3, 0, 1_000)]}),
    (["storage W2 15"], {"storage_capacity": [(3, 0, 15)]}),
]


@pytest.mark.parametrize(("words", "expected"), CASES, ids=[" + ".join(w) for w, _ in CASES])
def test_each_edit_changes_exactly_what_it_names(words, expected) -> None:
    base = week()
    copies = {f.name: np.array(getattr(base, f.name)) for f in dataclasses.fields(base)}
    new = apply_edits(base, NAMES, [parse_edit(w) for w in words])[0]
    assert changes(base, new) == expected
    for name, values in copies.items():  # the base week is never modified
        assert np.array_equal(getattr(base, name), values)


def test_added_lane_is_appended_with_its_rate_and_later_edits_reach_it() -> None:
    new, names = apply_edits(week(), NAMES, [parse_edit("add-lane P2->C2 road 4.5"),
                                             parse_edit("capacity P2->C2 road 12")])
    assert new.n_lanes == 10 and names.lane_mode[-1] == "road"
    assert (new.lane_origin[-1], new.lane_destination[-1], new.lane_cost[-1]) == (1, 5, 45_000)
    assert (new.lane_capacity[-1], new.lane_min[-1]) == (12, 0)
    for name in ("lane_origin", "lane_destination", "lane_cost", "lane_capacity", "lane_min"):
        assert np.array_equal(getattr(new, name)[:9], getattr(week(), name))


EVERY_EDIT = [w for words, _ in CASES for w in words] + ["add-lane P2->C2 road 4.5"]


@pytest.mark.parametrize("words", [w for w in EVERY_EDIT if not w.startswith(("holding", "storage"))])
def test_edited_week_solves_to_the_cost_scipy_highs_finds(words: str) -> None:
    new = edited(words)
    outcome = optimize(assemble_instance(new))
    reference = optimal_cost(new)  # scipy linprog(method="highs") on the edited week's LP
    if reference is None:
        assert outcome.status == "infeasible"
    else:
        assert outcome.status == "optimal" and outcome.certificate.ok
        assert outcome.certificate.primal_cost == reference


def test_edits_in_order_change_the_cost_as_highs_says() -> None:
    new = edited("close W2", "rate from P1 -5%", "demand C2 50", "throughput W1 none", "add-lane P2->C2 road 4.5")
    outcome = optimize(assemble_instance(new))
    assert outcome.certificate.primal_cost == optimal_cost(new)  # scipy linprog(method="highs")
    assert outcome.certificate.primal_cost != optimize(assemble_instance(week())).certificate.primal_cost


@pytest.mark.parametrize(
    ("edit", "column", "value", "reason"),
    [
        (Edit("close", "W9", source="edits.csv", line=4), "target", "W9", "no such site"),
        (Edit("rate", "P1->C2", "3", "edits.csv", 5), "target", "P1->C2", "no such lane"),
        (Edit("rate", "from W9", "3", "edits.csv", 5), "target", "W9", "no such site"),
        (Edit("demand", "P1", "3", "edits.csv", 6), "target", "P1", "customer only"),
        (Edit("demand", "region west", "3", "edits.csv", 6), "target", "west", "no site of the base week"),
        (Edit("throughput", "C1", "3", "edits.csv", 6), "target", "C1", "warehouse only"),
        (Edit("rate", "all", "cheap", "edits.csv", 7), "value", "cheap", "not a number"),
        (Edit("rate", "all", "1.23456", "edits.csv", 7), "value", "1.23456", "more than 4 decimals"),
        (Edit("rate", "all", "8%", "edits.csv", 7), "value", "8%", "written +8%"),
        (Edit("capacity", "P1->W1 road", "-5", "edits.csv", 8), "value", "-5", "capacity below 0"),
        (Edit("minimum", "W2->C2 rail", "30", "edits.csv", 9), "value", "30", "minimum above the lane's capacity"),
        (Edit("demand", "C1", "-1", "edits.csv", 3), "value", "-1", "demand below 0"),
        (Edit("add-lane", "P1->W1 road", "2", "edits.csv", 2), "target", "P1->W1 road", "already has this lane"),
    ],
)
def test_bad_edits_name_file_line_column_and_value(edit, column, value, reason) -> None:
    base = week()
    with pytest.raises(ValidationError) as caught:
        apply_edits(base, NAMES, [edit])
    (problem,) = caught.value.problems
    assert (problem.file, problem.line, problem.column, problem.value) == ("edits.csv", edit.line, column, value)
    assert reason in problem.reason
    assert base.lane_capacity.tolist() == week().lane_capacity.tolist()


def test_every_bad_edit_is_reported_at_once() -> None:
    with pytest.raises(ValidationError) as caught:
        apply_edits(week(), NAMES, [parse_edit("close W9", line=1), parse_edit("rate to C7 +1%", line=2)])
    assert [p.line for p in caught.value.problems] == [1, 2]


def test_pair_without_mode_names_every_mode_of_the_pair() -> None:
    base = WeekData.from_arrays([0, 2], [0, 0], [1, 1], [10_000, 20_000], supply=[5, 0], demand=[0, 5])
    names = WeekNames(np.array(["P", "C"], dtype=object), np.array(["road", "rail"], dtype=object))
    new, _ = apply_edits(base, names, [parse_edit("rate P->C 3")])
    assert new.lane_cost.tolist() == [30_000, 30_000]


def test_quantities_follow_the_quantity_precision() -> None:
    new, _ = apply_edits(week(), NAMES, [parse_edit("demand C1 30.5")], quantity_decimals=1)
    assert new.demand[4] == 305
    with pytest.raises(ValidationError):
        apply_edits(week(), NAMES, [parse_edit("demand C1 30.5")])


@st.composite
def edited_week(draw):
    """A random week and a few random edits of it, with names for its sites and lanes."""
    base = draw(week_data(feasible=True))
    codes = np.array([f"S{i}" for i in range(base.n_sites)], dtype=object)
    names = WeekNames(codes, np.array(["road"] * base.n_lanes, dtype=object))
    keys = names.lane_keys(base)
    plants = codes[base.site_kind == 0]
    customers = codes[base.site_kind == 2]
    percent = st.integers(-50, 80).map(lambda p: f"{p:+d}%")
    templates = st.one_of(
        st.tuples(st.just("rate"), st.sampled_from(list(keys)), percent),
        st.tuples(st.just("rate"), st.sampled_from([f"from {c}" for c in codes]), st.integers(0, 20).map(str)),
        st.tuples(st.just("capacity"), st.sampled_from(list(keys)), st.sampled_from(["none", "+50%", "-20%"])),
        st.tuples(st.just("minimum"), st.sampled_from(list(keys)), st.just("none")),
        st.tuples(st.just("demand"), st.sampled_from(["all"] + list(customers)), percent),
        st.tuples(st.just("supply"), st.sampled_from(["all"] + list(plants)), st.sampled_from(["+10%", "+50%"])),
        st.tuples(st.just("add-lane"), st.sampled_from([f"{p}->{c} truck" for p in plants for c in customers]),
                  st.integers(0, 9).map(str)),
    )
    edits = [Edit(a, t, v, "edits.csv", n) for n, (a, t, v) in enumerate(draw(st.lists(templates, max_size=4)), 2)]
    return base, names, edits


@given(edited_week())
def test_random_edits_solve_to_the_cost_scipy_highs_finds(case) -> None:
    base, names, edits = case
    try:
        new, _ = apply_edits(base, names, edits)
    except ValidationError as err:
        # only an edit that adds a lane twice or leaves a minimum above a capacity is refused
        assert all("already has this lane" in p.reason or "minimum above" in p.reason for p in err.problems)
        return
    outcome = optimize(assemble_instance(new))
    reference = optimal_cost(new)  # scipy linprog(method="highs") on the edited week
    if reference is None:
        assert outcome.status == "infeasible"
    else:
        assert outcome.status == "optimal" and outcome.certificate.primal_cost == reference
