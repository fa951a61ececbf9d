"""PNG charts of stored runs: a site's price over time, and the network of one week.

Charts are drawn with matplotlib's Agg renderer on a :class:`~matplotlib.figure.Figure`
of their own (no pyplot, no display, no global state), and returned as PNG bytes,
ready to write to a file or to inline in an HTML page.

The inputs are the DataFrames of :mod:`planner.reports.queries`: :func:`price_chart` takes the
rows of one site from :func:`planner.reports.queries.site_prices`, :func:`network_chart` the
sites and lanes from :func:`planner.reports.queries.network_of_week`.
"""

from __future__ import annotations

import io

import numpy as np
import pandas as pd
from matplotlib.backends.backend_agg import FigureCanvasAgg
from matplotlib.collections import LineCollection
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch

__all__ = [
    "KIND_STYLE", "lane_paths", "network_chart", "network_figure", "price_chart", "price_figure", "site_positions",
]

#: Marker and colour of each site kind on the network picture.
KIND_STYLE = {
    "plant": {"marker": "s", "color": "#1b6ca8", "label": "plant"},
    "warehouse": {"marker": "D", "color": "#6a3d9a", "label": "warehouse"},
    "customer": {"marker": "o", "color": "#2e8b57", "label": "customer"},
}
_KIND_COLUMN = {"plant": 0.0, "warehouse": 1.0, "customer": 2.0}
_BINDING_COLOUR = "#d62728"
_SHORT_COLOUR = "#b2182b"
_FLOW_COLOUR = "#7f8c8d"
_DPI = 100


def _png(figure: Figure) -> bytes:
    FigureCanvasAgg(figure)
    buffer = io.BytesIO()
    figure.savefig(buffer, format="png", dpi=_DPI)
    return buffer.getvalue()


def _floats(values: pd.Series) -> np.ndarray:
    return pd.to_numeric(values, errors="coerce").to_numpy(dtype=float)


def price_chart(history: pd.DataFrame, *, title: str | None = None, currency: str = "") -> bytes:
    """PNG of one site's price per period with its [price low, price high] range.

    The range is shaded; where a bound is NULL (no further unit can be moved that
    way) the shading runs to the edge of the chart and is hatched. Periods whose
    price is degenerate (price low differs from price high) get a hollow
    diamond. The legend names only what is drawn.

    Parameters
    ----------
    history : pandas.DataFrame
        Rows of one site with ``period``, ``price``, ``price_low``, ``price_high`` and
        ``degenerate`` (as returned by :func:`planner.reports.queries.site_prices`).
    title : str, optional
        Default: ``"<site>: price per unit"``.
    currency : str, optional
        ISO 4217 code written on the price axis.

    Returns
    -------
    bytes
        A PNG image.

    Raises
    ------
    ValueError
        If ``history`` is empty or holds more than one site.

    Examples
    --------
    >>> from decimal import Decimal as D
    >>> rows = pd.DataFrame({"site": ["C1", "C1"], "period": ["2026-W10", "2026-W11"],
    ...                      "price": [D(12), D(5)], "price_low": [D(12), D(3)],
    ...                      "price_high": [D(12), None], "degenerate": [False, True]})
    >>> price_chart(rows)[:8]
    b'\\x89PNG\\r\\n\\x1a\\n'
    """
    return _png(price_figure(history, title=title, currency=currency))


def price_figure(history: pd.DataFrame, *, title: str | None = None, currency: str = "") -> Figure:
    """The figure of :func:`price_chart`, for callers that draw on or inspect it."""
    if history.empty:
        raise ValueError("no prices to chart: the site has no solved week in the range")
    sites = history["site"].unique() if "site" in history else []
    if len(sites) > 1:
        raise ValueError(f"a price chart shows one site; got {len(sites)}: {', '.join(map(str, sites[:5]))}")
    periods = history["period"].astype(str).to_list()
    price = _floats(history["price"])
    low = _floats(history["price_low"])
    high = _floats(history["price_high"])
    degenerate = history["degenerate"].astype(bool).to_numpy()
    known = np.concatenate([price, low[np.isfinite(low)], high[np.isfinite(high)]])
    span = float(known.max() - known.min()) or max(1.0, abs(float(known.max())))
    bottom, top = float(known.min()) - 0.15 * span, float(known.max()) + 0.15 * span

    figure = Figure(figsize=(8, 4))
    axes = figure.add_subplot()
    x = np.arange(len(periods))
    open_ended = _draw_ranges(axes, x, low, high, bottom, top)
    axes.plot(x, price, color="#08519c", marker="o", markersize=4, linewidth=1.5)
    axes.scatter(
        x[degenerate], price[degenerate], marker="D", s=70, facecolors="none",
        edgecolors="#e6550d", linewidths=1.5, zorder=3,
    )
    axes.set_ylim(bottom, top)
    axes.set_xlim(-0.5, len(periods) - 0.5)
    step = max(1, len(periods) // 12)
    axes.set_xticks(x[::step], periods[::step], rotation=45, ha="right", fontsize=8)
    axes.set_ylabel(f"price per unit ({currency})" if currency else "price per unit")
    axes.grid(axis="y", alpha=0.3)
    site = str(sites[0]) if len(sites) else ""
    axes.set_title(title or f"{site}: price per unit")
    # A range is drawn only where it has a width (an open bound always has one).
    any_range = bool((open_ended | (high > low)).any())
    axes.legend(handles=_price_legend(any_range, open_ended.any(), degenerate.any()), loc="best", fontsize=8,
                framealpha=0.9)
    figure.tight_layout()
    return figure


def _draw_ranges(axes, x, low, high, bottom: float, top: float) -> np.ndarray:
    """One bar per period from low to high (weeks are discrete: no interpolation); open bounds hatched.

    Returns which periods have an open bound.
    """
    band_low = np.where(np.isfinite(low), low, bottom)
    band_high = np.where(np.isfinite(high), high, top)
    open_ended = ~(np.isfinite(low) & np.isfinite(high))
    axes.bar(x, band_high - band_low, bottom=band_low, width=0.6, color="#9ecae1", alpha=0.6, linewidth=0)
    if open_ended.any():
        axes.bar(
            x[open_ended], (band_high - band_low)[open_ended], bottom=band_low[open_ended], width=0.6,
            color="none", hatch="//", edgecolor="#6baed6", linewidth=0,
        )
    return open_ended


def _price_legend(any_range: bool, any_open: bool, any_degenerate: bool) -> list:
    """Legend entries for what is drawn only: the range band only where some week's range has a width."""
    handles = [Line2D([], [], color="#08519c", marker="o", markersize=4, label="price")]
    if any_range:
        handles.append(Patch(facecolor="#9ecae1", alpha=0.6, label="[price low, price high]"))
    if any_degenerate:
        handles.append(
            Line2D([], [], color="none", marker="D", markerfacecolor="none", markeredgecolor="#e6550d",
                   markersize=8, label="degenerate: price not unique")
        )
    if any_open:
        handles.append(Patch(facecolor="white", edgecolor="#6baed6", hatch="//", label="bound open (no further unit)"))
    return handles


def _has_coordinates(sites: pd.DataFrame) -> np.ndarray:
    return np.isfinite(_floats(sites["x"])) & np.isfinite(_floats(sites["y"]))


def site_positions(sites: pd.DataFrame) -> np.ndarray:
    """(x, y) of each site for the network picture.

    Sites with coordinates ``x``, ``y`` sit there. A site without them sits on a
    small circle around the mean position of the sites of its region that have
    coordinates (around the mean of all of them if its region has none). When no
    site has coordinates the picture is a layered diagram: plants, warehouses and
    customers in three columns, each column grouped by region.

    Parameters
    ----------
    sites : pandas.DataFrame
        ``site``, ``kind``, ``region``, ``x``, ``y``.

    Returns
    -------
    numpy.ndarray
        Shape (number of sites, 2).

    Examples
    --------
    >>> frame = pd.DataFrame({"site": ["P1", "C1", "C2"], "kind": ["plant", "customer", "customer"],
    ...                       "region": ["north", "north", "south"], "x": [None] * 3, "y": [None] * 3})
    >>> site_positions(frame).tolist()
    [[0.0, 0.5], [2.0, 0.75], [2.0, 0.25]]
    """
    xy = np.column_stack([_floats(sites["x"]), _floats(sites["y"])]).reshape(-1, 2)
    has = _has_coordinates(sites)
    region = sites["region"].fillna("").astype(str).to_numpy()
    if has.any():
        missing = np.flatnonzero(~has)
        centre_all = xy[has].mean(axis=0)
        extent = float(np.ptp(xy[has], axis=0).max()) or 1.0
        for group in np.unique(region[missing]):
            members = missing[region[missing] == group]
            anchors = has & (region == group)
            centre = xy[anchors].mean(axis=0) if anchors.any() else centre_all
            angle = 2 * np.pi * np.arange(members.shape[0]) / max(members.shape[0], 1)
            radius = 0.05 * extent
            xy[members] = centre + radius * np.column_stack([np.cos(angle), np.sin(angle)])
        return xy
    # Layered: one column per kind, sites sorted by region then code, top to bottom.
    kind = sites["kind"].fillna("customer").astype(str).to_numpy()
    code = sites["site"].astype(str).to_numpy()
    for k, column in _KIND_COLUMN.items():
        members = np.flatnonzero(kind == k)
        order = members[np.lexsort((code[members], region[members]))]
        xy[order, 0] = column
        # Each column spread over the same height, first region at the top.
        xy[order, 1] = 1.0 - (np.arange(order.shape[0]) + 0.5) / max(order.shape[0], 1)
    return xy


def network_chart(
    sites: pd.DataFrame,
    lanes: pd.DataFrame,
    *,
    title: str | None = None,
    lanes_in_use: int | None = None,
) -> bytes:
    """PNG of one week's network: see :func:`network_figure`.

    Examples
    --------
    >>> sites = pd.DataFrame({"site": ["P1", "C1"], "kind": ["plant", "customer"],
    ...                       "region": ["north", "north"], "x": [0.0, 1.0], "y": [0.0, 1.0]})
    >>> lanes = pd.DataFrame({"origin": ["P1"], "destination": ["C1"], "flow": [5], "at_capacity": [True]})
    >>> network_chart(sites, lanes)[:4]
    b'\\x89PNG'
    """
    return _png(network_figure(sites, lanes, title=title, lanes_in_use=lanes_in_use))


def network_figure(
    sites: pd.DataFrame,
    lanes: pd.DataFrame,
    *,
    title: str | None = None,
    lanes_in_use: int | None = None,
) -> Figure:
    """One week's network as a matplotlib figure: sites, lanes drawn by flow, limits and shortages marked.

    Line width grows with the lane's flow; lanes at capacity are red and
    dashed. Several lanes on one origin-destination pair (modes) are drawn
    as separate arcs bowed apart, so none hides another. Customers left short
    are ringed in red. Sites are placed by :func:`site_positions`; their codes
    are written beside the markers where they do not overlap (plants and
    warehouses first; with more than 80 sites only plants, warehouses and
    customers left short). The legend names only what is drawn.

    Parameters
    ----------
    sites : pandas.DataFrame
        ``site``, ``kind``, ``region``, ``x``, ``y``; optional ``units_short``.
    lanes : pandas.DataFrame
        ``origin``, ``destination``, ``flow``, ``at_capacity``; optional ``mode``.
    title : str, optional
        Chart title (name the week, and for a linked horizon its range).
    lanes_in_use : int, optional
        Number of lanes carrying flow in the week; when larger than ``len(lanes)``
        the title says that only the busiest are drawn.

    Returns
    -------
    matplotlib.figure.Figure
        Its axes hold one :class:`~matplotlib.collections.LineCollection` per
        lane style, one path per lane, in the order of ``lanes``.
    """
    xy = site_positions(sites)
    index = {code: i for i, code in enumerate(sites["site"].astype(str))}
    figure = Figure(figsize=(9, 6.5))
    axes = figure.add_subplot()
    drawn = lanes[lanes["origin"].astype(str).isin(index) & lanes["destination"].astype(str).isin(index)]
    styles = _draw_lanes(axes, xy, index, drawn) if not drawn.empty else set()
    kinds, short = _draw_sites(axes, xy, sites)
    if _has_coordinates(sites).any():
        axes.set_aspect("equal", adjustable="datalim")
    else:
        axes.set_xticks([0, 1, 2], ["plants", "warehouses", "customers"])
        axes.set_yticks([])
    axes.margins(0.08)
    axes.autoscale_view()
    heading = title or "Network"
    if lanes_in_use is not None and lanes_in_use > len(drawn):
        heading += f" (busiest {len(drawn):,} of {lanes_in_use:,} lanes in use)"
    axes.set_title(heading)
    handles = _network_legend(kinds, styles, short)
    if handles:
        axes.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, -0.06), ncol=min(len(handles), 6),
                    fontsize=8, frameon=False)
    figure.tight_layout()
    _label_sites(figure, axes, xy, sites)
    return figure


def _network_legend(kinds: set[str], styles: set[str], short: bool) -> list:
    handles = [
        Line2D([], [], color=style["color"], marker=style["marker"], linestyle="none", label=style["label"])
        for kind, style in KIND_STYLE.items() if kind in kinds
    ]
    if short:
        handles.append(Line2D([], [], color="none", marker="o", markersize=11, markerfacecolor="none",
                              markeredgecolor=_SHORT_COLOUR, markeredgewidth=1.8, label="customer left short"))
    if "flow" in styles:
        handles.append(Line2D([], [], color=_FLOW_COLOUR, linewidth=2, label="lane in use (width: flow)"))
    if "binding" in styles:
        handles.append(Line2D([], [], color=_BINDING_COLOUR, linewidth=2, linestyle="dashed", label="lane at capacity"))
    if "parallel" in styles:
        handles.append(Line2D([], [], color=_FLOW_COLOUR, linewidth=1, linestyle="dotted",
                              label="several modes on one pair: bowed apart"))
    return handles


def lane_paths(start: np.ndarray, end: np.ndarray, pair_rank: np.ndarray, pair_size: np.ndarray) -> list[np.ndarray]:
    """One polyline per lane: straight when alone on its pair, else a bowed arc of its own.

    Lane ``i`` is the ``pair_rank[i]``-th of ``pair_size[i]`` lanes joining the
    same two sites (either way); the arcs of a pair bow to alternate sides by
    a growing amount, so parallel modes never lie on top of each other.

    Examples
    --------
    >>> paths = lane_paths(np.array([[0.0, 0.0]] * 2), np.array([[1.0, 0.0]] * 2), np.array([0, 1]), np.array([2, 2]))
    >>> [round(float(p[:, 1].max() - p[:, 1].min()), 2) > 0 for p in paths], len(paths[0])
    ([True, True], 17)
    """
    steps = np.linspace(0.0, 1.0, 17)[:, None]
    paths = []
    for a, b, rank, size in zip(start, end, pair_rank, pair_size):
        if size <= 1:
            paths.append(np.stack([a, b]))
            continue
        # The middle of the arc lies 0.1, -0.1, 0.2, -0.2, ... of the lane's length off the straight
        # line (the control point twice that), to the left of a direction fixed per pair.
        bow = 0.2 * (rank // 2 + 1) * (1 if rank % 2 == 0 else -1)
        direction = b - a if tuple(a) <= tuple(b) else a - b
        normal = np.array([-direction[1], direction[0]])
        control = (a + b) / 2 + bow * normal
        paths.append((1 - steps) ** 2 * a + 2 * (1 - steps) * steps * control + steps**2 * b)
    return paths


def _draw_lanes(axes, xy: np.ndarray, index: dict, drawn: pd.DataFrame) -> set[str]:
    """Lanes as lines (bowed apart on shared pairs), width by flow; lanes at capacity red and dashed.

    Returns which styles were drawn (``flow``, ``binding``, ``parallel``).
    """
    origin = drawn["origin"].astype(str).map(index).to_numpy(dtype=int)
    destination = drawn["destination"].astype(str).map(index).to_numpy(dtype=int)
    pair = pd.Series(list(zip(np.minimum(origin, destination), np.maximum(origin, destination))))
    rank = pair.groupby(pair).cumcount().to_numpy()
    size = pair.map(pair.value_counts()).to_numpy()
    paths = lane_paths(xy[origin], xy[destination], rank, size)
    flow = _floats(drawn["flow"])
    # Thinner lines when there are many, so that the busiest still stand out.
    widest = 4.0 if len(drawn) <= 200 else 1.5
    widths = 0.3 + widest * flow / (flow.max() or 1.0)
    binding = drawn["at_capacity"].astype(bool).to_numpy()
    styles = {"parallel"} if (size > 1).any() else set()
    for selected, colour, style, z, name in (
        (~binding, _FLOW_COLOUR, "solid", 1, "flow"), (binding, _BINDING_COLOUR, "dashed", 2, "binding"),
    ):
        if selected.any():
            styles.add(name)
            axes.add_collection(
                LineCollection(
                    [paths[i] for i in np.flatnonzero(selected)], linewidths=widths[selected], colors=colour,
                    linestyles=style, alpha=0.75, zorder=z, label=name,
                )
            )
    return styles


def _draw_sites(axes, xy: np.ndarray, sites: pd.DataFrame) -> tuple[set[str], bool]:
    """A marker per site by kind, a red ring round customers left short; returns the kinds drawn and
    whether any customer is short."""
    kinds = sites["kind"].fillna("").astype(str).to_numpy()
    for kind, style in KIND_STYLE.items():
        chosen = kinds == kind
        if chosen.any():
            axes.scatter(
                xy[chosen, 0], xy[chosen, 1], marker=style["marker"], color=style["color"],
                s=60 if len(sites) <= 200 else 12, zorder=3, edgecolors="white", linewidths=0.6,
            )
    short = _short(sites)
    if short.any():
        axes.scatter(
            xy[short, 0], xy[short, 1], marker="o", s=220 if len(sites) <= 200 else 60, facecolors="none",
            edgecolors=_SHORT_COLOUR, linewidths=1.8, zorder=4, label="short",
        )
    return set(kinds.tolist()) & set(KIND_STYLE), bool(short.any())


def _short(sites: pd.DataFrame) -> np.ndarray:
    if "units_short" not in sites:
        return np.zeros(len(sites), dtype=bool)
    return np.nan_to_num(_floats(sites["units_short"])) > 0


_OFFSETS = ((5, 5), (5, -11), (-5, 5), (-5, -11))


def _label_sites(figure: Figure, axes, xy: np.ndarray, sites: pd.DataFrame) -> None:
    """Codes beside the markers, placed where they overlap no other code; thinned when they cannot be.

    Plants and warehouses are placed first, then customers left short, then
    the other customers; a code that fits at none of four spots is left out.
    """
    kinds = sites["kind"].fillna("").astype(str).to_numpy()
    short = _short(sites)
    priority = np.select([kinds == "plant", kinds == "warehouse", short], [0, 1, 2], 3)
    if len(sites) > 80:
        priority = np.where(priority < 3, priority, -1)
    renderer = FigureCanvasAgg(figure).get_renderer()
    placed = []
    for i in np.argsort(priority, kind="stable"):
        if priority[i] < 0:
            continue
        for dx, dy in _OFFSETS:
            label = axes.annotate(
                str(sites["site"].iloc[i]), tuple(xy[i]), textcoords="offset points", xytext=(dx, dy),
                ha="left" if dx > 0 else "right", fontsize=8, zorder=5,
            )
            box = label.get_window_extent(renderer)
            if not any(box.overlaps(other) for other in placed):
                placed.append(box)
                break
            label.remove()
