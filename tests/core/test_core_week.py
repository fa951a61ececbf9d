"""Database-free tests of :mod:`planner.core.week`: defaults of ``WeekData`` and exact scaling."""

from __future__ import annotations

import re
from decimal import Decimal

import numpy as np
import pytest

from planner.core.week import NONE, WeekData, scale_exact
from planner.errors import PlannerError


def test_from_arrays_fills_every_optional_array_with_its_documented_default():
    # Hand computed: 3 sites, 2 lanes; the defaults are those of the docstring.
    w = WeekData.from_arrays([0, 1, 2], [0, 1], [1, 2], [4, 6])
    assert w.n_sites == 3 and w.n_lanes == 2
    for name, value in [("supply", 0), ("demand", 0), ("shortage_penalty", NONE), ("throughput_capacity", NONE),
                        ("handling_cost", 0), ("holding_cost", 0), ("storage_capacity", 0)]:
        array = getattr(w, name)
        assert array.dtype == np.int64 and array.tolist() == [value] * 3, name
    assert w.lane_capacity.dtype == np.int64 and w.lane_capacity.tolist() == [NONE, NONE]
    assert w.lane_min.dtype == np.int64 and w.lane_min.tolist() == [0, 0]
    assert w.site_kind.dtype == np.int8
    assert w.lane_cost.dtype == np.int64 and w.lane_cost.tolist() == [4, 6]


def test_from_arrays_keeps_given_arrays():
    w = WeekData.from_arrays([0, 2], [0], [1], [5], supply=[4, 0], demand=[0, 3], shortage_penalty=[NONE, 9],
                             lane_capacity=[7], lane_min=[2], holding_cost=[1, 0], storage_capacity=[3, 0])
    assert (w.supply.tolist(), w.demand.tolist(), w.shortage_penalty.tolist()) == ([4, 0], [0, 3], [NONE, 9])
    assert (w.lane_capacity.tolist(), w.lane_min.tolist()) == ([7], [2])
    assert (w.holding_cost.tolist(), w.storage_capacity.tolist()) == ([1, 0], [3, 0])


def test_scale_exact_on_decimals_strings_and_missing_figures():
    # Hand computed: 1.25 * 100 = 125, 0.5 * 100 = 50, NaN stays NONE.
    assert scale_exact([Decimal("1.25"), Decimal("0.5")], 2, "unit_cost").tolist() == [125, 50]
    assert scale_exact(["1.25", "3"], 2, "unit_cost").tolist() == [125, 300]
    out = scale_exact([float("nan"), 2.0], 1, "capacity")
    assert out.dtype == np.int64 and out.tolist() == [NONE, 20]


def test_scale_exact_keeps_figures_next_to_the_limit_of_64_bits():
    # Hand computed: 2**61 (about 2.3e18) scales at 0 decimals to itself, below 2**62.
    assert scale_exact([2.0**61], 0, "quantity").tolist() == [2**61]
    # 3e18 is below 2**62 (about 4.61e18), so it still fits.
    assert scale_exact([3e18], 0, "quantity").tolist() == [3 * 10**18]


@pytest.mark.parametrize("figure", [2.0**62, 5e18, -(2.0**62)])
def test_scale_exact_refuses_figures_of_2_to_the_62_and_more(figure):
    message = f"quantity {figure!r} does not fit 64-bit integers at 0 decimals"
    with pytest.raises(PlannerError, match="^" + re.escape(message) + "$"):
        scale_exact([1.0, figure], 0, "quantity")


def test_scale_exact_names_the_first_figure_with_too_many_decimals():
    # Hand computed: 0.125 at 2 decimals is 12.5 hundredths, off by half a unit.
    with pytest.raises(PlannerError, match=r"^unit_cost 0\.125 has more than 2 decimals; raise the precision$"):
        scale_exact([1.0, 0.125, 2.5], 2, "unit_cost")


def test_scale_exact_tolerance_is_relative_for_large_figures_only():
    # 1e12 + 1e-4 at 0 decimals: off by 1e-4, below the relative tolerance 1e-6 * 1e12 = 1e6,
    # so it is taken as the integer (hand computed).
    assert scale_exact([1e12 + 1e-4], 0, "quantity").tolist() == [10**12]
    # 0.0000015 at 0 decimals: off by 1.5e-6 > 1e-6 * max(1, 1.5e-6) = 1e-6, so refused.
    with pytest.raises(PlannerError):
        scale_exact([0.0000015], 0, "quantity")
    # 1.0000015 at 0 decimals: off by 1.5e-6 > 1e-6 * 1.0000015, refused; with a floor of 2 it would pass.
    with pytest.raises(PlannerError):
        scale_exact([1.0000015], 0, "quantity")
    # 3.0000005 is off by 5e-7 <= 1e-6 * 3: kept as 3.
    assert scale_exact([3.0000005], 0, "quantity").tolist() == [3]


def test_scale_exact_accepts_an_error_of_exactly_the_tolerance():
    # 1e-6 at 0 decimals is off the integer 0 by 1e-6 = 1e-6 * max(1, 1e-6): accepted as 0 (hand computed).
    assert scale_exact([1e-6], 0, "quantity").tolist() == [0]
