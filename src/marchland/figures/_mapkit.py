"""Shared parts of marchland's figures: palettes, the notes every figure carries, map furniture.

Private to :mod:`marchland.figures.maps` (which re-exports the public constants): the frame, the
fills with district and country borders, the scale bar, the north arrow, the legend and the
footer are drawn here once, for every map.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Sequence
from dataclasses import dataclass, field
from typing import Any

import geopandas as gpd
import matplotlib.colors as mcolors
import matplotlib.patheffects as path_effects
import numpy as np
import pandas as pd
import shapely
from matplotlib.axes import Axes
from matplotlib.axis import Axis
from matplotlib.collections import PatchCollection
from matplotlib.colors import LinearSegmentedColormap
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import FancyArrow, Patch, Rectangle
from matplotlib.path import Path as MplPath
from matplotlib.text import Text

CAUTION_LINE = (
    "Decision support, not a diagnosis. Reporting is incomplete and delayed; small numbers are "
    "unstable. Defer to national authorities and field epidemiologists."
)

# marchland's own palettes (hex); chosen to read in greyscale print as well as on screen.
RATE_COLOURS = ("#f1dca7", "#e2a865", "#c8703f", "#9b3e2d", "#5c1e2a")  # sand -> wine
ZERO_COLOUR = "#f6f4ee"  # a reported zero: data, not missing
NO_REPORT_COLOUR = "#ffffff"  # drawn with grey hatching: nobody reported
NO_REPORT_HATCH = "////"
NOT_TESTED_HATCH = "...."  # units a statistic could not be computed for (e.g. no neighbour)
# Everything inside the frame that is no analysis unit (outside the region, holes such as a
# lake): a cool light tone, so a white or pale unit (an island in a lake) still stands out.
OUTSIDE_COLOUR = "#dde4e7"
RISK_COLOURS = ("#e3eee8", "#b1d2c3", "#75ab96", "#3d7d69", "#1b483d")  # sea-green ramp
RISK_BINS = (0.05, 0.10, 0.20, 0.40, 1.0)
AFFECTED_COLOUR = "#b8ab96"  # a warm grey for units that already have cases
OTHER_COLOUR = "#eeeeea"
NOT_CANDIDATE_COLOUR = "#fdfdfb"  # risk map: lighter than the lowest risk class
ARRIVAL_RAMP = ("#1c2a48", "#3c5f7a", "#6f9a86", "#b9c48b", "#f1e4ad")  # night -> straw
PRIORITY_COLOURS = ("#4b1d3f", "#8a3b61", "#c27a93", "#ead0d8")  # rank 1-5, 6-10, 11-20, rest
DEPOT_COLOUR = "#1d1d1b"
EXISTING_DEPOT_COLOUR = "#8c887d"
FRONT_COLOUR = "#8a1c4a"  # the analysis month's front
DISTRICT_EDGE = dict(color="#7d7a72", linewidth=0.25)
COUNTRY_EDGE = dict(color="#262522", linewidth=1.3)
COUNTRY_LABEL = dict(color="#262522", fontweight="bold")
_HALO = [path_effects.withStroke(linewidth=2.6, foreground="white")]
CASE_BAR = "#6d7fa8"
DEATH_LINE = "#2a2118"
DELAY_SHADE = "#d9d2c3"

DPI = 200
_LEGIBLE_PT = 4.0  # median unit extent on the page (points, ~1.4 mm) below which no district edge
_MAP_SIZE = (8.6, 7.0)  # inches: A4-ish landscape for the atlas
_MAP_AX = (0.02, 0.13, 0.68, 0.76)  # left, bottom, width, height of the map frame
_LEGEND_X = 0.72


@dataclass(frozen=True)
class MapNotes:
    """The text every figure carries.

    Parameters
    ----------
    as_of : str
        The as-of date of the data shown, e.g. ``"2026-11-03"``.
    source : str
        One line on where the data come from.
    region : str
        The region's name, used in titles.
    caution : str
        The caution line (defaults to :data:`CAUTION_LINE`).
    """

    as_of: str
    source: str
    region: str = ""
    caution: str = CAUTION_LINE


@dataclass(frozen=True)
class BaseMap:
    """Geometry prepared once for drawing: simplified units, country outlines, frame.

    ``units`` is indexed by unit id and keeps a ``country`` column; ``countries`` is one
    outline per country, indexed by country code, with ``label`` (the name drawn on the map)
    and ``label_x``/``label_y`` (a point on the country's surface); ``bounds`` is (minx, miny,
    maxx, maxy) of the frame in CRS units (metres in marchland's working CRS).
    """

    units: gpd.GeoDataFrame
    countries: gpd.GeoDataFrame
    bounds: tuple[float, float, float, float]
    # One matplotlib Path per unit (in ``units`` order), built once and shared by every map:
    # each map only recolours them (see _fill). Empty: built on the fly from ``units``.
    paths: tuple = field(default=(), repr=False, compare=False)
    # Median extent of a unit in CRS units, to decide where district borders are legible.
    unit_size: float = field(default=math.inf, repr=False, compare=False)


def _unit_paths(geoms: gpd.GeoSeries) -> tuple[MplPath, ...]:
    """One compound matplotlib Path per (multi)polygon, from shapely's ragged coordinates.

    Exteriors are oriented counter-clockwise and holes clockwise, so holes stay open under
    either fill rule (Agg and PDF differ).
    """
    arr = shapely.orient_polygons(np.asarray(geoms.to_numpy()), exterior_cw=False)
    if not len(arr):
        return ()
    kind, coords, offsets = shapely.to_ragged_array(arr)
    if kind == shapely.GeometryType.POLYGON:
        rings, ring_of_geom = offsets  # each unit: one polygon, these rings
    else:
        rings, polys, geoms = offsets
        ring_of_geom = polys[geoms]  # each unit: its polygons' rings
    codes = np.full(len(coords), MplPath.LINETO, dtype=MplPath.code_type)
    codes[rings[:-1]] = MplPath.MOVETO
    codes[rings[1:] - 1] = MplPath.CLOSEPOLY
    first = rings[ring_of_geom[:-1]]
    last = rings[ring_of_geom[1:]]
    return tuple(
        MplPath(coords[a:b], codes[a:b], readonly=True)
        for a, b in zip(first.tolist(), last.tolist(), strict=True)
    )


class _UnitPolygons(PatchCollection):
    """A PatchCollection over ready-made Paths (no Patch object per unit)."""

    def __init__(self, paths: Sequence[MplPath], **kwargs) -> None:
        super().__init__([], **kwargs)
        self._paths = list(paths)

    def set_paths(self, patches) -> None:  # noqa: D102
        self._paths = [p if isinstance(p, MplPath) else p.get_path() for p in patches]
        self.stale = True


def _fmt_num(x: float) -> str:
    if x == 0:
        return "0"
    if float(x).is_integer() and abs(x) < 1e6:
        return f"{int(x):,}"
    if abs(x) >= 100:
        return f"{x:,.0f}"
    if abs(x) >= 10:
        return f"{x:.1f}"
    return f"{x:.2g}"


def _ramp(colours: Sequence[str], n: int) -> list[str]:
    if n <= len(colours):
        # Spread the picks across the ramp so few classes still span light to dark.
        idx = np.linspace(0, len(colours) - 1, n).round().astype(int) if n > 1 else [0]
        return [colours[i] for i in idx]
    cmap = LinearSegmentedColormap.from_list("_ramp", list(colours))
    return [mcolors.to_hex(cmap(t)) for t in np.linspace(0, 1, n)]


# --- the common furniture ---------------------------------------------------------------------
def _no_math(fig: Figure) -> Figure:
    """Draw every text literally: a place named "Port $A$" must not be read as mathtext.

    Tick labels are left alone: no figure of ours puts names on ticks (they show numbers and
    dates from matplotlib's formatters), and asking an axis for its ticks builds them, which
    was a tenth of the month's drawing time.
    """
    stack: list[Any] = [fig]
    while stack:
        artist = stack.pop()
        if isinstance(artist, Text):
            artist.set_parse_math(False)
        if isinstance(artist, Axis):
            stack.extend((artist.label, artist.offsetText))
        else:
            stack.extend(artist.get_children())
    return fig


_SUBTITLE_CHARS = 135  # 9 pt text across the map figure's width


def _new_map(title: str, subtitle: str = "") -> tuple[Figure, Axes]:
    fig = Figure(figsize=_MAP_SIZE, dpi=DPI, facecolor="white")
    ax = fig.add_axes(_MAP_AX)
    fig.text(
        0.02, 0.955, title, fontsize=13, fontweight="bold", ha="left", va="center", color="#1d1d1b"
    )
    if subtitle:
        # Long subtitles (a partial month says how much of it is in) wrap rather than run off.
        lines = textwrap.wrap(subtitle, _SUBTITLE_CHARS)
        fig.text(
            0.02,
            0.933,
            "\n".join(lines),
            fontsize=9 if len(lines) == 1 else 8,
            ha="left",
            va="top",
            color="#4a4740",
            linespacing=1.25,
        )
    return fig, ax


def _frame(ax: Axes, base: BaseMap) -> None:
    minx, miny, maxx, maxy = base.bounds
    ax.set_xlim(minx, maxx)
    ax.set_ylim(miny, maxy)
    ax.set_aspect("equal")
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_xlabel("")
    ax.set_ylabel("")
    ax.set_facecolor(OUTSIDE_COLOUR)
    for s in ax.spines.values():
        s.set_edgecolor("#b9b5aa")
        s.set_linewidth(0.6)


def _fill(
    ax: Axes,
    base: BaseMap,
    colours: pd.Series,
    *,
    hatch_ids=None,
    hatch: str = NO_REPORT_HATCH,
    default: str = OTHER_COLOUR,
    compact: bool = False,
) -> None:
    """Fill units with per-unit colours, then district edges, then country borders on top.

    The unit polygons are one collection over the base map's shared Paths, rasterised in vector
    output (a PDF page of 10,000 polygons is slow to write and to open); borders, text and
    symbols stay vector. District borders are left out where units are under ~1.5 mm on the
    page: there they would only grey the fills.
    """
    g = base.units.geometry
    paths = base.paths or _unit_paths(g)
    col = colours.reindex(base.units.index).fillna(default)
    size_pt = base.unit_size / _data_per_point(ax, base)
    edge = DISTRICT_EDGE["linewidth"] if size_pt >= _LEGIBLE_PT else 0.0
    ax.add_collection(
        _UnitPolygons(
            paths,
            facecolors=col.to_list(),
            edgecolors=DISTRICT_EDGE["color"],
            linewidths=edge,
            zorder=1,
            rasterized=True,
        ),
        autolim=False,
    )
    if hatch_ids is not None and len(hatch_ids):
        pos = np.flatnonzero(g.index.isin(hatch_ids))
        if len(pos):
            ax.add_collection(
                _UnitPolygons(
                    [paths[i] for i in pos],
                    facecolors="none",
                    edgecolors="#9a968c",
                    hatch=hatch,
                    linewidths=0,
                    zorder=2,
                ),
                autolim=False,
            )
    base.countries.boundary.plot(ax=ax, zorder=5, **COUNTRY_EDGE)
    small = base.units.index[base.units["small"].to_numpy()] if "small" in base.units else []
    if len(small):
        # A unit too small to see at print size (an island in a lake) gets a dot in its own
        # fill, on top of the borders, so its class can still be read.
        pts = base.units.loc[small, "geometry"].representative_point()
        ax.scatter(
            pts.x,
            pts.y,
            s=20 if compact else 58,
            c=col.loc[small].to_list(),
            edgecolors="#262522",
            linewidths=0.6 if compact else 0.8,
            zorder=6,
            hatch=hatch if hatch_ids is not None and set(small) & set(hatch_ids) else None,
        )


def _nice_length(target: float) -> float:
    exp = math.floor(math.log10(target))
    for m in (5, 2, 1):
        if m * 10**exp <= target:
            return m * 10**exp
    return 10**exp  # pragma: no cover


def _data_per_point(ax: Axes, base: BaseMap) -> float:
    """CRS units per typographic point in ``ax`` (equal aspect: the tighter side governs)."""
    fig = ax.get_figure()
    pos = ax.get_position()
    w_in, h_in = fig.get_figwidth() * pos.width, fig.get_figheight() * pos.height
    minx, miny, maxx, maxy = base.bounds
    return max((maxx - minx) / w_in, (maxy - miny) / h_in) / 72


def _scale_bar(ax: Axes, base: BaseMap, *, compact: bool = False) -> None:
    minx, miny, maxx, maxy = base.bounds
    width = maxx - minx
    length = _nice_length(width * (0.30 if compact else 0.22))  # metres
    pt = _data_per_point(ax, base)
    fontsize = 6 if compact else 7
    pad = 4 * pt
    x0 = minx + pad * 2.5
    y0 = miny + pad * 2.5
    h = 3.2 * pt
    half = length / 2
    km = length / 1000
    end_label = f"{_fmt_num(km)} km"
    # An opaque backing box sized from the label's extent in points, so the "km" label and the
    # bar never sit on the polygons or a country border.
    label_half = 0.31 * fontsize * len(end_label) * pt
    ax.add_patch(
        Rectangle(
            (x0 - pad - (0 if compact else 1.5 * pt), y0 - pad),
            length + label_half + 2 * pad,
            h + 1.5 * pt + 1.25 * fontsize * pt + 2 * pad,
            facecolor="white",
            edgecolor="#b9b5aa",
            linewidth=0.4,
            alpha=0.92,
            zorder=9,  # above the fills and the country borders, below the bar itself
        )
    )
    ax.add_patch(
        Rectangle(
            (x0, y0), half, h, facecolor="#1d1d1b", edgecolor="#1d1d1b", linewidth=0.6, zorder=10
        )
    )
    ax.add_patch(
        Rectangle(
            (x0 + half, y0),
            half,
            h,
            facecolor="white",
            edgecolor="#1d1d1b",
            linewidth=0.6,
            zorder=10,
        )
    )
    ticks = [(x0 + length, end_label)]
    if not compact:
        ticks = [(x0, "0"), (x0 + half, _fmt_num(km / 2)), *ticks]
    for xx, lab in ticks:
        ax.text(
            xx,
            y0 + h + 1.5 * pt,
            lab,
            ha="center",
            va="bottom",
            fontsize=fontsize,
            zorder=10,
            color="#1d1d1b",
        )


def _north_arrow(ax: Axes, base: BaseMap, *, compact: bool = False) -> None:
    minx, miny, maxx, maxy = base.bounds
    x = maxx - (maxx - minx) * (0.08 if compact else 0.05)
    y = maxy - (maxy - miny) * (0.25 if compact else 0.14)
    length = (maxy - miny) * (0.10 if compact else 0.07)
    ax.add_patch(
        FancyArrow(
            x,
            y,
            0,
            length,
            width=length * 0.12,
            head_width=length * 0.42,
            head_length=length * 0.42,
            length_includes_head=True,
            facecolor="#1d1d1b",
            edgecolor="white",
            linewidth=0.8,
            zorder=10,
        )
    )
    ax.text(
        x,
        y + length * 1.08,
        "N",
        path_effects=_HALO,
        ha="center",
        va="bottom",
        fontsize=7 if compact else 9,
        fontweight="bold",
        zorder=10,
        color="#1d1d1b",
    )


def _footer(fig: Figure, notes: MapNotes) -> None:
    fig.text(
        0.02,
        0.075,
        # Kept to one line here, not wrapped by matplotlib: its wrapping reads "$" as mathtext.
        textwrap.shorten(f"Data as of {notes.as_of}. {notes.source}", 190, placeholder=" ..."),
        fontsize=7,
        ha="left",
        va="center",
        color="#3a3832",
    )
    fig.text(
        0.02,
        0.045,
        notes.caution,
        fontsize=7,
        ha="left",
        va="center",
        color="#6b2a22",
        style="italic",
    )
    fig.text(
        0.02,
        0.018,
        "Equal-area projection; district borders thin, country borders heavy.",
        fontsize=6,
        ha="left",
        va="center",
        color="#77736a",
    )


def _legend(
    fig: Figure,
    entries: Sequence[tuple[str, dict]],
    title: str,
    *,
    y: float = 0.86,
    x: float = _LEGEND_X,
    ncols: int = 1,
    lines: Sequence[tuple[str, str, float]] = (),
) -> None:
    # Wrap long wording so the legend stays inside the page.
    handles: list = [Patch(label=textwrap.fill(lab, 34), **style) for lab, style in entries]
    handles += [
        Line2D([], [], label=textwrap.fill(lab, 34), color=c, linewidth=w) for lab, c, w in lines
    ]
    handles.append(
        Patch(
            label="outside the analysis units",
            facecolor=OUTSIDE_COLOUR,
            edgecolor="#b9b5aa",
            linewidth=0.4,
        )
    )
    handles.append(Line2D([], [], label="country border", **COUNTRY_EDGE))
    handles.append(
        Line2D([], [], label="district border", color=DISTRICT_EDGE["color"], linewidth=0.6)
    )
    fig.legend(
        handles=handles,
        title=title,
        loc="upper left",
        bbox_to_anchor=(x, y),
        ncols=ncols,
        fontsize=7.5,
        title_fontsize=8,
        frameon=False,
        alignment="left",
        handlelength=1.6,
        handleheight=1.1,
    )


def _label_spots(countries: gpd.GeoSeries, frame: tuple[float, float, float, float]):
    """Place each country's name on its surface, off the scale bar and the north arrow."""
    # Keep names off the scale bar (lower left) and the north arrow (upper right) where the
    # country reaches beyond them; shapely point_on_surface of what is left.
    fw, fh = frame[2] - frame[0], frame[3] - frame[1]
    furniture = shapely.union(
        shapely.box(frame[0], frame[1], frame[0] + 0.32 * fw, frame[1] + 0.14 * fh),
        shapely.box(frame[2] - 0.12 * fw, frame[3] - 0.22 * fh, frame[2], frame[3]),
    )
    free = countries.difference(furniture)
    free = free.where(~free.is_empty, countries)
    return free.representative_point()


def _country_labels(ax: Axes, base: BaseMap, *, compact: bool = False) -> None:
    """Name each country once, at a point on its surface, with a white halo over the fills."""
    c = base.countries
    if "label" not in c:
        return
    for x, y, text in zip(c["label_x"], c["label_y"], c["label"], strict=True):
        ax.text(
            x,
            y,
            str(text),
            ha="center",
            va="center",
            fontsize=6.5 if compact else 9.5,
            zorder=8,
            path_effects=_HALO,
            gid="country-label",
            **COUNTRY_LABEL,
        )


def _furnish(fig: Figure, ax: Axes, base: BaseMap, notes: MapNotes) -> None:
    _frame(ax, base)
    _country_labels(ax, base)
    _scale_bar(ax, base)
    _north_arrow(ax, base)
    _footer(fig, notes)


def _side_text(fig: Figure, text: str, *, y: float = 0.30) -> None:
    fig.text(
        _LEGEND_X,
        y,
        text,
        fontsize=7.2,
        ha="left",
        va="top",
        color="#2b2925",
        family="monospace",
        linespacing=1.35,
    )
