"""Graph work on first-case weeks (private to :mod:`~marchland.spread.arrival`).

Helpers that put a first-week Series on a graph's ids, label weeks with months and countries,
find probable cross-border introductions on the edge table, and search time-respecting paths
(scipy's Dijkstra on a sparse directed graph, no loop over units).
"""

from __future__ import annotations

import warnings

import geopandas as gpd
import numpy as np
import pandas as pd
from scipy import sparse
from scipy.sparse import csgraph

from ..errors import DataWarning
from ..graph.border import BorderGraph
from ..inputs.weeks import epi_week, week_month

FIRST_WEEK = "first_week"
INTRODUCTION_COLUMNS = (
    FIRST_WEEK,
    "country",
    "sources",
    "source_countries",
    "n_sources",
    "source_week",
    "lag_weeks",
    "evidence",
)


def first_on(first: pd.Series, ids: pd.Index) -> pd.Series:
    """``first`` on the graph's ids (NaT where absent), warning about affected units left out."""
    if not isinstance(first, pd.Series):
        raise TypeError(
            f"'first' needs to be a pandas Series of weeks. {type(first).__name__}"
            " was given instead."
        )
    first = pd.to_datetime(first)
    outside = first.index.difference(ids)
    lost = first.reindex(outside).notna()
    if lost.any():
        warnings.warn(
            f"{int(lost.sum())} affected unit(s) are not in the graph and are left out: "
            f"{list(outside[lost.to_numpy()][:5])}",
            DataWarning,
            stacklevel=4,
        )
    return first.reindex(ids).rename(FIRST_WEEK)


def weeks_between(later: pd.Series, earlier) -> pd.Series:
    """Whole weeks from ``earlier`` to ``later`` (Int64, <NA> where either is missing)."""
    return ((later - earlier) / pd.Timedelta(days=7)).round().astype("Int64")


def month_of_week(week: pd.Series) -> pd.Series:
    """Month ("YYYY-MM") holding most of each week's days: that of its fourth day.

    The rule of :func:`marchland.inputs.weeks.week_month`, shared with rates and the monthly run, so
    a week counts in exactly one month.
    """
    return week_month(week).dt.strftime("%Y-%m").where(week.notna(), pd.NA).astype("string")


def epi_week_label(week: pd.Series) -> pd.Series:
    """Epi week of each first week as "YYYY-Www" (ISO; Sunday-start if every week is a Sunday)."""
    known = week.dropna()
    out = pd.Series(pd.NA, index=week.index, dtype="string")
    if known.empty:
        return out
    calendar = "sunday" if (known.dt.day_of_week == 6).all() else "iso"
    ew = epi_week(known, calendar)
    out[known.index] = (
        ew["year"].astype(str) + "-W" + ew["week"].astype(str).str.zfill(2)
    ).to_numpy()
    return out


def resolve_countries(bg: BorderGraph, countries: pd.Series | None) -> pd.Series | None:
    """Country per graph unit: given, held by the graph, or the id prefix; else None."""
    if countries is not None:
        return pd.Series(countries).reindex(bg.ids).astype("string")
    own = getattr(bg, "countries", None)
    if own is not None:
        return pd.Series(own).reindex(bg.ids).astype("string")
    # DEVELOPERS.md id contract: ids start with the three-letter country code ("TVR-03-07").
    prefix = pd.Series(bg.ids, index=bg.ids).str.extract(r"^([A-Z]{3})-", expand=False)
    return prefix.astype("string") if prefix.notna().all() else None


def centroids_km(units: gpd.GeoDataFrame) -> pd.DataFrame:
    """Return unit centroids in km (columns x, y); units must be in a projected CRS (m)."""
    crs = units.crs
    if crs is None or not crs.is_projected:
        raise ValueError(
            "'units' need a projected CRS in metres (the working equal-area CRS). "
            f"{crs.to_string() if crs is not None else 'no CRS'} was given instead."
        )
    c = units.geometry.centroid
    return pd.DataFrame({"x": c.x.to_numpy() / 1000, "y": c.y.to_numpy() / 1000}, index=units.index)


def introductions_table(bg: BorderGraph, t: pd.Series, nations: pd.Series | None) -> pd.DataFrame:
    """Units whose earlier-affected neighbours are all across a border (see the public doc)."""
    e = bg.edges
    tf = e["focal"].map(t).to_numpy()
    tn = e["neighbor"].map(t).to_numpy()
    earlier = pd.notna(tn) & pd.notna(tf) & (tn < tf)
    cross = e["cross_border"].to_numpy(dtype=bool)
    foreign = e[earlier & cross]
    domestic_first = set(e.loc[earlier & ~cross, "focal"])
    foreign = foreign[~foreign["focal"].isin(domestic_first)]
    cols = list(INTRODUCTION_COLUMNS)
    if foreign.empty:
        return pd.DataFrame(columns=cols, index=pd.Index([], name="unit_id"))
    src = foreign.assign(
        source_week=foreign["neighbor"].map(t).to_numpy(),
        source_country=(
            foreign["neighbor"].map(nations).to_numpy() if nations is not None else pd.NA
        ),
    ).sort_values(["focal", "source_week", "neighbor"])
    grouped = src.groupby("focal", sort=False)
    out = pd.DataFrame(
        {
            "sources": grouped["neighbor"].agg(", ".join),
            "source_countries": grouped["source_country"].agg(_join_unique),
            "n_sources": grouped["neighbor"].size().astype("Int64"),
            "source_week": grouped["source_week"].min(),
        }
    )
    out.index.name = "unit_id"
    out.insert(0, FIRST_WEEK, t.reindex(out.index))
    out.insert(1, "country", nations.reindex(out.index) if nations is not None else pd.NA)
    out["lag_weeks"] = weeks_between(out[FIRST_WEEK], out["source_week"])
    out["evidence"] = "probable"
    return out.sort_values([FIRST_WEEK, "country"]).loc[:, cols]


def _join_unique(values: pd.Series) -> str | None:
    vals = sorted({str(v) for v in values if pd.notna(v)})
    return ", ".join(vals) if vals else None


def time_respecting_path(
    bg: BorderGraph, t: pd.Series, source, target, centroids: pd.DataFrame | None
) -> pd.Index | None:
    """Fewest-hop, then shortest, path with non-decreasing first weeks; None if there is none."""
    e = bg.edges
    tf = e["focal"].map(t).to_numpy()
    tn = e["neighbor"].map(t).to_numpy()
    e = e[pd.notna(tf) & pd.notna(tn) & (tn >= tf)]
    km = _edge_km(e, centroids)
    # Hops dominate: the distance term of a whole path stays below one hop.
    cost = 1.0 + km / (km.sum() + 1.0)
    i = bg.ids.get_indexer(e["focal"])
    j = bg.ids.get_indexer(e["neighbor"])
    n = len(bg.ids)
    mat = sparse.csr_matrix((cost, (i, j)), shape=(n, n))
    s, g = bg.ids.get_loc(source), bg.ids.get_loc(target)
    dist, pred = csgraph.dijkstra(mat, directed=True, indices=s, return_predecessors=True)
    if not np.isfinite(dist[g]):
        return None
    # Walk the predecessor array back from the target (path length, not units, bounds it).
    path = [g]
    while path[-1] != s:
        path.append(pred[path[-1]])
    return bg.ids[path[::-1]]


def _edge_km(e: pd.DataFrame, centroids: pd.DataFrame | None) -> np.ndarray:
    if centroids is None:
        return np.zeros(len(e))
    a = centroids.loc[e["focal"], ["x", "y"]].to_numpy()
    b = centroids.loc[e["neighbor"], ["x", "y"]].to_numpy()
    return np.nan_to_num(np.hypot(*(a - b).T), nan=0.0)


def path_table(
    bg: BorderGraph, t: pd.Series, ids: pd.Index, centroids: pd.DataFrame | None
) -> pd.DataFrame:
    """Build the corridor table for a path of unit ids."""
    out = pd.DataFrame(index=pd.Index(ids, name="unit_id"))
    out["hop"] = np.arange(len(ids))
    out[FIRST_WEEK] = t.reindex(ids).to_numpy()
    out["weeks_since_source"] = weeks_between(out[FIRST_WEEK], t[ids[0]])
    if centroids is not None:
        xy = centroids.reindex(ids)[["x", "y"]].to_numpy()
        step = np.r_[0.0, np.hypot(*np.diff(xy, axis=0).T)]
    else:
        step = np.full(len(ids), np.nan)
        step[0] = 0.0
    out["km_step"] = step
    out["km"] = np.cumsum(step)
    pair = pd.MultiIndex.from_arrays([bg.edges["focal"], bg.edges["neighbor"]])
    flag = pd.Series(bg.edges["cross_border"].to_numpy(dtype=bool), index=pair)
    steps = pd.MultiIndex.from_arrays([ids[:-1], ids[1:]])
    out["cross_border"] = np.r_[False, flag.reindex(steps).to_numpy(dtype=bool)]
    kind = pd.Series(bg.edges["kind"].to_numpy(), index=pair)
    out["kind"] = pd.array([pd.NA, *kind.reindex(steps).tolist()], dtype="string")
    return out


def outline_layer(t: pd.Series, key: pd.Series, units: gpd.GeoDataFrame) -> gpd.GeoDataFrame:
    """Newly affected units per period ``key`` and their dissolved outline (front_outlines)."""
    g = gpd.GeoDataFrame(
        {"period": key.to_numpy(), FIRST_WEEK: t.to_numpy(), "unit": t.index.to_numpy()},
        geometry=units.geometry.reindex(t.index).to_numpy(),
        crs=units.crs,
    )
    g = g.sort_values([FIRST_WEEK, "unit"])
    shapes = g[["period", "geometry"]].dissolve(by="period")
    grouped = g.groupby("period")
    out = pd.DataFrame(
        {
            FIRST_WEEK: grouped[FIRST_WEEK].min(),
            "n_new": grouped["unit"].size(),
            "units": grouped["unit"].agg(", ".join),
        }
    ).sort_values(FIRST_WEEK)
    out["n_affected"] = out["n_new"].cumsum()
    out["geometry"] = shapes.geometry.reindex(out.index)
    cols = [FIRST_WEEK, "n_new", "units", "n_affected", "geometry"]
    return gpd.GeoDataFrame(out[cols], geometry="geometry", crs=units.crs)
