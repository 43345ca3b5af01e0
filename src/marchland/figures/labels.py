"""Briefing marks on a finished map: district names that matter, province-level units outlined.

:func:`label_units` names a few units on a map (the top risks, the hotspots, the newly
affected) without two names, or a name and a country label, overlapping: a greedy placement in
the order given, trying the unit's own point and then eight offsets around it, each text's
drawn box checked against the boxes already placed (the usual greedy label placement; no
library for it is in our dependencies and the few names per map do not call for one). A name
that finds no free spot is left off rather than drawn over another.

:func:`outline_units` draws a dashed outline round units that report only as a whole
province, so a 450,000-person province is not read as one more district, and adds the line
to the legend area.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence

from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import FancyArrow, Rectangle
from matplotlib.transforms import Bbox

from ._mapkit import _HALO, BaseMap

__all__ = ["PROVINCE_OUTLINE", "label_units", "outline_units"]

PROVINCE_OUTLINE = dict(color="#3b2a6b", linewidth=1.4, linestyle=(0, (4, 2)))
# Offsets tried around a unit's point, in points: on it, above, below, right, left, diagonals.
_OFFSETS = ((0, 0), (0, 9), (0, -9), (14, 0), (-14, 0), (12, 8), (-12, 8), (12, -8), (-12, -8))


def _renderer(fig: Figure):
    canvas = fig.canvas
    if not hasattr(canvas, "get_renderer"):
        from matplotlib.backends.backend_agg import FigureCanvasAgg

        canvas = FigureCanvasAgg(fig)
    return canvas.get_renderer()


def label_units(
    fig: Figure, base: BaseMap, names: Mapping[str, str], *, fontsize: float = 6.5
) -> list[str]:
    """Name units on a map, most important first, with no two names overlapping.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A map from :mod:`marchland.figures.maps` (its first axes is the map frame).
    base : BaseMap
        The base map the figure was drawn from.
    names : Mapping
        Unit id -> text, in order of importance (earlier names win a contested spot). Ids not
        on the map are ignored.
    fontsize : float
        In points.

    Returns
    -------
    list of str
        The ids that were labelled (the rest found no free spot).

    Examples
    --------
    >>> import geopandas as gpd
    >>> import pandas as pd
    >>> from shapely.geometry import box
    >>> from marchland.figures.maps import MapNotes, attack_rate_map, base_map
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "AAA"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> bm = base_map(u)
    >>> fig = attack_rate_map(bm, pd.Series({"a": 1.0, "b": 0.0}), MapNotes("x", "y"))
    >>> label_units(fig, bm, {"a": "Aldo", "b": "Brin", "zz": "not here"})
    ['a', 'b']
    """
    ax = fig.axes[0]
    renderer = _renderer(fig)
    frame = ax.get_window_extent(renderer)
    taken: list[Bbox] = [
        t.get_window_extent(renderer).padded(2)
        for t in ax.texts
        if t.get_gid() == "country-label" or t.get_text()
    ]
    # The scale bar and north arrow are rectangles and arrows (units are collections; a
    # depot's reach circle may be labelled over).
    furniture = [p for p in ax.patches if isinstance(p, (Rectangle, FancyArrow))]
    taken += [p.get_window_extent(renderer).padded(2) for p in furniture]
    pts = base.units.geometry.representative_point()
    placed = []
    for uid, text in names.items():
        if uid not in pts.index:
            continue
        p = pts.loc[uid]
        for dx, dy in _OFFSETS:
            t = ax.annotate(
                str(text),
                (p.x, p.y),
                xytext=(dx, dy),
                textcoords="offset points",
                ha="center",
                va="center",
                fontsize=fontsize,
                color="#1d1d1b",
                zorder=9,
                path_effects=_HALO,
                gid="unit-label",
                annotation_clip=False,
            )
            box = t.get_window_extent(renderer)
            inside = frame.contains(box.x0, box.y0) and frame.contains(box.x1, box.y1)
            if inside and not any(box.overlaps(b) for b in taken):
                taken.append(box.padded(1))
                if (dx, dy) != (0, 0):  # moved off its unit: a dot marks the unit's point
                    ax.plot([p.x], [p.y], marker="o", ms=1.6, color="#1d1d1b", zorder=9)
                placed.append(uid)
                break
            t.remove()
    return placed


def outline_units(fig: Figure, base: BaseMap, ids: Sequence[str], *, label: str) -> None:
    """Outline units (e.g. provinces reporting as a whole) with a dashed line and say so.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
        A map from :mod:`marchland.figures.maps`.
    base : BaseMap
    ids : sequence of str
        Unit ids to outline; none on the map: nothing is drawn.
    label : str
        The legend text for the outline.

    Examples
    --------
    >>> import geopandas as gpd
    >>> import pandas as pd
    >>> from shapely.geometry import box
    >>> from marchland.figures.maps import MapNotes, attack_rate_map, base_map
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> bm = base_map(u)
    >>> fig = attack_rate_map(bm, pd.Series({"a": 1.0, "b": 0.0}), MapNotes("x", "y"))
    >>> outline_units(fig, bm, ["b"], label="whole province")
    >>> fig.legends[-1].texts[0].get_text()
    'whole province'
    """
    g = base.units.geometry
    sub = g[g.index.isin(list(ids))]
    if not len(sub):
        return
    ax = fig.axes[0]
    xlabel, ylabel = ax.get_xlabel(), ax.get_ylabel()
    sub.boundary.plot(ax=ax, zorder=6, **PROVINCE_OUTLINE)
    ax.set_xlabel(xlabel)  # geopandas names the CRS axes; a map frame carries none
    ax.set_ylabel(ylabel)
    handle = Line2D([], [], **PROVINCE_OUTLINE)
    fig.legend(
        handles=[handle],
        labels=[label],
        loc="lower left",
        bbox_to_anchor=(0.715, 0.135),
        frameon=False,
        fontsize=7.5,
    )
