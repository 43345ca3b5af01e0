"""The outlook part of the month: cluster and fan-chart figures, and their report sections.

Kept apart from ``_figures`` and ``_sections`` so that the emerging clusters and the forecast
arrive as one layer: figures picked from a MonthResult, and two report sections.
"""

from __future__ import annotations

from collections.abc import Iterator, Mapping
from typing import TYPE_CHECKING, Any

import pandas as pd

from ..figures import maps
from ..figures.outlook import cluster_outline_map, fan_charts
from ._html import _absent, _figure, _fmt, _section, esc, table_html
from ._outlooksteps import CLUSTER_MAX_UNITS, clusters_layer
from ._steps import province_of, top_areas

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

HISTORY_WEEKS = 16  # weeks of reported history drawn before the forecast

CLUSTER_CAUTION = (
    "A cluster is a signal to investigate, not a confirmed outbreak: a change in reporting "
    "(a new clinic reporting, a backlog sent at once, a changed case definition) can create "
    "one, and the latest weeks are nowcast estimates. Check with the district team first."
)
# Backtest coverage columns shown in the report, and their headers.
COVERAGE_COLUMNS = {
    "coverage": "model {level} coverage",
    "coverage_expected": "expected if right",
    "coverage_pit": "PIT-based coverage",
}
FORECAST_CAUTION = (
    "Projections assume no change in response: they carry the recent pattern forward and "
    "cannot foresee vaccination, water and sanitation work, or changes in reporting. The "
    "latest weeks they start from are nowcast estimates. Read the band, not the middle line."
)


def _cluster_label(row: pd.Series, i: int) -> str:
    return f"{i}: from {row['start']:%Y-%m-%d}, p={row['p']:.3f}"


def outlook_figures(
    result: MonthResult, notes: maps.MapNotes, base: Any
) -> Iterator[tuple[str, Any, str]]:
    """Yield the cluster map and the forecast fan charts the result supports."""
    cl = result.clusters
    if cl is not None and result.rates is not None:
        hist = result.rates_history
        bins = maps.rate_classes(hist if hist is not None else result.rates["month_rate"])
        rate = result.rates["month_rate"].where(result.rates["month_weeks_reported"] > 0)
        shown = cl[cl["p"] <= 0.05] if len(cl) else cl
        layer = clusters_layer(shown, result.units)
        if layer is None:
            import geopandas as gpd

            layer = gpd.GeoDataFrame({"label": []}, geometry=[], crs=result.units.crs)
        else:
            layer["label"] = [_cluster_label(r, i) for i, (_, r) in enumerate(shown.iterrows(), 1)]
        month = f"{pd.Period(result.month, freq='M'):%B %Y}"
        yield (
            "clusters",
            lambda: cluster_outline_map(base, rate, layer, notes, bins=bins, period=month),
            f"Emerging space-time clusters with p <= 0.05 ({len(shown)} of {len(cl)} found), "
            "outlined over the attack rate; labels give the first week and the p-value. A "
            "cluster is a signal to investigate, not a confirmed outbreak.",
        )
    fc = result.forecast
    if fc is None or result.filled_panel is None or result.weekly is None:
        return
    units = result.units
    label = result.config.country_label
    yield (
        "epi_forecast_countries",
        lambda: fan_charts(
            {label(c): v for c, v in _fan_series(result, units["country"], fc).items()},
            notes,
            title="The next four weeks by country: reported, nowcast-filled and forecast",
            conf=fc.conf,
            ncols=2,
        ),
        "Weekly cases per country: reported (bars), nowcast-filled (line, late reports and "
        f"gaps estimated) and the forecast median with its {fc.conf:.0%} interval. "
        "Projections assume no change in response.",
    )
    prov = province_of(units)
    names = {}
    if result.all_units is not None and "name" in result.all_units:
        names = result.all_units["name"].to_dict()
    # Every province's sums at once; a frame per panel only for the provinces drawn (at
    # 10,000 units a frame for each of ~500 provinces was most of the figures' set-up).
    agg = fc.aggregate(prov)
    filled = _filled_by(result, prov)
    weeks = filled.columns[filled.columns <= fc.origin_week][-HISTORY_WEEKS:]
    totals = filled[weeks].sum(axis=1)
    country_of = units.groupby(prov)["country"].first()
    groups = [str(g) for g in sorted(agg.index.unique())]
    for country in sorted(units["country"].unique()):
        ids = sorted(p for p in groups if country_of[p] == country)
        shown = top_areas(ids, totals.reindex(ids).fillna(0.0))
        per = _fan_series(result, prov, fc, agg=agg, filled=filled, only=shown)
        panels = {f"{names.get(p, p)} ({p})": per[p] for p in shown}
        extra = (
            f", the {len(shown)} of its {len(ids)} provinces with the most cases in the weeks "
            "drawn (every unit's forecast is in tables/forecast.csv)"
            if len(shown) < len(ids)
            else ""
        )
        if panels:
            yield (
                f"epi_forecast_provinces_{country}",
                lambda panels=panels, country=country: fan_charts(
                    panels,
                    notes,
                    title=f"The next four weeks by province, {label(country)}",
                    conf=fc.conf,
                    ncols=3,
                ),
                f"Weekly cases per province of {label(country)}{extra}: reported, "
                f"nowcast-filled and forecast ({fc.conf:.0%} interval), read as the country "
                "chart.",
            )


def _filled_by(result: MonthResult, key: pd.Series) -> pd.DataFrame:
    """Nowcast-filled weekly cases summed by group (groups x weeks)."""
    return result.filled_panel.groupby(key.reindex(result.filled_panel.index)).sum(min_count=1)


def _fan_series(
    result: MonthResult,
    key: pd.Series,
    fc: Any,
    *,
    agg: pd.DataFrame | None = None,
    filled: pd.DataFrame | None = None,
    only: list[str] | None = None,
) -> dict[str, pd.DataFrame]:
    """Per group: reported and filled weekly cases, then the forecast median and band.

    ``only`` limits the groups made; ``agg`` and ``filled`` are ``fc.aggregate(key)`` and
    :func:`_filled_by` when already made.
    """
    agg = fc.aggregate(key) if agg is None else agg
    filled = _filled_by(result, key) if filled is None else filled
    w = result.weekly
    if only is not None:
        w = w[w["unit_id"].map(key).isin(only)]
    rep = (
        w.assign(g=w["unit_id"].map(key), cases=w["cases"].astype(float))
        .groupby(["g", "week"])["cases"]
        .sum(min_count=1)
    )
    out = {}
    for g in sorted(agg.index.unique()) if only is None else only:
        f = filled.loc[g] if g in filled.index else pd.Series(dtype=float)
        f = f[f.index <= fc.origin_week].iloc[-HISTORY_WEEKS:]
        df = pd.DataFrame({"filled": f})
        df["reported"] = rep.get(g, pd.Series(dtype=float)).reindex(df.index)
        a = agg.loc[[g]].set_index("week")[["median", "lower", "upper"]]
        df = pd.concat([df, a]).sort_index()
        # Join the band to the last filled week so the fan starts from it.
        if len(f):
            df.loc[f.index[-1], ["median", "lower", "upper"]] = f.iloc[-1]
        out[str(g)] = df
    return out


def clusters_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    """Report section on emerging clusters."""
    body = _absent(result, "clusters") + f'<p class="caution">{esc(CLUSTER_CAUTION)}</p>'
    body += (
        '<p class="note"><b>Not the hotspots above.</b> A hotspot (local Moran\'s I) compares '
        "a unit's attack rate for the whole month with its neighbours'. An emerging cluster "
        "is a group of neighbouring units whose cases in the last weeks are higher than their "
        "usual share of the region's cases predicts, whatever their rate: the two can pick "
        "different places.</p>"
    )
    cl = result.clusters
    if cl is not None:
        a = cl.attrs
        w0, w1 = a.get("window", (None, None))
        body += (
            '<p class="note">Method: space-time permutation scan statistic (Kulldorff et al. '
            "2005), prospective: every cluster ends at the window's last week, is 1 to 4 weeks "
            "long and covers a unit and its nearest neighbours up to half the window's cases "
            f"and at most {CLUSTER_MAX_UNITS} units. "
            f"Scanned: {esc(a.get('panel', ''))}, weeks {_fmt(w0)} to {_fmt(w1)}, "
            f"{a.get('units_scanned', '?')} units ({a.get('units_imputed', 0)} with an imputed "
            f"week; {len(a.get('units_unknown', []))} left out as unknown); "
            f"{result.config.analysis.permutations} permutations. Recurrence: with one analysis "
            "a week, how often a cluster this strong would arise by chance.</p>"
        )
        body += _figure(figures, "clusters")
        if len(cl):
            body += (
                f'<p class="note">The table lists every cluster the scan found ({len(cl)}); the '
                "map draws only those with p &le; 0.05. Quote only those.</p>"
            )
        t = cl.copy()
        t["units"] = [", ".join(u) for u in t["units"]]
        body += table_html(
            t,
            {
                "centre": "centre",
                "n_units": "units",
                "start": "from week",
                "end": "to week",
                "observed": "observed",
                "expected": "expected",
                "relative_risk": "relative risk",
                "p": "p",
                "recurrence_weeks": "recurrence (weeks)",
                "units": "member units",
            },
            index="cluster",
            kinds={"p": "p"},
            empty="No cylinder had more cases than expected.",
        )
    return _section("Emerging clusters", body, "clusters")


def _dispersion_text(parameters) -> str:
    """Say how the negative binomial dispersion was estimated (one, or one per country group)."""
    groups = [str(p)[4:] for p in parameters.index if str(p).startswith("psi_")]
    if not groups:
        return "one negative binomial dispersion for all units"
    return (
        "negative binomial dispersion estimated per country (Paul and Held 2011): "
        + ", ".join(groups)
        + (
            "; countries joined by + share one (too few cases for one each)"
            if "+" in "".join(groups)
            else ""
        )
    )


def forecast_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    """Report section "The next four weeks", with the backtest beside it."""
    body = _absent(result, "forecast") + f'<p class="caution">{esc(FORECAST_CAUTION)}</p>'
    fc = result.forecast
    if fc is not None:
        reg = fc.aggregate("region")
        body += (
            '<p class="note">Endemic-epidemic model (Held, Hoehle and Hofmann 2005; power-law '
            f"neighbourhood, Meyer and Held 2014) fitted to the last {fc.window_weeks} weeks of "
            f"the nowcast-filled panel, origin week {fc.origin_week:%Y-%m-%d}; "
            f"{esc(_dispersion_text(fc.parameters))}; "
            f"{fc.conf:.0%} intervals from simulated paths.</p>"
        )
        body += table_html(
            reg.reset_index(drop=True),
            {
                "week": "week",
                "horizon": "weeks ahead",
                "median": "median cases",
                "lower": "lower",
                "upper": "upper",
            },
            empty="No forecast.",
        )
        body += "".join(_figure(figures, n) for n in figures if str(n).startswith("epi_forecast"))
    bt = result.forecast_backtest
    if bt is not None:
        allc = bt[bt["country"] == "all"].reset_index()
        wide = allc.pivot(index="horizon", columns="model", values="crps")
        model = allc[allc["model"] == "endemic-epidemic"].set_index("horizon")
        cov_cols = [c for c in COVERAGE_COLUMNS if c in model.columns]
        for c in cov_cols:
            wide[c] = model[c]
        wide = wide.reset_index()
        wide["horizon"] = wide["horizon"].astype(int)
        level = f"{result.forecast.conf if fc else 0.9:.0%}"
        cols = {"horizon": "weeks ahead"}
        cols.update({m: f"CRPS {m}" for m in wide.columns if m not in ("horizon", *cov_cols)})
        cols.update({c: COVERAGE_COLUMNS[c].format(level=level) for c in cov_cols})
        body += (
            "<h3>How far to trust it</h3>"
            '<p class="note">Backtest on this outbreak as known on the as-of date: '
            f"{esc(bt.attrs.get('origins', ''))} (fewer than the full backtest, to keep the "
            "month quick). CRPS: mean continuous ranked probability score per unit-week, lower "
            "is better; baselines are last week carried forward and the mean of the last 4 "
            f"weeks. Coverage: share of outcomes inside the model's {level} interval. Where a "
            f"district's weekly count is usually 0, its {level} interval holds more than "
            f"{level} of outcomes even when the forecast is right; the next "
            "column gives the share the forecast itself expected. PIT-based coverage takes "
            "that effect out (expected share of the randomised probability integral transform "
            f"inside the central {level}; Czado, Gneiting and Held 2009): near {level} means "
            "intervals of the right width, below means too narrow.</p>"
            + table_html(
                wide,
                cols,
                kinds={"horizon": "int", **dict.fromkeys(cov_cols, "pct")},
            )
        )
    return _section("The next four weeks", body, "outlook")
