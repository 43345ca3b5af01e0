"""The steps of the monthly run: one method per analysis, each returning result fields.

Private to :mod:`marchland.pack.monthly` (which composes them, times them and records what could
not run). Each step imports its analysis module when it runs, so a module that is missing
makes that step absent instead of failing the import of the whole package.
"""

from __future__ import annotations

import importlib
import sys
import threading
import warnings
from typing import Any

import numpy as np
import pandas as pd

from ..config.schema import Config
from ..errors import DataWarning
from ..inputs.weeks import week_month


class _Absent(Exception):
    """A step cannot run because a module (or a step it needs) is missing."""


def _need(module: str, *names: str) -> Any:
    try:
        mod, missing = _load(f"marchland.{module}", names)
    except ModuleNotFoundError as exc:
        if exc.name in (f"marchland.{module}",):
            raise _Absent(f"module marchland.{module} is not available yet") from None
        raise
    if missing:
        raise _Absent(f"marchland.{module} lacks {', '.join(missing)}")
    return mod


def _load(qualname: str, names: tuple[str, ...]) -> tuple[Any, list[str]]:
    """Import ``qualname`` and its lazily loaded ``names`` on a thread of their own.

    Returns the module and the names it lacks. Some libraries keep an exception raised while
    they are imported (pulp keeps its optional solvers' import errors as class attributes),
    and with its traceback every frame that called the import: imported inside a step, that
    kept the step's inputs (all of the month's counts, 0.27 GB at 50,000 units) alive for
    the rest of the run and in every copy forked later. A thread's frames have no callers
    from the run. An error is raised here, in the caller's thread.
    """
    if qualname in sys.modules and all(n in vars(sys.modules[qualname]) for n in names):
        mod = sys.modules[qualname]
        return mod, []
    box: dict[str, Any] = {}

    def load() -> None:
        try:
            mod = importlib.import_module(qualname)
            box["missing"] = [n for n in names if not hasattr(mod, n)]
            box["module"] = mod
        except BaseException as exc:  # handed to the caller's thread below
            box["error"] = exc

    thread = threading.Thread(target=load, name=f"marchland-import-{qualname}")
    thread.start()
    thread.join()
    if "error" in box:
        raise box.pop("error")
    return box["module"], box["missing"]


#: Units per week between the month's border-risk backtest origins (see ``_Context.backtest``):
#: at 10,000 units every 5th week (69 origins took 44 s of CPU at every week; RESULTS.md).
RISK_BACKTEST_UNITS = 2_000


def _executor(cfg: Config) -> Any:
    """Return the executor of ``[compute]`` (serial, local processes or a Dask cluster)."""
    from ..compute import get_executor

    return get_executor(getattr(cfg, "compute", None))


class _Context:
    """The inputs every step shares; one method per step, each returning result fields."""

    def __init__(self, cfg: Config, region: Any, period: pd.Period, as_of: pd.Timestamp):
        self.cfg = cfg
        self.region = region
        self.units = region.units
        self.graph = region.graph
        self.period = period
        self.as_of = as_of
        # Every version received by as_of: later corrections must not leak into the past.
        counts = region.counts
        self.counts = counts[counts["received"] <= as_of].reset_index(drop=True)
        # The month's tables stop at its last week (a week belongs to the month of its
        # Thursday), so a week after the month never enters "cumulative".
        month_end = period.end_time.normalize()
        in_month = (week_month(self.counts["week"]) <= period).to_numpy()
        self.counts_to_month = self.counts[in_month].reset_index(drop=True)
        if as_of > month_end + pd.Timedelta(days=7):
            warnings.warn(
                f"the as-of date {as_of:%Y-%m-%d} is more than a week after {period} ended: "
                "the trailing windows (last weeks) end at the last week finished by the as-of "
                "date, not at the month's end",
                DataWarning,
                stacklevel=2,
            )
        self.seed = cfg.region.seed
        # Built once for the risk and backtest steps, here rather than inside a step: a bad
        # covariate file is an input mistake that stops the run, not a statistic the month's
        # data cannot carry.
        self.covariates = risk_covariates(cfg, region)

    # -- rates -----------------------------------------------------------------------------
    def rates(self) -> dict[str, Any]:
        r = _need(
            "stats",
            "window_counts",
            "attack_rates",
            "case_fatality",
            "smooth_rates",
            "aggregate_rates",
        )
        a = self.cfg.analysis
        units = self.units
        pop = units["population"].astype(float)
        wc = r.window_counts(
            self.counts_to_month,
            self.as_of,
            windows_weeks=a.windows_weeks,
            month=self.period,
            units=units.index,
        )
        windows = ["month", *[f"last_{int(n)}w" for n in a.windows_weeks], "cumulative"]
        ar = r.attack_rates(wc["cases"][windows], pop)
        cfr = r.case_fatality(
            wc["deaths"]["cumulative"],
            wc["cases_with_deaths"]["cumulative"],
            min_cases=a.min_cases_cfr,
        )
        table = units[["name", "country", "level", "population"]].copy()
        for w in windows:
            for f in ("cases", "rate", "lower", "upper"):
                table[f"{w}_{f}"] = ar[w][f]
            table[f"{w}_deaths"] = wc["deaths"][w]
            table[f"{w}_weeks_reported"] = wc["weeks_reported"][w]
            cases_w = wc["cases"][w]
            table[f"{w}_rate_eb"] = r.smooth_rates(cases_w, pop)
            table[f"{w}_rate_seb"] = r.smooth_rates(cases_w, pop, graph=self.graph)
        for f in ("cfr", "lower", "upper", "too_few", "above_threshold"):
            table[f"cfr_{f}" if f != "cfr" else "cfr"] = cfr[f]
        table.attrs["weeks_in_window"] = wc.attrs.get("weeks_in_window", {})

        # Six months of month rates for the small multiples, all read as known on as_of.
        hist = {}
        for k in range(5, -1, -1):
            m = self.period - k
            wm = r.window_counts(
                self.counts_to_month, self.as_of, windows_weeks=(), month=m, units=units.index
            )
            hist[str(m)] = r.attack_rates(wm["cases"]["month"], pop)["rate"]
        history = pd.DataFrame(hist)

        groups = pd.DataFrame(
            {
                "province": province_of(units),
                "country": units["country"],
                "region": "region",
            },
            index=units.index,
        )
        agg = r.aggregate_rates(wc["cases"][windows], pop, groups)
        by_area = _flatten_areas(agg, windows, self.region, self.cfg)
        return {"rates": table, "rates_history": history, "rates_by_area": by_area}

    # -- nowcast ---------------------------------------------------------------------------
    def nowcast(self) -> dict[str, Any]:
        _need("delays", "nowcast", "filled", "aggregate_filled")
        from ._recent import recent_weeks

        return recent_weeks(
            self.counts_to_month,
            self.units,
            as_of=self.as_of,
            period=self.period,
            seed=self.seed,
            province=province_of(self.units),
        )

    # -- hotspots --------------------------------------------------------------------------
    def hotspots(self) -> dict[str, Any]:
        h = _need(
            "stats.autocorrelation",
            "hotspots",
            "getis_ord",
            "global_moran_rate",
            "CLUSTER_COLOURS",
            "CLUSTER_LEGEND",
            "QUADRANTS",
        )
        r = _need("stats", "window_counts", "smooth_rates")
        a = self.cfg.analysis
        wc = r.window_counts(
            self.counts_to_month,
            self.as_of,
            windows_weeks=(),
            month=self.period,
            units=self.units.index,
        )
        cases = wc["cases"]["month"]
        pop = self.units["population"].astype(float)
        weighting = self.cfg.graph.weighting
        hs = h.hotspots(
            cases,
            pop,
            self.graph,
            permutations=a.permutations,
            seed=self.seed,
            fdr=a.fdr,
            weighting=weighting,
        )
        # Gi* needs non-negative values: the month's smoothed rate (global EB), a second view.
        gi = h.getis_ord(
            r.smooth_rates(cases, pop),
            self.graph,
            permutations=a.permutations,
            seed=self.seed,
            fdr=a.fdr,
        )
        attrs = dict(hs.attrs)  # join drops them; the figures note reads max_permutations
        hs = hs.join(gi[["z", "p", "q", "label"]].add_prefix("gi_"), how="left")
        hs.attrs.update(attrs)
        gm = h.global_moran_rate(
            cases, pop, self.graph, permutations=a.permutations, seed=self.seed, weighting=weighting
        )
        gm_d = {k: getattr(gm, k) for k in gm.__dataclass_fields__}
        gm_d["p"] = gm_d.get("p_sim")
        return {
            "hotspots": hs,
            "global_moran": gm_d,
            "cluster_colours": dict(h.CLUSTER_COLOURS),
            "cluster_legend": dict(h.CLUSTER_LEGEND),
            "cluster_significant": tuple(h.QUADRANTS),
        }

    # -- spread ----------------------------------------------------------------------------
    def spread(self) -> dict[str, Any]:
        s = _need(
            "spread",
            "first_cases",
            "spread_fronts",
            "spread_velocity",
            "cross_border_introductions",
            "front_outlines",
        )
        units = self.units
        first = s.first_cases(self.counts, as_of=self.as_of, units=units.index)
        fronts = s.spread_fronts(first, self.graph)
        outlines = s.front_outlines(fronts, units)
        velocity = s.spread_velocity(first, units, groups="country", seed=self.seed)
        intro = s.cross_border_introductions(first, self.graph, countries=units["country"])
        by_border = (
            s.introductions_by_border(intro) if hasattr(s, "introductions_by_border") else None
        )
        return {
            "first_cases": first,
            "fronts": fronts,
            "front_outlines": outlines,
            "velocity": velocity,
            "introductions": intro,
            "introductions_by_border": by_border,
        }

    # -- risk ------------------------------------------------------------------------------
    def risk(self) -> dict[str, Any]:
        rk = _need("risk", "border_risk")
        c = self.cfg.risk
        risk = rk.border_risk(
            self.counts,
            self.units,
            self.graph,
            as_of=self.as_of,
            silent_weeks=c.silent_weeks,
            covariates=self.covariates,
            **risk_options(c),
        )
        return {"risk": risk}

    def backtest(self) -> dict[str, Any]:
        rk = _need("risk", "run_backtest")
        c = self.cfg.risk
        # self.counts already stops at as_of; passing it too keeps the origins' last week
        # the same as the risk step's.
        # The origins run where [compute] says: here, local processes or a Dask cluster.
        # Every origin refits the model on every unit: a continent's month takes every k-th
        # origin week (k = units // RISK_BACKTEST_UNITS; the demo and up to 3,999 units: all).
        every = max(1, len(self.units) // RISK_BACKTEST_UNITS)
        with _executor(self.cfg) as ex:
            bt = rk.run_backtest(
                self.counts,
                self.units,
                self.graph,
                as_of=self.as_of,
                top_k=c.top_k,
                executor=ex,
                covariates=self.covariates,
                every_weeks=every,
                **risk_options(c),
            )
        return {"backtest": bt.summary, "backtest_by_country": bt.by_country}

    # -- supplies --------------------------------------------------------------------------
    def supplies(self, risk: pd.DataFrame, forecast: Any = None) -> dict[str, Any]:
        sp = _need(
            "supplies",
            "SupplyPlan",
            "prioritise",
            "forecast_case_totals",
            "affected_quantities",
            "read_depots",
            "choose_depots",
            "assign_depots",
            "totals",
        )
        c = self.cfg.supplies
        if c.items is None:
            raise _Absent("the config's [supplies] section names no items table")
        plan = sp.SupplyPlan.from_config(c, base=self.cfg.base_dir)
        prio = sp.prioritise(risk, self.units, plan=plan)
        out: dict[str, Any] = {
            "priorities": prio,
            "supply_note": plan.note,
            "supply_totals": sp.totals(prio, plan=plan),
        }
        if forecast is not None:
            # Districts with a case to date that are not border-risk candidates: sized from the
            # forecast's upper 4-week total instead of a planning attack rate.
            ft = sp.forecast_case_totals(forecast, quantile=c.forecast_quantile)
            cases = self.counts.groupby("unit_id")["cases"].sum(min_count=1)
            hit = cases.index[cases.fillna(0).to_numpy() > 0]
            affected = ft.index.intersection(hit).difference(risk.index)
            out["supplies_affected"] = sp.affected_quantities(
                ft.loc[affected], self.units, plan=plan
            )
        if c.depots is not None and len(prio):
            sites = sp.read_depots(c.depots, self.units.crs)
            depots = sp.choose_depots(prio, sites, k=c.k, reach_km=c.reach_km, units=self.units)
            assignment = sp.assign_depots(prio, depots, units=self.units)
            out.update(
                depot_sites=sites,
                depots=depots,
                depot_assignment=assignment,
                supply_totals_by_depot=sp.totals(prio, plan=plan, by=assignment["depot"]),
            )
        return out


def risk_options(c: Any) -> dict[str, Any]:
    """Return the border-risk keyword options of a ``[risk]`` config, shared by every caller."""
    return {
        "horizon_weeks": c.horizon_weeks,
        "recent_weeks": c.recent_weeks,
        "reintroduction_weeks": c.reintroduction_weeks,
        "min_events": c.min_events,
        "penalty": c.penalty,
    }


def risk_covariates(cfg: Config, region: Any) -> pd.DataFrame | None:
    """Build the border-risk covariates of ``[[risk.covariates]]`` on the analysis units.

    A raster gives the area-weighted zonal mean over each analysis unit; a table is read
    through :func:`marchland.inputs.population.covariate_from_table`. ``None`` when there are none.
    """
    if not cfg.risk.covariates:
        return None
    from ..inputs.population import covariate_values

    units = region.units
    all_units = getattr(region, "all_units", None)
    cols = {cv.name: covariate_values(cv, units, all_units) for cv in cfg.risk.covariates}
    out = pd.DataFrame(cols, index=units.index)
    out.index.name = "unit_id"
    return out


def province_of(units: pd.DataFrame) -> pd.Series:
    """Province of each analysis unit: itself at level 1, its parent at level 2."""
    parent = units["parent_id"].where(units["level"] != 1)
    return parent.fillna(pd.Series(units.index, index=units.index)).astype(str)


def _flatten_areas(agg: pd.DataFrame, windows: list[str], region: Any, cfg: Config) -> pd.DataFrame:
    names = {}
    all_units = getattr(region, "all_units", None)
    if all_units is not None and "name" in all_units:
        names = all_units["name"].to_dict()
    # Countries by name with their code ("Tavrenne (TVR)"), as the config names them.
    names.update({c: cfg.country_label(c) for c in cfg.country_names})
    frames = []
    for w in windows:
        part = agg[w].reset_index()
        part.insert(2, "window", w)
        frames.append(part)
    out = pd.concat(frames, ignore_index=True)
    out["name"] = [
        "whole region" if lvl == "region" else names.get(g, g)
        for lvl, g in zip(out["level"], out["group"], strict=True)
    ]
    order = {"region": 0, "country": 1, "province": 2}
    wo = {w: i for i, w in enumerate(windows)}
    out = out.sort_values(
        ["level", "group", "window"],
        key=lambda s: (
            s.map(order) if s.name == "level" else (s.map(wo) if s.name == "window" else s)
        ),
        kind="stable",
    )
    return out.reset_index(drop=True)


#: Panels in one country's province figure (epi curves, fan charts): each panel is an axes
#: with its own ticks and labels, the costliest thing to draw, and past a dozen they are too
#: small to read.
MAX_PROVINCE_PANELS = 12


def busiest(
    ids: list[str], series: dict[str, pd.DataFrame], column: str, k: int | None = None
) -> list[str]:
    """Return the ``k`` areas whose ``column`` sums highest (ties by id), in id order."""
    if len(ids) <= (MAX_PROVINCE_PANELS if k is None else k):
        return ids
    return top_areas(
        ids, pd.Series({p: float(np.nansum(series[p][column].to_numpy())) for p in ids}), k
    )


def top_areas(ids: list[str], totals: pd.Series, k: int | None = None) -> list[str]:
    """Return the ``k`` of ``ids`` with the highest ``totals`` (ties by id), in id order.

    ``k`` defaults to :data:`MAX_PROVINCE_PANELS`.
    """
    k = MAX_PROVINCE_PANELS if k is None else k
    if len(ids) <= k:
        return ids
    total = totals.reindex(ids).astype(float)
    top = total.sort_index().sort_values(ascending=False, kind="stable").index[:k]
    return sorted(top)
