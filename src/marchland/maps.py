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

import math
from collections.abc import Mapping, Sequence

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from matplotlib.figure import Figure
from matplotlib.patches import Circle

from ._epicurves import epi_curves
from ._mapkit import (
    _MAP_SIZE,
    AFFECTED_COLOUR,
    ARRIVAL_RAMP,
    CASE_BAR,
    CAUTION_LINE,
    COUNTRY_EDGE,
    DEATH_LINE,
    DELAY_SHADE,
    DEPOT_COLOUR,
    DISTRICT_EDGE,
    DPI,
    EXISTING_DEPOT_COLOUR,
    FRONT_COLOUR,
    NO_REPORT_COLOUR,
    NO_REPORT_HATCH,
    NOT_CANDIDATE_COLOUR,
    NOT_TESTED_HATCH,
    OTHER_COLOUR,
    OUTSIDE_COLOUR,
    PRIORITY_COLOURS,
    RATE_COLOURS,
    RISK_BINS,
    RISK_COLOURS,
    ZERO_COLOUR,
    BaseMap,
    MapNotes,
    _country_labels,
    _fill,
    _fmt_num,
    _footer,
    _frame,
    _furnish,
    _legend,
    _new_map,
    _no_math,
    _north_arrow,
    _ramp,
    _scale_bar,
    _side_text,
)

__all__ = [
    "AFFECTED_COLOUR",
    "ARRIVAL_RAMP",
    "CASE_BAR",
    "CAUTION_LINE",
    "COUNTRY_EDGE",
    "DEATH_LINE",
    "DELAY_SHADE",
    "DEPOT_COLOUR",
    "DISTRICT_EDGE",
    "DPI",
    "EXISTING_DEPOT_COLOUR",
    "FRONT_COLOUR",
    "NO_REPORT_COLOUR",
    "NO_REPORT_HATCH",
    "NOT_CANDIDATE_COLOUR",
    "NOT_TESTED_HATCH",
    "OTHER_COLOUR",
    "OUTSIDE_COLOUR",
    "PRIORITY_COLOURS",
    "RATE_COLOURS",
    "RISK_BINS",
    "RISK_COLOURS",
    "ZERO_COLOUR",
    "BaseMap",
    "MapNotes",
    "arrival_map",
    "attack_rate_map",
    "base_map",
    "cluster_map",
    "epi_curves",
    "priority_map",
    "rate_classes",
    "rate_small_multiples",
    "risk_map",
    "save_figure",
]


def base_map(
    units: gpd.GeoDataFrame,
    *,
    simplify_m: float | None = None,
    country_names: Mapping[str, str] | None = None,
) -> BaseMap:
    """Simplify units for drawing, dissolve country outlines and place country labels, once.

    Parameters
    ----------
    units : geopandas.GeoDataFrame
        Analysis units in a projected CRS (metres), with a ``country`` column.
    simplify_m : float, optional
        Simplification tolerance in metres. Default: 1/2000 of the larger side of the extent
        (about 0.1 mm on the printed map), which keeps every shape recognisable.
    country_names : Mapping, optional
        Country code -> name to print on the maps; a code without a name is printed as is.
        Each country is labelled once, at a point on its surface (shapely
        ``point_on_surface`` of the dissolved country, which always falls inside it).

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
    >>> base_map(u, country_names={"AAA": "Aland"}).countries["label"].tolist()
    ['Aland', 'BBB']
    """
    minx, miny, maxx, maxy = units.total_bounds
    side = max(maxx - minx, maxy - miny)
    tol = side / 2000 if simplify_m is None else simplify_m
    geom = units.geometry.simplify(tol, preserve_topology=True) if tol > 0 else units.geometry
    # Units under ~3 mm across on the printed map (an island) also get a dot (see _fill).
    ext = units.geometry.bounds
    small = np.maximum(ext["maxx"] - ext["minx"], ext["maxy"] - ext["miny"]) < side / 50
    simple = gpd.GeoDataFrame(
        {"country": units["country"].to_numpy(), "small": small.to_numpy()},
        index=units.index,
        geometry=geom.to_numpy(),
        crs=units.crs,
    )
    countries = simple.dissolve("country")[["geometry"]]
    names = dict(country_names or {})
    pad = side * 0.03
    frame = (minx - pad, miny - pad, maxx + pad, maxy + pad)
    # Keep names off the scale bar (lower left) and the north arrow (upper right) where the
    # country reaches beyond them; shapely point_on_surface of what is left.
    fw, fh = frame[2] - frame[0], frame[3] - frame[1]
    furniture = shapely.union(
        shapely.box(frame[0], frame[1], frame[0] + 0.32 * fw, frame[1] + 0.14 * fh),
        shapely.box(frame[2] - 0.12 * fw, frame[3] - 0.22 * fh, frame[2], frame[3]),
    )
    free = countries.geometry.difference(furniture)
    free = free.where(~free.is_empty, countries.geometry)
    spot = free.representative_point()
    countries = countries.assign(
        label=[str(names.get(c, c)) for c in countries.index],
        label_x=spot.x.to_numpy(),
        label_y=spot.y.to_numpy(),
    )
    return BaseMap(simple, countries, frame)


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

    References
    ----------
    Fisher, W. D. (1958). On grouping for maximum homogeneity. Journal of the American
    Statistical Association 53, 789-798. Jenks, G. F. (1977). Optimal data classification for
    choropleth maps. Occasional paper 2, Department of Geography, University of Kansas.

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


def _class_labels(bins: np.ndarray) -> list[str]:
    lows = np.concatenate([[0.0], bins[:-1]])
    labels = []
    for i, (lo, hi) in enumerate(zip(lows, bins, strict=True)):
        left = "above 0" if i == 0 else f"above {_fmt_num(lo)}"
        labels.append(f"{left} to {_fmt_num(hi)}")
    return labels


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
    return _no_math(fig)


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

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> rates = pd.DataFrame({"Sep": [0.0, 10.0], "Oct": [5.0, 40.0]}, index=["a", "b"])
    >>> fig = rate_small_multiples(base_map(u), rates, MapNotes("2026-11-03", "Data: example"))
    >>> [ax.get_title() for ax in fig.axes]
    ['Sep', 'Oct']
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
        _fill(ax, base, colours, hatch_ids=rates.index[classes == -2], compact=True)
        _frame(ax, base)
        _country_labels(ax, base, compact=True)
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
    return _no_math(fig)


# --- clusters ---------------------------------------------------------------------------------
def cluster_map(
    base: BaseMap,
    labels: pd.Series,
    colours: Mapping[str, str],
    notes: MapNotes,
    *,
    legend: Mapping[str, str] | None = None,
    always: Sequence[str] = (),
    untested: Sequence[str] = (),
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
    untested : sequence of str
        Labels that mean "not tested" (no neighbour, no value): drawn with a dotted pattern
        over their fill, so a pale untested unit (an island) is not read as background.
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
    untested = set(untested)
    _fill(ax, base, col, hatch_ids=lab.index[lab.isin(untested)], hatch=NOT_TESTED_HATCH)
    _furnish(fig, ax, base, notes)
    wording = dict(legend or {})
    entries = []
    for key, colour in colours.items():
        n = int((lab == key).sum())
        if n == 0 and key not in (always or ()):
            continue
        style = {"facecolor": colour, "edgecolor": "#7d7a72", "linewidth": 0.4}
        if key in untested:
            style["hatch"] = NOT_TESTED_HATCH
        entries.append((f"{wording.get(key, key)} ({n})", style))
    if lab.isna().any():
        entries.append(
            (
                f"not in the analysis ({int(lab.isna().sum())})",
                {"facecolor": OTHER_COLOUR, "edgecolor": "#7d7a72", "linewidth": 0.4},
            )
        )
    _legend(fig, entries, "Local cluster of attack rate\n(number of units)")
    return _no_math(fig)


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

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> first = pd.Series(pd.to_datetime(["2026-03-02", None]), index=["a", "b"])
    >>> fig = arrival_map(base_map(u), first, MapNotes("2026-11-03", "Data: example"))
    >>> [t.get_text() for t in fig.legends[0].texts][:2]
    ['Jan-Mar 2026 (1)', 'no case reported yet (1)']
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
    return _no_math(fig)


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

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> fig = risk_map(base_map(u), pd.Series({"b": 0.3}), ["a"],
    ...                MapNotes("2026-11-03", "Data: example"))
    >>> [t.get_text() for t in fig.legends[0].texts][3]
    '20% to 40% (1)'
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
    return _no_math(fig)


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

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> sites = gpd.GeoDataFrame({"name": ["Store"]}, geometry=gpd.points_from_xy([9e4], [4e4]),
    ...                          crs="EPSG:3035")
    >>> fig = priority_map(base_map(u), pd.Series({"b": 1}), MapNotes("2026-11-03", "x"),
    ...                    depots=sites, reach_km=50)
    >>> "reach: 50 km straight line" in [t.get_text() for t in fig.legends[0].texts]
    True
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
    return _no_math(fig)


def _existing(depots: pd.DataFrame) -> np.ndarray:
    if "existing" not in depots:
        return np.zeros(len(depots), dtype=bool)
    return depots["existing"].fillna(False).astype(bool).to_numpy()


def save_figure(fig: Figure, path, *, pdf=None, dpi: int = DPI) -> None:
    """Write ``fig`` as a PNG at ``dpi`` and, when ``pdf`` (a ``PdfPages``) is given, as a page.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : path-like
        The PNG to write.
    pdf : matplotlib.backends.backend_pdf.PdfPages, optional
    dpi : int

    Examples
    --------
    >>> import geopandas as gpd
    >>> from shapely.geometry import box
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> import pathlib, tempfile
    >>> fig = attack_rate_map(base_map(u), pd.Series({"a": 1.0, "b": 0.0}), MapNotes("x", "y"))
    >>> out = pathlib.Path(tempfile.mkdtemp()) / "rate.png"
    >>> save_figure(fig, out)
    >>> out.read_bytes()[1:4]
    b'PNG'
    """
    _no_math(fig)
    fig.savefig(path, dpi=dpi, facecolor="white")
    if pdf is not None:
        pdf.savefig(fig)
