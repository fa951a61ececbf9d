"""Charts that do not hide data: parallel modes drawn apart, shortages marked, labels that do not
overlap, legends that name only what is drawn, horizons titled with their range.

The figures are inspected through their matplotlib artists, and the network
picture also as pixels of the PNG the reports embed.
"""

from __future__ import annotations

import io
import itertools
from decimal import Decimal as D

import matplotlib.image
import numpy as np
import pandas as pd
import sqlalchemy as sa
from matplotlib.collections import LineCollection

from planner.reports.charts import lane_paths, network_chart, network_figure, price_figure
from planner.runs.horizon import solve_horizon
from tests.helpers import invoke
from tests.test_views import solve_hand_network


def sites(**extra) -> pd.DataFrame:
    frame = pd.DataFrame({
        "site": ["P1", "W1", "C1", "C2"],
        "kind": ["plant", "warehouse", "customer", "customer"],
        "region": ["north"] * 4,
        "x": [0.0, 10.0, 20.0, 20.0],
        "y": [0.0, 0.0, 5.0, -5.0],
    })
    return frame.assign(**extra)


def two_modes() -> pd.DataFrame:
    """Road and rail on P1->W1 (rail full), one lane W1->C1."""
    return pd.DataFrame({
        "origin": ["P1", "P1", "W1"], "destination": ["W1", "W1", "C1"], "mode": ["road", "rail", ""],
        "flow": [30, 10, 40], "at_capacity": [False, True, False],
    })


def lane_lines(figure) -> list[np.ndarray]:
    axes = figure.axes[0]
    return [path.vertices for c in axes.collections if isinstance(c, LineCollection) for path in c.get_paths()]


def legend_labels(figure) -> list[str]:
    legend = figure.axes[0].get_legend()
    return [] if legend is None else [t.get_text() for t in legend.get_texts()]


def test_parallel_modes_on_one_pair_are_two_distinct_lines() -> None:
    figure = network_figure(sites(), two_modes())
    lines = lane_lines(figure)
    assert len(lines) == 3
    on_pair = [v for v in lines if np.allclose(v[0], [0, 0]) and np.allclose(v[-1], [10, 0])]
    assert len(on_pair) == 2
    road, rail = on_pair
    # Both bow away from the straight line between the sites, to opposite sides, by a tenth of its length or more.
    assert road[:, 1].max() >= 1.0 and rail[:, 1].min() <= -1.0
    assert np.abs(road - rail).max() >= 2.0
    # The lone lane stays straight.
    lone = next(v for v in lines if np.allclose(v[0], [10, 0]))
    assert len(lone) == 2
    assert "several modes on one pair: bowed apart" in legend_labels(figure)


def test_parallel_modes_are_apart_in_the_picture_itself() -> None:
    figure = network_figure(sites(), two_modes())
    png = network_chart(sites(), two_modes())
    image = matplotlib.image.imread(io.BytesIO(png))
    axes = figure.axes[0]
    figure.canvas.draw()
    # The pixel column through the middle of P1->W1 (x = 5), from y = -3 to y = 3 in data units.
    (x, top), (_, bottom) = axes.transData.transform([(5.0, 3.0), (5.0, -3.0)])
    height = image.shape[0]
    column = image[int(height - top):int(height - bottom), int(round(x)), :3]
    inked = column.min(axis=1) < 0.85  # not white
    runs = sum(1 for value, _ in itertools.groupby(inked) if value)
    assert runs >= 2, "road and rail must show as two separate strokes across the middle of the pair"


def test_customers_left_short_are_ringed_and_named_in_the_legend() -> None:
    figure = network_figure(sites(units_short=[None, None, None, D(15)]), two_modes())
    rings = [c for c in figure.axes[0].collections if c.get_label() == "short"]
    assert len(rings) == 1
    assert rings[0].get_offsets().tolist() == [[20.0, -5.0]]  # C2, the customer left short
    assert "customer left short" in legend_labels(figure)


def test_legend_names_only_what_is_drawn() -> None:
    no_warehouse = sites().iloc[[0, 2]].reset_index(drop=True)
    lanes = pd.DataFrame({"origin": ["P1"], "destination": ["C1"], "mode": ["road"], "flow": [5], "at_capacity": [False]})
    labels = legend_labels(network_figure(no_warehouse, lanes))
    assert labels == ["plant", "customer", "lane in use (width: flow)"]
    history = pd.DataFrame({"site": ["C1"] * 2, "period": ["2026-W45", "2026-W46"], "price": [D(5), D(6)],
                            "price_low": [D(5), D(6)], "price_high": [D(5), D(6)], "degenerate": [False, False]})
    # Every range has no width: no band is drawn, so the legend does not name one.
    assert legend_labels(price_figure(history, currency="EUR")) == ["price"]
    assert price_figure(history, currency="EUR").axes[0].get_ylabel() == "price per unit (EUR)"
    wide = history.assign(price_low=[D(4), D(6)], price_high=[D(6), D(6)], degenerate=[True, False])
    assert legend_labels(price_figure(wide)) == ["price", "[price low, price high]", "degenerate: price not unique"]


def test_site_labels_never_overlap_and_are_thinned_when_crowded() -> None:
    crowd = 40
    frame = pd.DataFrame({
        "site": ["P01", "W01"] + [f"C{i:02d}" for i in range(1, crowd + 1)],
        "kind": ["plant", "warehouse"] + ["customer"] * crowd,
        "region": ["north"] * (crowd + 2),
        "x": [0.0, 50.0] + list(np.linspace(99.0, 101.0, crowd)),
        "y": [0.0, 0.0] + list(np.linspace(-1.0, 1.0, crowd)),
    })
    figure = network_figure(frame, pd.DataFrame(columns=["origin", "destination", "flow", "at_capacity"]))
    renderer = figure.canvas.get_renderer()
    texts = [t for t in figure.axes[0].texts if t.get_text()]
    boxes = [t.get_window_extent(renderer) for t in texts]
    assert not any(a.overlaps(b) for a, b in itertools.combinations(boxes, 2))
    shown = {t.get_text() for t in texts}
    assert {"P01", "W01"} <= shown  # plants and warehouses first
    assert 3 <= len(shown) < crowd + 2  # the crowd is thinned, not dropped


def test_lane_paths_alternate_sides_and_grow() -> None:
    start, end = np.array([[0.0, 0.0]] * 3), np.array([[10.0, 0.0]] * 3)
    paths = lane_paths(start, end, np.array([0, 1, 2]), np.array([3, 3, 3]))
    peaks = [p[np.abs(p[:, 1]).argmax(), 1] for p in paths]
    assert peaks[0] > 0 > peaks[1] and abs(peaks[2]) > abs(peaks[0])


def test_horizon_charts_are_titled_with_their_range(engine: sa.Engine, write_folder, tmp_path) -> None:
    solve_hand_network(engine, write_folder)
    run = solve_horizon(engine, ["2026-W10", "2026-W11"]).run_id
    page = tmp_path / "horizon.html"
    result = invoke("report", "--run", str(run), "-p", "2026-W11", "--html", str(page))
    assert result.exit_code == 0, result.output
    html = page.read_text(encoding="utf-8")
    assert 'alt="Network of 2026-W11 in linked horizon 2026-W10..2026-W11' in html
    assert 'alt="C1: price per unit in linked horizon 2026-W10..2026-W11' in html
