"""Static maps and epi curves for the monthly bundle (matplotlib + mapclassify).

This module draws; it computes no statistic and imports no analysis module. Every function
takes GeoDataFrames, DataFrames, Series and plain values and returns a matplotlib ``Figure``;
:func:`save_figure` writes it as a 200 dpi PNG and, optionally, as a page of the atlas PDF.

Every map carries the same furniture, drawn by one helper: country borders heavier than
district borders, a legend that names its units, a scale bar, a north arrow, a footer with the
as-of date and the data source, and the caution line. The palettes are marchland's own (sand to
wine for rates, sea-green for risk, night-to-straw for arrival); the cluster palette is passed in
by the caller (``hotspots.CLUSTER_COLOURS``).

Drawing is kept quick: :func:`base_map` simplifies the geometry once (to about a tenth of a
millimetre at print size) and dissolves the country outlines once; every map reuses it.
"""

from __future__ import annotations

import math
import textwrap
from collections.abc import Mapping, Sequence
from dataclasses import dataclass

import geopandas as gpd
import matplotlib

matplotlib.use("Agg", force=False)

import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from matplotlib.collections import PolyCollection  # noqa: E402
from matplotlib.colors import LinearSegmentedColormap  # noqa: E402
from matplotlib.figure import Figure  # noqa: E402
from matplotlib.lines import Line2D  # noqa: E402
from matplotlib.patches import Circle, FancyArrow, Patch, Rectangle  # noqa: E402
from matplotlib.ticker import MaxNLocator  # noqa: E402

CAUTION_LINE = (
    "Decision support, not a diagnosis. Reporting is incomplete and delayed; small numbers are "
    "unstable. Defer to national authorities and field epidemiologists."
)

# marchland's own palettes (hex); chosen to read in greyscale print as well as on screen.
RATE_COLOURS = ("#f1dca7", "#e2a865", "#c8703f", "#9b3e2d", "#5c1e2a")  # sand -> wine
ZERO_COLOUR = "#f6f4ee"  # a reported zero: data, not missing
NO_REPORT_COLOUR = "#ffffff"  # drawn with grey hatching: nobody reported
NO_REPORT_HATCH = "////"
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
CASE_BAR = "#6d7fa8"
DEATH_LINE = "#2a2118"
DELAY_SHADE = "#d9d2c3"

DPI = 200
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
    outline per country; ``bounds`` is (minx, miny, maxx, maxy) of the frame in CRS units
    (metres in marchland's working CRS).
    """

    units: gpd.GeoDataFrame
    countries: gpd.GeoDataFrame
    bounds: tuple[float, float, float, float]


def base_map(units: gpd.GeoDataFrame, *, simplify_m: float | None = None) -> BaseMap:
    """Simplify units for drawing and dissolve country outlines, once per bundle.

    Parameters
    ----------
    units : geopandas.GeoDataFrame
        Analysis units in a projected CRS (metres), with a ``country`` column.
    simplify_m : float, optional
        Simplification tolerance in metres. Default: 1/2000 of the larger side of the extent
        (about 0.1 mm on the printed map), which keeps every shape recognisable.

    Returns
    -------
    BaseMap

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 1000, 1000), box(1000, 0, 2000, 1000)],
    ...                      crs="EPSG:3035")
    >>> bm = base_map(u)
    >>> sorted(bm.countries.index)
    ['AAA', 'BBB']
    """
    minx, miny, maxx, maxy = units.total_bounds
    side = max(maxx - minx, maxy - miny)
    tol = side / 2000 if simplify_m is None else simplify_m
    geom = units.geometry.simplify(tol, preserve_topology=True) if tol > 0 else units.geometry
    simple = gpd.GeoDataFrame(
        {"country": units["country"].to_numpy()},
        index=units.index,
        geometry=geom.to_numpy(),
        crs=units.crs,
    )
    countries = simple.dissolve("country")[["geometry"]]
    pad = side * 0.03
    return BaseMap(simple, countries, (minx - pad, miny - pad, maxx + pad, maxy + pad))


# --- class schemes ----------------------------------------------------------------------------
def rate_classes(
    values: Sequence[float] | np.ndarray | pd.Series | pd.DataFrame, *, k: int = 5
) -> np.ndarray:
    """Upper bounds of ``k`` classes for positive rates, shared by every panel that uses them.

    Fisher-Jenks natural breaks (mapclassify) on the pooled positive, finite values. Above 300
    values the breaks are computed on 300 evenly spaced order statistics of the pooled values:
    mapclassify's exact Fisher-Jenks is quadratic in n (seconds for a few thousand values
    without numba) and its sampled variant draws at random; evenly spaced order statistics
    are deterministic and keep the shape of the distribution. Zero and missing values are not
    classed here: maps draw them as their own legend entries.

    Parameters
    ----------
    values : array-like or DataFrame
        Rates (a DataFrame is pooled over all its columns).
    k : int
        Number of classes.

    Returns
    -------
    numpy.ndarray
        Increasing upper bounds; the last is the pooled maximum. Fewer than ``k`` bounds when
        there are fewer distinct positive values.

    Examples
    --------
    >>> rate_classes([0, 1, 1, 2, 10, 11, 50, np.nan], k=3).tolist()
    [2.0, 11.0, 50.0]
    """
    x = np.asarray(values, dtype=float).ravel()
    x = np.sort(x[np.isfinite(x) & (x > 0)])
    if x.size == 0:
        return np.array([])
    distinct = np.unique(x)
    if distinct.size <= k:
        return distinct
    if x.size > 300:
        x = x[np.linspace(0, x.size - 1, 300).round().astype(int)]
    import warnings

    import mapclassify

    with warnings.catch_warnings():
        # Without numba mapclassify warns it uses its pure-Python path; 300 values are quick.
        warnings.filterwarnings("ignore", message="Numba not installed")
        bins = np.asarray(mapclassify.FisherJenks(x, k=k).bins, dtype=float)
    bins[-1] = distinct[-1]
    return np.unique(bins)


def _class_of(values: pd.Series, bins: np.ndarray) -> np.ndarray:
    """Class index (0..len(bins)-1) of positive values; -1 zero, -2 missing."""
    v = values.to_numpy(dtype=float)
    out = np.full(v.shape, -2, dtype=int)
    pos = np.isfinite(v) & (v > 0)
    out[np.isfinite(v) & (v <= 0)] = -1
    if bins.size:
        out[pos] = np.minimum(np.searchsorted(bins, v[pos], side="left"), bins.size - 1)
    return out


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


def _class_labels(bins: np.ndarray) -> list[str]:
    lows = np.concatenate([[0.0], bins[:-1]])
    labels = []
    for i, (lo, hi) in enumerate(zip(lows, bins, strict=True)):
        left = "above 0" if i == 0 else f"above {_fmt_num(lo)}"
        labels.append(f"{left} to {_fmt_num(hi)}")
    return labels


def _ramp(colours: Sequence[str], n: int) -> list[str]:
    if n <= len(colours):
        # Spread the picks across the ramp so few classes still span light to dark.
        idx = np.linspace(0, len(colours) - 1, n).round().astype(int) if n > 1 else [0]
        return [colours[i] for i in idx]
    cmap = LinearSegmentedColormap.from_list("_ramp", list(colours))
    return [matplotlib.colors.to_hex(cmap(t)) for t in np.linspace(0, 1, n)]


# --- the common furniture ---------------------------------------------------------------------
def _new_map(title: str, subtitle: str = "") -> tuple[Figure, plt.Axes]:
    fig = Figure(figsize=_MAP_SIZE, dpi=DPI, facecolor="white")
    ax = fig.add_axes(_MAP_AX)
    fig.text(
        0.02, 0.955, title, fontsize=13, fontweight="bold", ha="left", va="center", color="#1d1d1b"
    )
    if subtitle:
        fig.text(0.02, 0.922, subtitle, fontsize=9, ha="left", va="center", color="#4a4740")
    return fig, ax


def _frame(ax: plt.Axes, base: BaseMap) -> None:
    minx, miny, maxx, maxy = base.bounds
    ax.set_xlim(minx, maxx)
    ax.set_ylim(miny, maxy)
    ax.set_aspect("equal")
    ax.set_xticks([])
    ax.set_yticks([])
    ax.set_xlabel("")
    ax.set_ylabel("")
    for s in ax.spines.values():
        s.set_edgecolor("#b9b5aa")
        s.set_linewidth(0.6)


def _fill(
    ax: plt.Axes, base: BaseMap, colours: pd.Series, *, hatch_ids=None, default: str = OTHER_COLOUR
) -> None:
    """Fill units with per-unit colours, then district edges, then country borders on top."""
    g = base.units.geometry
    col = colours.reindex(base.units.index).fillna(default)
    g.plot(
        ax=ax,
        color=col.to_list(),
        edgecolor=DISTRICT_EDGE["color"],
        linewidth=DISTRICT_EDGE["linewidth"],
        zorder=1,
    )
    if hatch_ids is not None and len(hatch_ids):
        sub = g[g.index.isin(hatch_ids)]
        if len(sub):
            sub.plot(
                ax=ax,
                facecolor="none",
                edgecolor="#9a968c",
                hatch=NO_REPORT_HATCH,
                linewidth=0,
                zorder=2,
            )
    base.countries.boundary.plot(ax=ax, zorder=5, **COUNTRY_EDGE)


def _nice_length(target: float) -> float:
    exp = math.floor(math.log10(target))
    for m in (5, 2, 1):
        if m * 10**exp <= target:
            return m * 10**exp
    return 10**exp  # pragma: no cover


def _scale_bar(ax: plt.Axes, base: BaseMap, *, compact: bool = False) -> None:
    minx, miny, maxx, maxy = base.bounds
    width = maxx - minx
    length = _nice_length(width * 0.22)  # metres
    x0 = minx + width * 0.04
    y0 = miny + (maxy - miny) * 0.04
    h = (maxy - miny) * 0.010
    half = length / 2
    ax.add_patch(
        Rectangle(
            (x0 - length * 0.08, y0 - h * 1.2),
            length * 1.25,
            h * 5.2,
            facecolor="white",
            edgecolor="none",
            alpha=0.75,
            zorder=4,  # above the fills, below the country borders
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
    km = length / 1000
    ticks = [(x0 + length, f"{_fmt_num(km)} km")]
    if not compact:
        ticks = [(x0, "0"), (x0 + half, _fmt_num(km / 2)), *ticks]
    for xx, lab in ticks:
        ax.text(
            xx,
            y0 + h * 1.8,
            lab,
            ha="center",
            va="bottom",
            fontsize=6 if compact else 7,
            zorder=10,
            color="#1d1d1b",
        )


def _north_arrow(ax: plt.Axes, base: BaseMap, *, compact: bool = False) -> None:
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
            edgecolor="#1d1d1b",
            zorder=10,
        )
    )
    ax.text(
        x,
        y + length * 1.08,
        "N",
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
        f"Data as of {notes.as_of}. {notes.source}",
        fontsize=7,
        ha="left",
        va="center",
        color="#3a3832",
        wrap=True,
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
        wrap=True,
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


def _furnish(fig: Figure, ax: plt.Axes, base: BaseMap, notes: MapNotes) -> None:
    _frame(ax, base)
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


# --- rate maps --------------------------------------------------------------------------------
def _rate_entries(bins: np.ndarray, colours: list[str], classes: np.ndarray) -> list:
    entries = [
        (lab, {"facecolor": c, "edgecolor": "#7d7a72", "linewidth": 0.4})
        for lab, c in zip(_class_labels(bins), colours, strict=True)
    ]
    entries.append(
        ("0 (reported zero)", {"facecolor": ZERO_COLOUR, "edgecolor": "#7d7a72", "linewidth": 0.4})
    )
    if (classes == -2).any():
        entries.append(
            (
                "no report in the period",
                {
                    "facecolor": NO_REPORT_COLOUR,
                    "edgecolor": "#9a968c",
                    "hatch": NO_REPORT_HATCH,
                    "linewidth": 0.4,
                },
            )
        )
    return entries


def _rate_colours(rate: pd.Series, bins: np.ndarray) -> tuple[pd.Series, np.ndarray, list]:
    classes = _class_of(rate, bins)
    colours = _ramp(RATE_COLOURS, max(len(bins), 1))
    out = np.where(
        classes >= 0,
        np.array(colours, dtype=object)[np.maximum(classes, 0)],
        np.where(classes == -1, ZERO_COLOUR, NO_REPORT_COLOUR),
    )
    return pd.Series(out, index=rate.index), classes, colours


def attack_rate_map(
    base: BaseMap,
    rate: pd.Series,
    notes: MapNotes,
    *,
    bins: np.ndarray | None = None,
    period: str = "",
    title: str | None = None,
) -> Figure:
    """Choropleth of attack rate per 100,000 by unit.

    Parameters
    ----------
    base : BaseMap
    rate : pandas.Series
        Attack rate per 100,000 indexed by unit id; NaN where nobody reported in the period
        (drawn hatched, never as zero).
    notes : MapNotes
    bins : numpy.ndarray, optional
        Class upper bounds (from :func:`rate_classes`); default: computed from ``rate``.
    period : str
        Period the rate covers, for the title and legend (e.g. ``"October 2026"``).
    title : str, optional

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> fig = attack_rate_map(base_map(u), pd.Series({"a": 12.0, "b": 0.0}),
    ...                       MapNotes("2026-11-03", "Data: example"))
    >>> any("per 100,000" in (t.get_text() or "") for t in fig.legends[0].texts
    ...     + [fig.legends[0].get_title()])
    True
    """
    bins = rate_classes(rate) if bins is None else np.asarray(bins, dtype=float)
    colours, classes, ramp = _rate_colours(rate, bins)
    fig, ax = _new_map(
        title or f"Attack rate {period}".strip(),
        f"{notes.region}: cases per 100,000 population, by analysis unit",
    )
    _fill(ax, base, colours, hatch_ids=rate.index[classes == -2])
    _furnish(fig, ax, base, notes)
    _legend(fig, _rate_entries(bins, ramp, classes), f"Attack rate per 100,000\n{period}".strip())
    return fig


def rate_small_multiples(
    base: BaseMap, rates: pd.DataFrame, notes: MapNotes, *, bins: np.ndarray | None = None
) -> Figure:
    """Attack rate per 100,000 for several periods side by side, with ONE shared class scheme.

    Parameters
    ----------
    base : BaseMap
    rates : pandas.DataFrame
        Indexed by unit id, one column per period (column name = panel title), oldest first.
    notes : MapNotes
    bins : numpy.ndarray, optional
        Shared class bounds; default :func:`rate_classes` on the pooled values of all panels.

    Returns
    -------
    matplotlib.figure.Figure
    """
    bins = rate_classes(rates) if bins is None else np.asarray(bins, dtype=float)
    n = rates.shape[1]
    ncols = 3 if n > 4 else max(n, 1)
    nrows = max(1, math.ceil(n / ncols))
    fig = Figure(figsize=_MAP_SIZE, dpi=DPI, facecolor="white")
    fig.text(
        0.02, 0.955, "Attack rate by month", fontsize=13, fontweight="bold", ha="left", va="center"
    )
    fig.text(
        0.02,
        0.922,
        f"{notes.region}: cases per 100,000; one class scheme shared by every panel",
        fontsize=9,
        ha="left",
        va="center",
        color="#4a4740",
    )
    all_classes = []
    # Panels take the full width; the legend runs along the bottom instead of down the side.
    width, height = 0.96 / ncols, 0.66 / nrows
    ramp: list[str] = []
    for i, col in enumerate(rates.columns):
        r, c = divmod(i, ncols)
        ax = fig.add_axes(
            (0.02 + c * width, 0.235 + (nrows - 1 - r) * height, width * 0.97, height * 0.9)
        )
        colours, classes, ramp = _rate_colours(rates[col], bins)
        all_classes.append(classes)
        _fill(ax, base, colours, hatch_ids=rates.index[classes == -2])
        _frame(ax, base)
        ax.set_title(str(col), fontsize=8.5, pad=3)
        if i == 0:
            _scale_bar(ax, base, compact=True)
        if i == min(ncols, n) - 1:
            _north_arrow(ax, base, compact=True)
    _footer(fig, notes)
    classes = np.concatenate(all_classes) if all_classes else np.array([], dtype=int)
    _legend(
        fig,
        _rate_entries(bins, ramp or _ramp(RATE_COLOURS, max(len(bins), 1)), classes),
        "Attack rate per 100,000 (month)",
        x=0.02,
        y=0.215,
        ncols=4,
    )
    return fig


# --- clusters ---------------------------------------------------------------------------------
def cluster_map(
    base: BaseMap,
    labels: pd.Series,
    colours: Mapping[str, str],
    notes: MapNotes,
    *,
    legend: Mapping[str, str] | None = None,
    always: Sequence[str] = (),
    title: str = "Hotspots",
    subtitle: str = "",
) -> Figure:
    """Local cluster label by unit, in the palette given.

    Parameters
    ----------
    base : BaseMap
    labels : pandas.Series
        Cluster label per unit id (e.g. "High-High", "Not significant"). Units without a
        label are drawn as "not in the analysis".
    colours : Mapping
        Label -> colour; every label present must have one. The legend follows this order.
    notes : MapNotes
    legend : Mapping, optional
        Label -> legend wording (default: the label itself).
    always : sequence of str
        Labels listed in the legend even when no unit has them (e.g. the four quadrants).
    title, subtitle : str

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "AAA"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> fig = cluster_map(base_map(u), pd.Series({"a": "up", "b": "flat"}),
    ...                   {"up": "#551133", "flat": "#dddddd"}, MapNotes("2026-11-03", "x"))
    >>> [t.get_text() for t in fig.legends[0].texts][:2]
    ['up (1)', 'flat (1)']
    """
    lab = labels.reindex(base.units.index).astype(object)
    present = set(lab.dropna())
    missing = sorted(present - set(colours))
    if missing:
        raise ValueError(f"'colours' needs an entry for every label; missing {missing}")
    col = lab.map(lambda x: colours.get(x, OTHER_COLOUR) if isinstance(x, str) else OTHER_COLOUR)
    fig, ax = _new_map(title, subtitle)
    _fill(ax, base, col)
    _furnish(fig, ax, base, notes)
    wording = dict(legend or {})
    entries = []
    for key, colour in colours.items():
        n = int((lab == key).sum())
        if n == 0 and key not in (always or ()):
            continue
        entries.append(
            (
                f"{wording.get(key, key)} ({n})",
                {"facecolor": colour, "edgecolor": "#7d7a72", "linewidth": 0.4},
            )
        )
    if lab.isna().any():
        entries.append(
            (
                f"not in the analysis ({int(lab.isna().sum())})",
                {"facecolor": OTHER_COLOUR, "edgecolor": "#7d7a72", "linewidth": 0.4},
            )
        )
    _legend(fig, entries, "Local cluster of attack rate\n(number of units)")
    return fig


# --- spread -----------------------------------------------------------------------------------
def arrival_map(
    base: BaseMap,
    arrival: pd.Series,
    notes: MapNotes,
    *,
    fronts: gpd.GeoDataFrame | None = None,
    current: str | None = None,
    title: str = "Arrival of first cases",
) -> Figure:
    """Quarter of the first case by unit, with the outline of each month's front.

    Arrival is classed by calendar quarter of the first-case week (at most eight classes;
    longer outbreaks use half-years), so each colour names a period a reader can say aloud.

    Parameters
    ----------
    base : BaseMap
    arrival : pandas.Series
        First-case week (Timestamp) per unit id; NaT where not affected.
    notes : MapNotes
    fronts : geopandas.GeoDataFrame, optional
        One outline per month (index ``"YYYY-MM"``), drawn as thin dark lines.
    current : str, optional
        The month (``"YYYY-MM"``) whose front is drawn heavier and named in the legend.

    Returns
    -------
    matplotlib.figure.Figure
    """
    arr = pd.to_datetime(arrival.reindex(base.units.index))
    fig, ax = _new_map(
        title,
        f"{notes.region}: period of the first reported case; lines outline each month's "
        "newly affected area",
    )
    known = arr.dropna()
    col = pd.Series(OTHER_COLOUR, index=arr.index, dtype=object)
    entries = []
    if len(known):
        freq = "Q"
        periods = (known + pd.Timedelta(days=3)).dt.to_period(freq)
        if periods.max().ordinal - periods.min().ordinal + 1 > 8:
            freq = "2Q"
            periods = (known + pd.Timedelta(days=3)).dt.to_period("Q")
            periods = periods.map(lambda p: (p.year, (p.quarter - 1) // 2))
        classes = sorted(periods.unique())
        ramp = _ramp(ARRIVAL_RAMP, len(classes))
        lookup = dict(zip(classes, ramp, strict=True))
        col.loc[known.index] = periods.map(lookup).to_numpy()
        for c, colour in zip(classes, ramp, strict=True):
            if freq == "Q":
                label = f"{c.start_time:%b}-{c.end_time:%b %Y}"
            else:
                year, half = c
                label = f"{'Jan-Jun' if half == 0 else 'Jul-Dec'} {year}"
            n = int((periods == c).sum())
            entries.append(
                (f"{label} ({n})", {"facecolor": colour, "edgecolor": "#7d7a72", "linewidth": 0.4})
            )
    _fill(ax, base, col)
    if fronts is not None and len(fronts):
        fronts.boundary.plot(ax=ax, color="#2a2723", linewidth=0.7, zorder=3)
        if current is not None and current in fronts.index:
            fronts.loc[[current]].boundary.plot(ax=ax, color=FRONT_COLOUR, linewidth=1.8, zorder=6)
    _furnish(fig, ax, base, notes)
    entries.append(
        (
            f"no case reported yet ({int(arr.isna().sum())})",
            {"facecolor": OTHER_COLOUR, "edgecolor": "#7d7a72", "linewidth": 0.4},
        )
    )
    handles_extra = []
    if fronts is not None and len(fronts):
        handles_extra.append(("outline of a month's newly affected area", "#2a2723", 0.9))
        if current is not None and current in fronts.index:
            month = pd.Period(current, freq="M")
            handles_extra.append((f"newly affected in {month:%B %Y}", FRONT_COLOUR, 1.8))
    _legend(fig, entries, "First reported case\n(number of units)", lines=handles_extra)
    return fig


# --- border risk ------------------------------------------------------------------------------
def risk_map(
    base: BaseMap,
    probability: pd.Series,
    affected: Sequence,
    notes: MapNotes,
    *,
    silent: Sequence = (),
    horizon_weeks: int = 4,
    side_note: str = "",
) -> Figure:
    """Probability of a first case within the horizon for candidate units.

    Parameters
    ----------
    base : BaseMap
    probability : pandas.Series
        Probability (0-1) per candidate unit id.
    affected : sequence
        Units with cases by the as-of date (drawn in warm grey).
    notes : MapNotes
    silent : sequence
        Candidates with no recent report (outlined dashed: may have undetected cases).
    horizon_weeks : int
    side_note : str
        Text for the side panel, e.g. the backtest numbers ("how far to trust it").

    Returns
    -------
    matplotlib.figure.Figure
    """
    p = probability.astype(float)
    bins = np.asarray(RISK_BINS)
    cls = np.minimum(np.searchsorted(bins, p.to_numpy(), side="left"), len(bins) - 1)
    col = pd.Series(np.array(RISK_COLOURS, dtype=object)[cls], index=p.index)
    aff = pd.Index(list(affected))
    col = pd.concat([col, pd.Series(AFFECTED_COLOUR, index=aff.difference(col.index))])
    fig, ax = _new_map(
        f"Border risk: first case within {horizon_weeks} weeks",
        f"{notes.region}: unaffected units within two steps of an affected one",
    )
    _fill(ax, base, col, default=NOT_CANDIDATE_COLOUR)
    sil = base.units[base.units.index.isin(list(silent))]
    if len(sil):
        sil.boundary.plot(ax=ax, color="#1d1d1b", linewidth=0.9, linestyle=(0, (2, 1.5)), zorder=6)
    _furnish(fig, ax, base, notes)
    lows = (0.0, *RISK_BINS[:-1])
    entries = [
        (
            f"{lo:.0%} to {hi:.0%} ({int((cls == i).sum())})",
            {"facecolor": c, "edgecolor": "#7d7a72", "linewidth": 0.4},
        )
        for i, (lo, hi, c) in enumerate(zip(lows, RISK_BINS, RISK_COLOURS, strict=True))
    ]
    entries.append(
        (
            "affected (cases by the as-of date)",
            {"facecolor": AFFECTED_COLOUR, "edgecolor": "#7d7a72", "linewidth": 0.4},
        )
    )
    entries.append(
        (
            "not a candidate",
            {"facecolor": NOT_CANDIDATE_COLOUR, "edgecolor": "#7d7a72", "linewidth": 0.4},
        )
    )
    if len(sil):
        entries.append(
            (
                "silent: no recent report",
                {"facecolor": "none", "edgecolor": "#1d1d1b", "linestyle": "--", "linewidth": 0.9},
            )
        )
    _legend(fig, entries, f"Probability of a first case\nwithin {horizon_weeks} weeks")
    if side_note:
        _side_text(fig, side_note, y=0.47)
    return fig


# --- supplies ---------------------------------------------------------------------------------
def priority_map(
    base: BaseMap,
    rank: pd.Series,
    notes: MapNotes,
    *,
    depots: gpd.GeoDataFrame | None = None,
    reach_km: float | None = None,
    sites: gpd.GeoDataFrame | None = None,
) -> Figure:
    """Priority districts by rank, with the opened depots and their reach.

    Parameters
    ----------
    base : BaseMap
    rank : pandas.Series
        Priority rank (1 = first) per candidate unit id.
    notes : MapNotes
    depots : geopandas.GeoDataFrame, optional
        Opened depot points (same CRS as the units), with a ``name`` column if labelled.
    reach_km : float, optional
        Radius of each depot's reach, drawn as a dashed circle.
    sites : geopandas.GeoDataFrame, optional
        All candidate sites (drawn as small open squares).

    Returns
    -------
    matplotlib.figure.Figure
    """
    r = rank.astype(float)
    bands = np.select([r <= 5, r <= 10, r <= 20], [0, 1, 2], 3)
    col = pd.Series(np.array(PRIORITY_COLOURS, dtype=object)[bands], index=r.index)
    fig, ax = _new_map(
        "Pre-positioning priorities",
        f"{notes.region}: candidate districts ranked by expected need; depots "
        "chosen to cover risk-weighted population",
    )
    _fill(ax, base, col)
    if sites is not None and len(sites):
        ax.scatter(
            sites.geometry.x,
            sites.geometry.y,
            marker="s",
            s=14,
            facecolor="white",
            edgecolor=DEPOT_COLOUR,
            linewidth=0.7,
            zorder=7,
        )
    if depots is not None and len(depots):
        if reach_km:
            for pt in depots.geometry:
                ax.add_patch(
                    Circle(
                        (pt.x, pt.y),
                        reach_km * 1000,
                        facecolor="none",
                        edgecolor=DEPOT_COLOUR,
                        linewidth=0.8,
                        linestyle=(0, (4, 2)),
                        zorder=7,
                    )
                )
        existing = _existing(depots)
        ax.scatter(
            depots.geometry.x,
            depots.geometry.y,
            marker="s",
            s=40,
            facecolor=np.where(existing, EXISTING_DEPOT_COLOUR, DEPOT_COLOUR),
            edgecolor="white",
            linewidth=0.8,
            zorder=8,
        )
        if "name" in depots:
            for pt, name in zip(depots.geometry, depots["name"], strict=True):
                ax.annotate(
                    str(name),
                    (pt.x, pt.y),
                    xytext=(5, 4),
                    textcoords="offset points",
                    fontsize=7,
                    zorder=9,
                    color=DEPOT_COLOUR,
                    bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.8),
                )
    _furnish(fig, ax, base, notes)
    entries = [
        (lab, {"facecolor": c, "edgecolor": "#7d7a72", "linewidth": 0.4})
        for lab, c in zip(
            ("rank 1 to 5", "rank 6 to 10", "rank 11 to 20", "rank above 20"),
            PRIORITY_COLOURS,
            strict=True,
        )
    ]
    entries.append(
        ("not a candidate", {"facecolor": OTHER_COLOUR, "edgecolor": "#7d7a72", "linewidth": 0.4})
    )
    if depots is not None and len(depots):
        existing = _existing(depots)
        if (~existing).any():
            entries.append(
                (
                    f"depot to open ({int((~existing).sum())})",
                    {"facecolor": DEPOT_COLOUR, "edgecolor": "white"},
                )
            )
        if existing.any():
            entries.append(
                (
                    f"existing depot ({int(existing.sum())})",
                    {"facecolor": EXISTING_DEPOT_COLOUR, "edgecolor": "white"},
                )
            )
        if reach_km:
            entries.append(
                (
                    f"reach: {reach_km:g} km straight line",
                    {"facecolor": "none", "edgecolor": DEPOT_COLOUR, "linestyle": "--"},
                )
            )
    if sites is not None and len(sites):
        entries.append(("candidate depot site", {"facecolor": "white", "edgecolor": DEPOT_COLOUR}))
    _legend(fig, entries, "Priority rank (1 = first)")
    _side_text(fig, "Planning quantities use\nexample values, not guidance.", y=0.22)
    return fig


def _existing(depots: pd.DataFrame) -> np.ndarray:
    if "existing" not in depots:
        return np.zeros(len(depots), dtype=bool)
    return depots["existing"].fillna(False).astype(bool).to_numpy()


# --- epi curves -------------------------------------------------------------------------------
def epi_curves(
    series: Mapping[str, pd.DataFrame],
    notes: MapNotes,
    *,
    as_of: object,
    delay_weeks: int,
    title: str,
    ncols: int | None = None,
    week_days: int = 7,
) -> Figure:
    """Weekly cases (bars) and deaths (line) for one or more areas, delay zone shaded.

    Parameters
    ----------
    series : Mapping
        Panel title -> DataFrame indexed by week start (Timestamp) with ``cases`` and
        ``deaths`` columns. A week absent from the index had no report at all; it is drawn as
        a gap, never as zero.
    notes : MapNotes
    as_of : date-like
        The as-of date; the last ``delay_weeks`` weeks before it are shaded as incomplete.
    delay_weeks : int
        Reporting delay in weeks (config ``analysis.reporting_delay_weeks``).
    title : str
    ncols : int, optional
        Panels per row (default: 1 for one panel, else up to 3).

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> w = pd.date_range("2026-08-03", periods=10, freq="7D")
    >>> df = pd.DataFrame({"cases": range(10), "deaths": [0] * 10}, index=w)
    >>> fig = epi_curves({"Region": df}, MapNotes("2026-10-14", "Data: example"),
    ...                  as_of="2026-10-14", delay_weeks=2, title="Weekly cases")
    >>> len(fig.axes) >= 1
    True
    """
    n = max(len(series), 1)
    ncols = ncols or (1 if n == 1 else min(3, n))
    nrows = math.ceil(n / ncols)
    height = 4.6 if nrows == 1 else min(2.1 * nrows + 1.4, 11.5)
    fig = Figure(figsize=(_MAP_SIZE[0], height), dpi=DPI, facecolor="white")
    top = 1 - 1.0 / height
    bottom = 0.95 / height
    fig.text(0.02, 1 - 0.3 / height, title, fontsize=12, fontweight="bold", ha="left", va="center")
    as_of = pd.Timestamp(as_of)
    delay_start, delay_end = _delay_zone(series, as_of, delay_weeks, week_days)
    # One time axis for every panel, so areas can be compared by eye.
    starts = [pd.Timestamp(df.index.min()) for df in series.values() if len(df)]
    ends = [pd.Timestamp(df.index.max()) for df in series.values() if len(df)]
    lo = min(starts) - pd.Timedelta(days=week_days) if starts else delay_start
    hi = max([*ends, delay_end - pd.Timedelta(days=week_days)]) + pd.Timedelta(days=2 * week_days)
    gs = fig.add_gridspec(
        nrows, ncols, left=0.07, right=0.93, top=top, bottom=bottom, hspace=0.6, wspace=0.38
    )
    first = True
    for i, (name, df) in enumerate(series.items()):
        row, col = divmod(i, ncols)
        ax = fig.add_subplot(gs[row, col])
        df = df.sort_index()
        if len(df):
            # Reindex to every week so an unreported week is a visible gap, never a zero.
            full = pd.date_range(df.index.min(), df.index.max(), freq=f"{week_days}D")
            df = df.reindex(full.union(pd.DatetimeIndex(df.index)))
        weeks = pd.DatetimeIndex(df.index)
        cases = df["cases"].astype(float) if "cases" in df else pd.Series(dtype=float)
        deaths = df["deaths"].astype(float) if "deaths" in df else pd.Series(np.nan, df.index)
        ax.axvspan(
            delay_start,
            delay_end,
            facecolor=DELAY_SHADE,
            edgecolor="#a59a83",
            hatch="....",
            linewidth=0,
            zorder=0,
            label=f"last {delay_weeks} weeks: reporting incomplete",
        )
        _week_bars(ax, weeks, cases.to_numpy(dtype=float), week_days)
        ax.set_ylim(bottom=0)
        ax2 = ax.twinx()
        ax2.plot(
            weeks + pd.Timedelta(days=week_days / 2),
            deaths.to_numpy(),
            color=DEATH_LINE,
            linewidth=0.9,
            marker="o",
            markersize=1.6,
            label="deaths (line, right axis)",
        )
        dmax = float(np.nanmax(deaths.to_numpy())) if deaths.notna().any() else 1.0
        ax2.set_ylim(bottom=0, top=max(1.0, dmax) * 1.15)
        ax.set_xlim(lo, hi)
        ax.set_title(str(name), fontsize=8.5, loc="left", pad=3)
        ax.tick_params(labelsize=6.5)
        ax2.tick_params(labelsize=6.5, colors=DEATH_LINE)
        if col == 0:
            ax.set_ylabel("cases per week", fontsize=7)
        if col == ncols - 1 or i == n - 1:
            ax2.set_ylabel("deaths per week", fontsize=7, color=DEATH_LINE)
        ax.xaxis.set_major_locator(matplotlib.dates.AutoDateLocator(minticks=3, maxticks=5))
        ax.yaxis.set_major_locator(MaxNLocator(4, integer=True))
        ax2.yaxis.set_major_locator(MaxNLocator(3, integer=True))
        ax.xaxis.set_major_formatter(matplotlib.dates.DateFormatter("%b %Y"))
        ax.spines["top"].set_visible(False)
        ax2.spines["top"].set_visible(False)
        if first:
            h1, l1 = ax.get_legend_handles_labels()
            h2, l2 = ax2.get_legend_handles_labels()
            fig.legend(
                h1 + h2,
                l1 + l2,
                loc="center left",
                bbox_to_anchor=(0.01, 1 - 0.62 / height),
                fontsize=7,
                frameon=False,
                ncols=3,
            )
            first = False
    fig.text(
        0.02,
        0.55 / height,
        f"Data as of {notes.as_of}. {notes.source} Weeks with no report are gaps, not zeros.",
        fontsize=6.5,
        ha="left",
        va="center",
        color="#3a3832",
    )
    fig.text(
        0.02,
        0.25 / height,
        notes.caution,
        fontsize=6.5,
        ha="left",
        va="center",
        color="#6b2a22",
        style="italic",
    )
    return fig


def _delay_zone(
    series: Mapping[str, pd.DataFrame], as_of: pd.Timestamp, delay_weeks: int, week_days: int
) -> tuple[pd.Timestamp, pd.Timestamp]:
    """Span the last ``delay_weeks`` whole weeks finished by ``as_of`` (data's week grid)."""
    first = next((pd.Timestamp(df.index.min()) for df in series.values() if len(df)), None)
    start_day = first.day_of_week if first is not None else 0
    day = as_of.normalize()
    current = day - pd.Timedelta(days=(day.day_of_week - start_day) % 7)
    done = (
        current
        if day >= current + pd.Timedelta(days=week_days - 1)
        else current - pd.Timedelta(days=week_days)
    )
    return done - pd.Timedelta(days=week_days * (delay_weeks - 1)), done + pd.Timedelta(
        days=week_days
    )


def _week_bars(ax: plt.Axes, weeks: pd.DatetimeIndex, values: np.ndarray, week_days: int) -> None:
    """Weekly bars as ONE collection (a bar per artist costs seconds over many panels)."""
    ok = np.isfinite(values) & (values > 0)
    x0 = matplotlib.dates.date2num(weeks[ok])
    w = week_days * 0.85
    h = values[ok]
    verts = np.stack(
        [
            np.column_stack([x0, np.zeros_like(h)]),
            np.column_stack([x0, h]),
            np.column_stack([x0 + w, h]),
            np.column_stack([x0 + w, np.zeros_like(h)]),
        ],
        axis=1,
    )
    coll = PolyCollection(
        verts, facecolors=CASE_BAR, edgecolors="none", linewidths=0, zorder=2, label="cases (bars)"
    )
    ax.add_collection(coll)
    ax.set_ylim(0, max(1.0, float(h.max()) if h.size else 1.0) * 1.08)
    ax.xaxis_date()


def save_figure(fig: Figure, path, *, pdf=None, dpi: int = DPI) -> None:
    """Write ``fig`` as a PNG at ``dpi`` and, when ``pdf`` (a ``PdfPages``) is given, as a page.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : path-like
        The PNG to write.
    pdf : matplotlib.backends.backend_pdf.PdfPages, optional
    dpi : int
    """
    fig.savefig(path, dpi=dpi, facecolor="white")
    if pdf is not None:
        pdf.savefig(fig)
