"""Pre-positioning: the priority list, planning quantities and depot coverage.

A logistics lead decides before the first case what to send where. This module turns the
border-risk table into:

- :func:`prioritise`: one ranked row per candidate district with its probability of a first
  case, population, planning case load (low / mid / high) and the quantity of each supply item
  to hold there **if the outbreak arrives** (not weighted by probability);
- :func:`totals`: per country or per depot catchment, the if-it-arrives sums and the
  **risk-weighted** sums (probability x quantity: the expected need);
- :func:`choose_depots`: which candidate depot sites to open so that the most risk-weighted
  population (probability x population) lies within reach, and :func:`assign_depots`: the
  nearest open depot of every candidate district and whether it is within reach.

The planning numbers (attack rates, per-case quantities, severe share, buffers) are the user's.
The demo's values are example values, not guidance. This is decision support, not a diagnosis:
reporting is incomplete and delayed, small numbers are unstable, and national authorities and
field epidemiologists decide.
"""

from __future__ import annotations

import os
from dataclasses import dataclass
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd
from libpysal.graph import Graph

from . import _covering
from ._supplyinput import (
    DEPOT_COLUMNS,
    ITEM_BASES,
    ITEM_COLUMNS,
    ITEM_UNITS,
    _candidate_points,
    _check_inside,
    _check_items,
    _check_k,
    _check_known,
    _check_metric,
    _check_reach,
    _depots_from_frame,
    _file_name,
    _plan_arguments,
    _read_csv,
    _read_items,
    _share,
    _sites,
    _weights,
)
from .config import DEFAULT_SEVERE_SHARE  # an assumed planning value; see its comment there
from .errors import InputError
from .graph import BorderGraph

__all__ = [
    "DEFAULT_SEVERE_SHARE",
    "DEPOT_COLUMNS",
    "DISTANCES",
    "ITEM_BASES",
    "ITEM_COLUMNS",
    "ITEM_UNITS",
    "SupplyPlan",
    "assign_depots",
    "choose_depots",
    "prioritise",
    "reach_areas",
    "read_depots",
    "read_supply_items",
    "totals",
]

DISTANCES = _covering.DISTANCES
# Products like 150 * 0.2 * 8 * 1.1 land a hair above a whole number in binary floating point;
# rounding first keeps ceil() from adding a phantom unit.
_CEIL_DECIMALS = 9


def _ceil(values: np.ndarray) -> np.ndarray:
    return np.ceil(np.round(values, _CEIL_DECIMALS))


# --- the plan ----------------------------------------------------------------------------
@dataclass(frozen=True, eq=False)
class SupplyPlan:
    """Planning numbers for supply quantities (all of them the user's).

    Parameters
    ----------
    items : pandas.DataFrame
        One row per supply item with columns ``item`` (name, becomes a column of
        :func:`prioritise`), ``unit`` (one of :data:`ITEM_UNITS`), ``per_case`` (quantity per
        case, >= 0), ``basis`` (``"all"`` cases or only ``"severe"`` ones) and ``buffer_share``
        (extra share on top, >= 0; 0.2 = 20 % more).
    attack_rate_low, attack_rate_mid, attack_rate_high : float
        Planning attack rate as a share of the population (0.003 = 0.3 %), low <= mid <= high.
        Quantities use the mid value; low and high give the range of the case load.
    severe_share : float
        Share of cases that are severe, for items with ``basis = "severe"``.
    note : str, optional
        The items file's first comment line (e.g. "example values, not guidance").

    Examples
    --------
    >>> items = pd.DataFrame({"item": ["ors"], "unit": ["sachet"], "per_case": [10.0],
    ...                       "basis": ["all"], "buffer_share": [0.2]})
    >>> plan = SupplyPlan(items, 0.001, 0.003, 0.008, severe_share=0.2)
    >>> plan.item_names
    ['ors']
    """

    items: pd.DataFrame
    attack_rate_low: float
    attack_rate_mid: float
    attack_rate_high: float
    severe_share: float = DEFAULT_SEVERE_SHARE
    note: str | None = None

    def __post_init__(self) -> None:
        rates = {
            "low": self.attack_rate_low,
            "mid": self.attack_rate_mid,
            "high": self.attack_rate_high,
        }
        for key, value in rates.items():
            _share(value, f"planning_attack_rate.{key}")
        if not rates["low"] <= rates["mid"] <= rates["high"]:
            raise InputError(
                f"planning_attack_rate needs low <= mid <= high; {rates} was given instead",
                column="planning_attack_rate",
            )
        _share(self.severe_share, "severe_share")
        if self.note is None:
            object.__setattr__(self, "note", self.items.attrs.get("note"))
        object.__setattr__(self, "items", _check_items(self.items, file=None))

    @property
    def item_names(self) -> list[str]:
        """The item names, in table order (the item columns of :func:`prioritise`)."""
        return list(self.items["item"])

    @classmethod
    def from_config(
        cls, supplies: Any, *, base: str | os.PathLike[str] | None = None
    ) -> SupplyPlan:
        r"""Build a plan from the config's ``[supplies]`` section.

        Parameters
        ----------
        supplies : object or mapping
            Has ``items`` (path to the items table, or a DataFrame), ``planning_attack_rate``
            (``low``/``mid``/``high``, a mapping or an object; a single number means no range)
            and optionally ``severe_share`` (default :data:`DEFAULT_SEVERE_SHARE`).
            Plain numbers and mappings are accepted as well as config dataclasses.
        base : path, optional
            Folder that relative item paths are resolved against (the config file's folder).

        Returns
        -------
        SupplyPlan

        Examples
        --------
        >>> import io
        >>> text = "# Example values, not guidance.\nitem,unit,per_case,basis,buffer_share\n"
        >>> text += "ors,sachet,10,all,0.2\n"
        >>> cfg = {"items": io.StringIO(text),
        ...        "planning_attack_rate": {"low": 0.001, "mid": 0.003, "high": 0.008}}
        >>> SupplyPlan.from_config(cfg).attack_rate_mid
        0.003
        """
        items, low, mid, high, severe, note = _plan_arguments(supplies, base)
        return cls(
            items,
            low,
            mid,
            high,
            severe_share=DEFAULT_SEVERE_SHARE if severe is None else severe,
            note=note,
        )


def read_supply_items(path: str | os.PathLike[str]) -> pd.DataFrame:
    r"""Read a supply items table (CSV).

    The file may start with one comment line (``# ...``), kept in ``attrs["note"]``; then the
    columns ``item, unit, per_case, basis, buffer_share`` (an empty ``buffer_share`` means 0).
    Extra columns are kept.

    Parameters
    ----------
    path : path-like
        The CSV file.

    Returns
    -------
    pandas.DataFrame
        One row per item, ``per_case`` and ``buffer_share`` as floats.

    Raises
    ------
    InputError
        Naming file, row (data rows from 1) and column: a missing column, an empty or repeated
        item name, a unit not in :data:`ITEM_UNITS`, a basis not in :data:`ITEM_BASES`, a
        quantity or buffer that is not a number >= 0.

    Examples
    --------
    >>> import io
    >>> text = "# Example values, not guidance.\nitem,unit,per_case,basis,buffer_share\n"
    >>> text += "ors,sachet,10,all,0.2\niv_fluid,litre,8,severe,0.1\n"
    >>> items = read_supply_items(io.StringIO(text))
    >>> items[["item", "per_case"]].to_dict("list")
    {'item': ['ors', 'iv_fluid'], 'per_case': [10.0, 8.0]}
    >>> items.attrs["note"]
    'Example values, not guidance.'
    """
    items, note = _read_items(path)
    items.attrs["note"] = note
    return items


# --- the priority list -------------------------------------------------------------------
def prioritise(risk: pd.DataFrame, units: pd.DataFrame, *, plan: SupplyPlan) -> pd.DataFrame:
    """Rank candidate districts and size what to hold there if the outbreak arrives.

    Parameters
    ----------
    risk : pandas.DataFrame
        :func:`marchland.border_risk` output, indexed by ``unit_id``, with at least
        ``probability`` and ``rank`` (``cross_border``, ``silent``, ``drivers`` are carried if
        present).
    units : pandas.DataFrame or geopandas.GeoDataFrame
        Analysis units indexed by ``unit_id`` with ``name``, ``country``, ``population``.
    plan : SupplyPlan
        Planning attack rates, severe share and supply items.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id``, sorted by ``rank``, with columns ``rank name country
        probability population planning_cases_low planning_cases planning_cases_high``, then
        ``cross_border``, ``silent``, ``drivers`` when ``risk`` has them, then one nullable-integer
        column per item (named as in ``plan.item_names``).

        ``planning_cases`` = population x mid attack rate (unrounded; ``_low``/``_high`` with
        the low/high rates). Item quantity = ceil(planning_cases x s x per_case x (1 +
        buffer_share)), with s = severe_share for ``basis = "severe"`` items and 1 otherwise.
        Quantities are what to hold in the district **if the outbreak arrives**; they are not
        weighted by probability (see :func:`totals` for risk-weighted sums). A unit with no
        population gets ``<NA>`` planning cases and quantities.

    Raises
    ------
    InputError
        A risk unit missing from ``units``, a negative population, missing columns.

    Examples
    --------
    >>> units = pd.DataFrame({"name": ["Aldo", "Brin"], "country": ["TVR", "OSK"],
    ...                       "population": [50_000, 20_000]},
    ...                      index=pd.Index(["TVR-01-01", "OSK-02-01"], name="unit_id"))
    >>> risk = pd.DataFrame({"probability": [0.3, 0.6], "rank": [2, 1],
    ...                      "cross_border": [True, False]}, index=units.index)
    >>> items = pd.DataFrame({"item": ["ors", "iv_fluid"], "unit": ["sachet", "litre"],
    ...                       "per_case": [10, 8], "basis": ["all", "severe"],
    ...                       "buffer_share": [0.2, 0.1]})
    >>> plan = SupplyPlan(items, 0.001, 0.003, 0.008, severe_share=0.2)
    >>> prioritise(risk, units, plan=plan)[["rank", "planning_cases", "ors", "iv_fluid"]]
               rank  planning_cases   ors  iv_fluid
    unit_id
    OSK-02-01     1            60.0   720       106
    TVR-01-01     2           150.0  1800       264
    """
    for col in ("probability", "rank"):
        if col not in risk.columns:
            raise InputError(f"the risk table needs a {col!r} column", column=col)
    for col in ("name", "country", "population"):
        if col not in units.columns:
            raise InputError(f"the units table needs a {col!r} column", column=col)
    _check_known(risk.index, units, "risk names")
    ids = risk.index
    population = pd.to_numeric(units["population"], errors="coerce").reindex(ids).astype(float)
    if (population < 0).any():
        bad = population[population < 0].index[0]
        raise InputError("population needs to be >= 0", column="population", value=population[bad])
    out = pd.DataFrame(index=pd.Index(ids, name="unit_id"))
    out["rank"] = risk["rank"]
    out["name"] = units["name"].reindex(ids)
    out["country"] = units["country"].reindex(ids)
    out["probability"] = risk["probability"].astype(float)
    out["population"] = population
    out["planning_cases_low"] = population * plan.attack_rate_low
    out["planning_cases"] = population * plan.attack_rate_mid
    out["planning_cases_high"] = population * plan.attack_rate_high
    for col in ("cross_border", "silent", "drivers"):
        if col in risk.columns:
            out[col] = risk[col]
    quantities = _quantities(out["planning_cases"].to_numpy(), plan)
    for name, values in zip(plan.item_names, quantities.T, strict=True):
        out[name] = pd.array(values, dtype="Float64").astype("Int64")
    return out.sort_values(["rank", "probability"], ascending=[True, False], kind="stable")


def _quantities(cases: np.ndarray, plan: SupplyPlan) -> np.ndarray:
    """Units x items array of ceil(cases x share x per_case x (1 + buffer)); NaN stays NaN."""
    items = plan.items
    share = np.where(items["basis"].to_numpy() == "severe", plan.severe_share, 1.0)
    factor = share * items["per_case"].to_numpy(float) * (1.0 + items["buffer_share"].to_numpy())
    return _ceil(cases[:, None] * factor[None, :])


def totals(
    priorities: pd.DataFrame, *, plan: SupplyPlan, by: str | pd.Series = "country"
) -> pd.DataFrame:
    """Sum the priority list per country or per depot catchment.

    Parameters
    ----------
    priorities : pandas.DataFrame
        :func:`prioritise` output.
    plan : SupplyPlan
        The plan the priorities were made with (it names the item columns).
    by : str or pandas.Series
        A column of ``priorities`` (default ``"country"``), or a Series indexed by ``unit_id``
        naming each unit's group, e.g. ``assign_depots(...)["depot"]`` for catchments. Units the
        Series leaves out (or maps to NA) are grouped under ``"(none)"``.

    Returns
    -------
    pandas.DataFrame
        Indexed by group, columns ``units population planning_cases expected_cases``, then per
        item ``<item>`` (sum of the if-it-arrives quantities: every unit in the group hit) and
        ``<item>_risk_weighted`` = ceil(sum of probability x quantity), the expected need.
        ``expected_cases`` = sum of probability x planning_cases. A unit without a probability
        adds nothing to the risk-weighted sums.

    Examples
    --------
    >>> units = pd.DataFrame({"name": ["Aldo", "Brin"], "country": ["TVR", "TVR"],
    ...                       "population": [50_000, 20_000]},
    ...                      index=pd.Index(["TVR-01-01", "TVR-02-01"], name="unit_id"))
    >>> risk = pd.DataFrame({"probability": [0.3, 0.6], "rank": [2, 1]}, index=units.index)
    >>> items = pd.DataFrame({"item": ["ors"], "unit": ["sachet"], "per_case": [10],
    ...                       "basis": ["all"], "buffer_share": [0.2]})
    >>> plan = SupplyPlan(items, 0.001, 0.003, 0.008)
    >>> totals(prioritise(risk, units, plan=plan), plan=plan)[["ors", "ors_risk_weighted"]]
              ors  ors_risk_weighted
    country
    TVR      2520                972
    """
    if isinstance(by, str):
        if by not in priorities.columns:
            raise InputError(f"cannot group by {by!r}: not a column of the priorities", column=by)
        groups = priorities[by]
        label = by
    else:
        groups = by.reindex(priorities.index)
        label = by.name or "group"
    groups = groups.astype(object).where(groups.notna(), "(none)")
    prob = priorities["probability"].astype(float).fillna(0.0)
    frame = pd.DataFrame(
        {
            "units": 1,
            "population": priorities["population"].astype(float),
            "planning_cases": priorities["planning_cases"].astype(float),
            "expected_cases": prob * priorities["planning_cases"].astype(float),
        },
        index=priorities.index,
    )
    for name in plan.item_names:
        q = priorities[name].astype("Float64").to_numpy(dtype=float, na_value=np.nan)
        frame[name] = q
        frame[f"{name}_risk_weighted"] = prob.to_numpy() * q
    out = frame.groupby(groups.rename(label).to_numpy(), sort=True).sum(min_count=1)
    out.index.name = label
    out["units"] = out["units"].astype(int)
    for name in plan.item_names:
        out[name] = pd.array(out[name], dtype="Float64").astype("Int64")
        weighted = _ceil(out[f"{name}_risk_weighted"].to_numpy(dtype=float))
        out[f"{name}_risk_weighted"] = pd.array(weighted, dtype="Float64").astype("Int64")
    return out


# --- depots ------------------------------------------------------------------------------
def read_depots(path: str | os.PathLike[str], crs: Any) -> gpd.GeoDataFrame:
    r"""Read candidate depot sites (CSV, WGS84 longitude/latitude) into the working CRS.

    Parameters
    ----------
    path : path-like
        CSV with columns ``site, name, lon, lat`` and optionally ``existing`` (true/false,
        yes/no, 1/0; empty = false). Lines starting with ``#`` are comments.
    crs : pyproj CRS or anything geopandas accepts
        The working CRS (e.g. ``units.crs``).

    Returns
    -------
    geopandas.GeoDataFrame
        Indexed by ``site``, columns ``name lon lat existing source row geometry`` (points in
        ``crs``); ``row`` is the data row in the file, from 1.

    Raises
    ------
    InputError
        Missing columns, an empty or repeated site id, a longitude/latitude that is not a
        number in range, an ``existing`` value that is not a yes/no.

    Examples
    --------
    >>> import io
    >>> text = "site,name,lon,lat,existing\nD1,Harbour store,10.0,50.0,yes\n"
    >>> read_depots(io.StringIO(text), "EPSG:3035")[["name", "existing"]]
                   name  existing
    site
    D1    Harbour store      True
    """
    name = _file_name(path)
    frame = _read_csv(path, name, "depot sites", comment="#")
    return _depots_from_frame(frame, crs, file=name)


def choose_depots(
    candidates: pd.DataFrame,
    sites: pd.DataFrame,
    *,
    k: int,
    reach_km: float,
    units: gpd.GeoDataFrame | None = None,
    weight: str | None = None,
    distance: str = "straight",
    graph: BorderGraph | Graph | None = None,
) -> gpd.GeoDataFrame:
    """Choose ``k`` depots to open, besides the existing ones, to cover the most risk.

    The maximal covering location problem (Church & ReVelle 1974), built by spopt and solved by
    its bundled CBC: open the existing sites plus ``k`` more so that the total weight of
    candidate districts whose centre lies within ``reach_km`` of an open depot is largest. A
    district weighs probability x population (0 without either). Distance is the straight
    line from the site to the district's centroid in the working equal-area CRS, or, with
    ``distance="graph"``, the way through the unit graph: straight to the centre of the unit
    the site lies in (or nearest to), then from centre to centre along graph edges, so a lake
    or a closed stretch of border without a link is gone around. Neither is road travel time.

    Parameters
    ----------
    candidates : pandas.DataFrame
        Candidate districts indexed by ``unit_id`` with ``probability`` and ``population``
        (e.g. :func:`prioritise` output); a GeoDataFrame, or give ``units`` for the geometry.
    sites : pandas.DataFrame or geopandas.GeoDataFrame
        Depot sites indexed by ``site`` (as :func:`read_depots` gives), with ``name`` and
        optionally ``existing``; a plain DataFrame needs ``site name lon lat`` (WGS84).
    k : int
        Number of new depots to open, 0 <= k <= number of sites not already open. With k = 0
        nothing is chosen: only the existing depots and their coverage are reported.
    reach_km : float
        A district is covered if its centre is at most this far from an open depot.
    units : geopandas.GeoDataFrame, optional
        The analysis units (working CRS): candidate geometry, and the region sites must serve.
    weight : str, optional
        A column of ``candidates`` to use as the weight instead of probability x population.
    distance : {"straight", "graph"}
        How distance is measured (see above).
    graph : BorderGraph or libpysal.graph.Graph, optional
        The unit graph, needed for ``distance="graph"``; its units must be in ``units``.

    Returns
    -------
    geopandas.GeoDataFrame
        One row per open depot (existing or new), indexed by ``site``, sorted by covered weight:
        ``name existing new lon lat x y reach_km distance covered_units covered_population
        covered_weight geometry`` (points, working CRS). Each covered district counts once, at
        its nearest open depot, so ``covered_weight`` sums to the covered total. What stays
        uncovered, and each district's depot, comes from :func:`assign_depots`.

    Raises
    ------
    InputError
        k negative, not whole, or larger than the sites not already open; reach not > 0; a
        site more than ``reach_km`` outside the region (the union of ``units``, or of the
        candidates without ``units``: such a site could serve nobody; a site just outside the
        border but within reach is allowed); a CRS that is not projected in metres.

    References
    ----------
    Church, R. and ReVelle, C. (1974). The maximal covering location problem. Papers of the
    Regional Science Association 32, 101-118.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> units = gpd.GeoDataFrame(
    ...     {"probability": [0.5, 0.2, 0.9], "population": [1000, 4000, 1000]},
    ...     geometry=[box(0, 0, 10_000, 10_000), box(50_000, 0, 60_000, 10_000),
    ...               box(100_000, 0, 110_000, 10_000)],
    ...     index=pd.Index(["A", "B", "C"], name="unit_id"), crs="EPSG:3035")
    >>> sites = gpd.GeoDataFrame({"name": ["west", "east"], "existing": [False, False]},
    ...     geometry=gpd.points_from_xy([5_000, 105_000], [5_000, 5_000]),
    ...     index=pd.Index(["S1", "S2"], name="site"), crs="EPSG:3035")
    >>> choose_depots(units, sites, k=1, reach_km=60)[["covered_units", "covered_weight"]]
          covered_units  covered_weight
    site
    S2                2          1700.0
    """
    reach = _check_reach(reach_km)
    centres, region = _candidate_points(candidates, units)
    site_table = _sites(sites, region.crs)
    n_existing = int(site_table["existing"].sum())
    k = _check_k(k, len(site_table) - n_existing)
    _check_inside(site_table, region, reach)
    w = _weights(candidates, weight)
    dist = _covering.site_distances(candidates.index, centres, region, site_table, distance, graph)
    xy_s = _covering.xy(site_table.geometry)
    fixed = site_table["existing"].to_numpy(dtype=bool)
    # k = 0: nothing to choose, the existing depots stay as they are.
    open_mask = fixed if k == 0 else _covering.solve_mclp(dist, w, reach, n_existing + k, fixed)
    pos, _, covered = _covering.assign(dist, open_mask, reach)
    pop = pd.to_numeric(
        candidates.get("population", pd.Series(np.nan, candidates.index)), errors="coerce"
    ).to_numpy(dtype=float)
    n_sites = len(site_table)
    hit = pos[covered]
    out = site_table.loc[open_mask, ["name", "existing"]].copy()
    out["new"] = ~out["existing"]
    wgs = site_table.geometry.to_crs("EPSG:4326")
    out["lon"] = wgs.x[open_mask].to_numpy()
    out["lat"] = wgs.y[open_mask].to_numpy()
    out["x"] = xy_s[open_mask, 0]
    out["y"] = xy_s[open_mask, 1]
    out["reach_km"] = reach
    out["distance"] = distance
    out["covered_units"] = np.bincount(hit, minlength=n_sites)[open_mask]
    out["covered_population"] = np.bincount(
        hit, weights=np.nan_to_num(pop[covered]), minlength=n_sites
    )[open_mask]
    out["covered_weight"] = np.bincount(hit, weights=w[covered], minlength=n_sites)[open_mask]
    out = gpd.GeoDataFrame(out, geometry=site_table.geometry[open_mask], crs=site_table.crs)
    return out.sort_values("covered_weight", ascending=False, kind="stable")


def assign_depots(
    candidates: pd.DataFrame,
    depots: gpd.GeoDataFrame,
    *,
    units: gpd.GeoDataFrame | None = None,
    reach_km: float | None = None,
    weight: str | None = None,
    distance: str | None = None,
    graph: BorderGraph | Graph | None = None,
) -> pd.DataFrame:
    """Give each candidate district its nearest open depot and say whether it is in reach.

    Parameters
    ----------
    candidates : pandas.DataFrame
        As for :func:`choose_depots`.
    depots : geopandas.GeoDataFrame
        Open depots: :func:`choose_depots` output (or any site table, e.g. the existing
        depots of :func:`read_depots`).
    units : geopandas.GeoDataFrame, optional
        Candidate geometry, as for :func:`choose_depots`.
    reach_km : float, optional
        Defaults to the ``reach_km`` column of ``depots``.
    weight : str, optional
        As for :func:`choose_depots`.
    distance : {"straight", "graph"}, optional
        Defaults to the ``distance`` column of ``depots``, else ``"straight"``.
    graph : BorderGraph or libpysal.graph.Graph, optional
        As for :func:`choose_depots`.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id`` in the candidates' order: ``depot`` (site id; missing if no
        depot is open), ``depot_name``, ``distance_km`` (to the nearest open depot, reach or
        not), ``covered`` (distance <= reach), ``weight``. The uncovered districts are
        ``result[~result["covered"]]``; ``totals(..., by=result["depot"])`` sums per catchment.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> units = gpd.GeoDataFrame(
    ...     {"probability": [0.5, 0.2, 0.9], "population": [1000, 4000, 1000]},
    ...     geometry=[box(0, 0, 10_000, 10_000), box(50_000, 0, 60_000, 10_000),
    ...               box(100_000, 0, 110_000, 10_000)],
    ...     index=pd.Index(["A", "B", "C"], name="unit_id"), crs="EPSG:3035")
    >>> sites = gpd.GeoDataFrame({"name": ["west", "east"], "existing": [False, False]},
    ...     geometry=gpd.points_from_xy([5_000, 105_000], [5_000, 5_000]),
    ...     index=pd.Index(["S1", "S2"], name="site"), crs="EPSG:3035")
    >>> depots = choose_depots(units, sites, k=1, reach_km=60)
    >>> assign_depots(units, depots)[["depot", "distance_km", "covered"]]
            depot  distance_km  covered
    unit_id
    A          S2        100.0    False
    B          S2         50.0     True
    C          S2          0.0     True
    """
    if reach_km is None:
        if "reach_km" not in depots.columns or len(depots) == 0:
            raise InputError("give reach_km= (the depots table has no reach_km column)")
        reach_km = float(depots["reach_km"].iloc[0])
    reach = _check_reach(reach_km)
    if distance is None:
        has_column = "distance" in depots.columns and len(depots)
        distance = str(depots["distance"].iloc[0]) if has_column else "straight"
    centres, region = _candidate_points(candidates, units)
    table = _sites(depots, region.crs)
    w = _weights(candidates, weight)
    dist = _covering.site_distances(candidates.index, centres, region, table, distance, graph)
    pos, nearest, covered = _covering.assign(dist, np.ones(len(table), dtype=bool), reach)
    site_ids = np.asarray(table.index, dtype=object)
    names = np.asarray(table["name"], dtype=object)
    has = pos >= 0
    depot = np.where(has, site_ids[np.maximum(pos, 0)] if len(table) else None, None)
    depot_name = np.where(has, names[np.maximum(pos, 0)] if len(table) else None, None)
    return pd.DataFrame(
        {
            "depot": pd.array(depot, dtype="str"),
            "depot_name": pd.array(depot_name, dtype="str"),
            "distance_km": nearest,
            "covered": covered,
            "weight": w,
        },
        index=pd.Index(candidates.index, name="unit_id"),
    )


def reach_areas(depots: gpd.GeoDataFrame, *, resolution: int = 32) -> gpd.GeoDataFrame:
    """Circles of each depot's reach, for maps.

    Parameters
    ----------
    depots : geopandas.GeoDataFrame
        :func:`choose_depots` output (needs ``reach_km`` and point geometry in metres).
    resolution : int
        Segments per quarter circle (shapely's ``quad_segs``).

    Returns
    -------
    geopandas.GeoDataFrame
        Indexed by ``site``: ``name existing new reach_km geometry`` (circle polygons). With
        ``distance = "graph"`` the circle is an outer bound: the way along the graph is never
        shorter than the straight line, so every covered centre lies inside it.

    Examples
    --------
    >>> sites = gpd.GeoDataFrame({"name": ["west"], "existing": [True], "reach_km": [50.0]},
    ...     geometry=gpd.points_from_xy([0.0], [0.0]), crs="EPSG:3035",
    ...     index=pd.Index(["S1"], name="site"))
    >>> round(reach_areas(sites).area.iloc[0] / 1e6)  # km2, close to pi x 50^2 = 7854
    7851
    """
    _check_metric(depots.crs, "the depots")
    if "reach_km" not in depots.columns:
        raise InputError("the depots table needs a 'reach_km' column", column="reach_km")
    keep = [c for c in ("name", "existing", "new", "reach_km") if c in depots.columns]
    circles = depots.geometry.buffer(depots["reach_km"].to_numpy(float) * 1000.0, resolution)
    return gpd.GeoDataFrame(depots[keep].copy(), geometry=circles, crs=depots.crs)
