"""Pre-positioning: the priority list, planning quantities and depot coverage.

A logistics lead decides before the first case what to send where. This module turns the
border-risk table into:

- :func:`prioritise`: one ranked row per candidate district with its probability of a first
  case, population, planning case load (low / mid / high) and the quantity of each supply item
  to hold there **if the outbreak arrives** (not weighted by probability);
- :func:`totals`: per country or per depot catchment, the if-it-arrives sums and the
  **risk-weighted** sums (probability x quantity: the expected need);
- :func:`forecast_case_totals` and :func:`affected_quantities`: for districts that already
  have cases, quantities sized to an upper quantile of the forecast's 4-week case total;
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

import numpy as np
import pandas as pd

from ..config.schema import (
    DEFAULT_FORECAST_QUANTILE,  # a planning choice; see its comment
    DEFAULT_SEVERE_SHARE,  # an assumed planning value; see its comment there
)
from ..errors import InputError
from . import _covering
from ._input import (
    DEPOT_COLUMNS,
    ITEM_BASES,
    ITEM_COLUMNS,
    ITEM_UNITS,
    _check_items,
    _check_known,
    _plan_arguments,
    _read_items,
    _share,
)

__all__ = [
    "DEFAULT_SEVERE_SHARE",
    "DEPOT_COLUMNS",
    "DISTANCES",
    "ITEM_BASES",
    "ITEM_COLUMNS",
    "ITEM_UNITS",
    "SupplyPlan",
    "affected_quantities",
    "forecast_case_totals",
    "prioritise",
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


# --- districts already affected ----------------------------------------------------------
#: Units whose forecast totals are summarised at a time (bounds the float copy of the paths).
TOTALS_BLOCK = 2_000


def forecast_case_totals(
    forecast: Any, *, quantile: float = DEFAULT_FORECAST_QUANTILE
) -> pd.DataFrame:
    """Sum each unit's simulated paths over the forecast horizon and summarise the totals.

    Parameters
    ----------
    forecast : marchland.projections.Forecast
        Anything with ``paths`` (horizon x unit x path counts; read a block of units at a time
        through ``unit_paths(start, stop)`` where it has that method), ``units`` (indexed by
        ``unit_id`` in path order, with ``start_known``) and ``weeks``.
    quantile : float
        Upper quantile of the total to report, at least 0.5 and below 1.

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id``: ``weeks`` (horizon length), ``mean`` and ``median`` of the
        total over the horizon, and ``upper``, its ``quantile`` (per path the weeks are summed
        first, then the quantile is taken: a quantile of a sum, not a sum of quantiles). NaN for
        units whose starting count was unknown. ``attrs["quantile"]`` holds ``quantile``.

    Examples
    --------
    >>> import types
    >>> paths = np.array([[[0, 2, 4, 6]], [[1, 1, 1, 1]]])  # 2 weeks, 1 unit, 4 paths
    >>> fc = types.SimpleNamespace(paths=paths, weeks=pd.date_range("2026-01-05", periods=2,
    ...     freq="7D"), units=pd.DataFrame({"start_known": [True]}, index=["A"]))
    >>> forecast_case_totals(fc, quantile=0.75)[["mean", "upper"]]
             mean  upper
    unit_id
    A         4.0    5.0
    """
    q = float(quantile)
    if not 0.5 <= q < 1:
        raise ValueError(f"'quantile' needs to be at least 0.5 and below 1. {quantile!r} given.")
    n = len(forecast.units)
    unit_paths = getattr(forecast, "unit_paths", None)
    if unit_paths is None:
        dense = np.asarray(forecast.paths)

        def unit_paths(lo: int, hi: int) -> np.ndarray:
            return dense[:, lo:hi]

    stats = np.empty((3, n))
    # A block of units at a time: the float totals of every unit and path are 0.4 GB at 50,000
    # units x 1,000 paths, and the forecast's paths are held compactly (each unit's numbers are
    # its own, and sums of whole numbers are exact in any order).
    for lo in range(0, n, TOTALS_BLOCK):
        sums = np.asarray(unit_paths(lo, lo + TOTALS_BLOCK), dtype=float).sum(axis=0)
        stats[0, lo : lo + TOTALS_BLOCK] = sums.mean(axis=1)
        stats[1:, lo : lo + TOTALS_BLOCK] = np.quantile(
            sums, [0.5, q], axis=1, method="inverted_cdf"
        )
    known = forecast.units["start_known"].to_numpy(dtype=bool)
    out = pd.DataFrame(
        {"weeks": len(forecast.weeks), "mean": stats[0], "median": stats[1], "upper": stats[2]},
        index=pd.Index(forecast.units.index, name="unit_id"),
    )
    out.loc[~known, ["mean", "median", "upper"]] = np.nan
    out.attrs["quantile"] = q
    return out


def affected_quantities(
    forecast_totals: pd.DataFrame, units: pd.DataFrame, *, plan: SupplyPlan
) -> pd.DataFrame:
    """Size supplies for districts that already have cases from their forecast case totals.

    Parameters
    ----------
    forecast_totals : pandas.DataFrame
        :func:`forecast_case_totals` output for the affected units (the caller picks them),
        indexed by ``unit_id`` with ``mean`` and ``upper``.
    units : pandas.DataFrame
        Analysis units indexed by ``unit_id`` with ``name``, ``country``, ``population``.
    plan : SupplyPlan
        Per-case quantities, severe share and buffers (the attack rates are not used).

    Returns
    -------
    pandas.DataFrame
        Indexed by ``unit_id``, largest ``forecast_cases_upper`` first: ``name country
        population forecast_cases`` (mean total over the horizon) ``forecast_cases_upper`` (its
        upper quantile), then one nullable-integer column per item = ceil(forecast_cases_upper
        x s x per_case x (1 + buffer_share)), with s = severe_share for ``basis = "severe"``
        items and 1 otherwise: the same rule as :func:`prioritise`, with the forecast's upper
        total in place of the planning cases. ``<NA>`` where the forecast is unknown.
        ``attrs`` carry ``quantile`` and ``weeks``.

    Notes
    -----
    The forecast assumes no change in response: vaccination, water and sanitation work or a
    change in reporting are not foreseen. Reporting is delayed and incomplete; treat the
    quantities as a planning figure and defer to national authorities.

    Examples
    --------
    >>> units = pd.DataFrame({"name": ["Aldo"], "country": ["TVR"], "population": [50_000]},
    ...                      index=pd.Index(["TVR-01-01"], name="unit_id"))
    >>> totals = pd.DataFrame({"mean": [30.0], "upper": [52.0]}, index=units.index)
    >>> items = pd.DataFrame({"item": ["ors"], "unit": ["sachet"], "per_case": [8],
    ...                       "basis": ["all"], "buffer_share": [0.25]})
    >>> plan = SupplyPlan(items, 0.001, 0.003, 0.008)
    >>> affected_quantities(totals, units, plan=plan)[["forecast_cases_upper", "ors"]]
               forecast_cases_upper  ors
    unit_id
    TVR-01-01                  52.0  520
    """
    for col in ("mean", "upper"):
        if col not in forecast_totals.columns:
            raise InputError(f"the forecast totals need a {col!r} column", column=col)
    for col in ("name", "country", "population"):
        if col not in units.columns:
            raise InputError(f"the units table needs a {col!r} column", column=col)
    _check_known(forecast_totals.index, units, "forecast totals name")
    ids = pd.Index(forecast_totals.index, name="unit_id")
    out = pd.DataFrame(index=ids)
    out["name"] = units["name"].reindex(ids)
    out["country"] = units["country"].reindex(ids)
    out["population"] = pd.to_numeric(units["population"], errors="coerce").reindex(ids)
    out["forecast_cases"] = forecast_totals["mean"].astype(float)
    upper = forecast_totals["upper"].astype(float)
    out["forecast_cases_upper"] = upper
    quantities = _quantities(upper.to_numpy(), plan)
    for name, values in zip(plan.item_names, quantities.T, strict=True):
        out[name] = pd.array(values, dtype="Float64").astype("Int64")
    out = out.sort_values("forecast_cases_upper", ascending=False, kind="stable")
    out.attrs.update(quantile=forecast_totals.attrs.get("quantile"), weeks=_weeks(forecast_totals))
    return out


def _weeks(totals: pd.DataFrame) -> int | None:
    if "weeks" not in totals.columns or not len(totals):
        return None
    return int(totals["weeks"].iloc[0])
