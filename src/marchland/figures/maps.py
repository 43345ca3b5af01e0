"""Static maps and epi curves for the monthly bundle (matplotlib; Fisher-Jenks classes).

This module draws; it computes no statistic and imports no analysis module. Every function
takes GeoDataFrames, DataFrames, Series and plain values and returns a matplotlib ``Figure``;
:func:`save_figure` writes it as a 200 dpi PNG and, optionally, as a page of the atlas PDF.

Every map carries the same furniture, drawn by one helper: country borders heavier than
district borders, a legend that names its units, a scale bar, a north arrow, a footer with the
as-of date and the data source, and the caution line. The palettes are marchland's own (sand to
wine for rates, sea-green for risk, night-to-straw for arrival); the cluster palette is passed in
by the caller (``hotspots.CLUSTER_COLOURS``).

Drawing is kept quick: :func:`base_map` simplifies the geometry once (to about a tenth of a
millimetre at print size, each country as one coverage so shared borders stay shared),
dissolves the country outlines once and builds one matplotlib Path per unit once; every map
reuses them and only sets the colours.

This module is the public front: signatures, documentation and argument checks. The work
lies beside it: ``_mapkit`` (palettes, notes, furniture), ``_mapclass`` (classing and
legend wording), ``_maplayers`` (rate panels, fronts, silent outlines, depots) and
``_epicurves``.
"""

import math
from collections.abc import Mapping, Sequence

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from matplotlib.figure import Figure

from ._epicurves import epi_curves
from ._mapclass import (
    _arrival_classes,
    _cluster_colours,
    _cluster_entries,
    _front_lines,
    _priority_colours,
    _priority_entries,
    _rate_bounds,
    _rate_colours,
    _rate_entries,
    _risk_colours,
    _risk_entries,
)
from ._mapkit import (
    _MAP_SIZE,  # noqa: F401  (the figure size, read by tests)
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
    _fill,
    _footer,
    _furnish,
    _label_spots,
    _legend,
    _new_map,
    _no_math,
    _side_text,
    _unit_paths,
)
from ._maplayers import _draw_depots, _draw_fronts, _draw_silent, _rate_panels

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
    geom = _simplify_coverage(units, tol) if tol > 0 else units.geometry
    ext = units.geometry.bounds
    extent = np.maximum(ext["maxx"] - ext["minx"], ext["maxy"] - ext["miny"]).to_numpy()
    typical = float(np.median(extent)) if len(extent) else math.inf
    # Units under ~3 mm across on the printed map (an island) also get a dot (see _fill), when
    # they are also much smaller than a typical unit: with thousands of districts every unit is
    # that small and a dot on each would hide the map.
    small = extent < min(side / 50, 0.3 * typical)
    simple = gpd.GeoDataFrame(
        {"country": units["country"].to_numpy(), "small": small},
        index=units.index,
        geometry=geom.to_numpy(),
        crs=units.crs,
    )
    countries = _dissolve_countries(simple)
    names = dict(country_names or {})
    pad = side * 0.03
    frame = (minx - pad, miny - pad, maxx + pad, maxy + pad)
    spot = _label_spots(countries.geometry, frame)
    countries = countries.assign(
        label=[str(names.get(c, c)) for c in countries.index],
        label_x=spot.x.to_numpy(),
        label_y=spot.y.to_numpy(),
    )
    return BaseMap(simple, countries, frame, paths=_unit_paths(simple.geometry), unit_size=typical)


def _simplify_coverage(units: gpd.GeoDataFrame, tol: float) -> gpd.GeoSeries:
    """Simplify each country's units as one coverage, so neighbours keep one shared edge.

    Simplifying units one by one moves a shared edge differently on each side: slivers open
    between districts and the dissolved country keeps them as short heavy stubs inside it.
    ``shapely.coverage_simplify`` (GEOS coverage simplifier) simplifies every shared edge once.
    Countries come from different boundary files whose common border need not match, so each
    country is one coverage; a country whose units are not a valid coverage (overlaps) falls
    back to simplifying unit by unit.
    """
    geom = units.geometry.to_numpy().copy()
    for idx in units.groupby("country", sort=False).indices.values():
        part = geom[idx]
        try:
            out = shapely.coverage_simplify(part, tol)
        except shapely.errors.GEOSException:
            out = None
        if out is None or not shapely.is_valid(out).all() or shapely.is_empty(out).any():
            out = shapely.simplify(part, tol, preserve_topology=True)
        geom[idx] = out
    return gpd.GeoSeries(geom, index=units.index, crs=units.crs)


def _dissolve_countries(simple: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """One outline per country: a coverage union (edge-matching, fast), else a full union."""
    try:
        out = simple.dissolve("country", method="coverage")[["geometry"]]
        if shapely.is_valid(out.geometry.to_numpy()).all():
            return out
    except shapely.errors.GEOSException:
        pass
    return simple.dissolve("country")[["geometry"]]


# --- class schemes ----------------------------------------------------------------------------
def rate_classes(
    values: Sequence[float] | np.ndarray | pd.Series | pd.DataFrame, *, k: int = 5
) -> np.ndarray:
    """Upper bounds of ``k`` classes for positive rates, shared by every panel that uses them.

    Fisher-Jenks natural breaks (``_mapclass.natural_breaks``, equal to mapclassify's) on the
    pooled positive, finite values. Above 300 values the breaks are computed on 300 evenly
    spaced order statistics of the pooled values: exact Fisher-Jenks is quadratic in n and
    mapclassify's sampled variant draws at random; evenly spaced order statistics
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
    return _rate_bounds(values, k)


# --- rate maps --------------------------------------------------------------------------------
def attack_rate_map(
    base: BaseMap,
    rate: pd.Series,
    notes: MapNotes,
    *,
    bins: np.ndarray | None = None,
    period: str = "",
    title: str | None = None,
    subtitle: str | None = None,
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
    subtitle : str, optional
        Line under the title (default: what the rate is, by analysis unit); say there which
        counts the rate uses and whether the period is partly in.
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
    colours, classes = _rate_colours(rate, bins)
    fig, ax = _new_map(
        title or f"Attack rate {period}".strip(),
        subtitle or f"{notes.region}: cases per 100,000 population, by analysis unit",
    )
    _fill(ax, base, colours, hatch_ids=rate.index[classes == -2])
    _furnish(fig, ax, base, notes)
    _legend(fig, _rate_entries(bins, classes), f"Attack rate per 100,000\n{period}".strip())
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
    fig, classes = _rate_panels(base, rates, notes, bins)
    _footer(fig, notes)
    _legend(
        fig,
        _rate_entries(bins, classes),
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
    fig, ax = _new_map(title, subtitle)
    untested = set(untested)
    _fill(
        ax,
        base,
        _cluster_colours(lab, colours),
        hatch_ids=lab.index[lab.isin(untested)],
        hatch=NOT_TESTED_HATCH,
    )
    _furnish(fig, ax, base, notes)
    entries = _cluster_entries(lab, colours, legend=legend, always=always, untested=untested)
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
    colours, entries = _arrival_classes(arr)
    _fill(ax, base, colours)
    _draw_fronts(ax, fronts, current)
    _furnish(fig, ax, base, notes)
    _legend(
        fig,
        entries,
        "First reported case\n(number of units)",
        lines=_front_lines(fronts, current),
    )
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
    colours, cls = _risk_colours(probability, affected)
    fig, ax = _new_map(
        f"Border risk: first case within {horizon_weeks} weeks",
        f"{notes.region}: unaffected units within two steps of an affected one",
    )
    _fill(ax, base, colours, default=NOT_CANDIDATE_COLOUR)
    any_silent = _draw_silent(ax, base, silent)
    _furnish(fig, ax, base, notes)
    _legend(
        fig,
        _risk_entries(cls, silent=any_silent),
        f"Probability of a first case\nwithin {horizon_weeks} weeks",
    )
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
    fig, ax = _new_map(
        "Pre-positioning priorities",
        f"{notes.region}: candidate districts ranked by probability of a first case; depots "
        "chosen to cover risk-weighted population",
    )
    _fill(ax, base, _priority_colours(rank))
    _draw_depots(ax, depots, reach_km=reach_km, sites=sites)
    _furnish(fig, ax, base, notes)
    _legend(fig, _priority_entries(depots, reach_km, sites), "Priority rank (1 = first)")
    _side_text(fig, "Planning quantities use\nexample values, not guidance.", y=0.22)
    return _no_math(fig)


def save_figure(fig: Figure, path, *, pdf=None, dpi: int = DPI) -> np.ndarray:
    """Write ``fig`` as a PNG at ``dpi`` and, when ``pdf`` (a ``PdfPages``) is given, as a page.

    Parameters
    ----------
    fig : matplotlib.figure.Figure
    path : path-like
        The PNG to write.
    pdf : matplotlib.backends.backend_pdf.PdfPages, optional
    dpi : int

    Returns
    -------
    numpy.ndarray
        The PNG's pixels (height x width x RGBA, uint8), so a copy in another format needs no
        second rendering and no decoding.

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
    >>> save_figure(fig, out).shape[2]
    4
    >>> out.read_bytes()[1:4]
    b'PNG'
    """
    from matplotlib.backends.backend_agg import FigureCanvasAgg

    _no_math(fig)
    # An Agg canvas of the figure's own keeps the PNG's rendering after saving.
    canvas = FigureCanvasAgg(fig)
    fig.savefig(path, dpi=dpi, facecolor="white")
    pixels = np.array(canvas.buffer_rgba())
    if pdf is not None:
        pdf.savefig(fig)
    return pixels
