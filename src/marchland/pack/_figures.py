"""Which figures a month's bundle holds, drawn from a MonthResult with the figures stage.

Kept apart from ``maps`` (which draws from plain tables and knows no result object) and from
``bundle`` (which writes files): this is the one place that picks the columns each figure shows.
"""

from __future__ import annotations

from collections.abc import Callable, Iterator
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ..figures import maps
from ._outlook import outlook_figures
from ._steps import busiest, province_of

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult


def source_line(result: MonthResult) -> str:
    """Return the data-source line of every figure."""
    names = [r.name for r in result.config.reports]
    # Codes, not names: the line is drawn unwrapped under every figure and must fit (the maps
    # carry the names).
    countries = sorted({r.country for r in result.config.reports})
    return (
        f"Source: weekly reports from {', '.join(countries)} ({len(names)} report sources) "
        "as received by the as-of date."
    )


def notes_for(result: MonthResult) -> maps.MapNotes:
    """Return the MapNotes of a result."""
    return maps.MapNotes(
        as_of=f"{result.as_of:%Y-%m-%d}",
        source=source_line(result),
        region=result.config.region.name,
    )


def _coverage(result: MonthResult) -> str:
    """How much of the month is in, e.g. "weeks 1-2 of 4 in; nowcast-adjusted"."""
    cov = result.month_coverage
    return cov["note"] if cov else "no nowcast this run"


def _rate_subtitle(result: MonthResult) -> str:
    region = result.config.region.name
    return (
        f"{region}: cases per 100,000 from reported counts, not nowcast-adjusted; "
        f"{_coverage(result)}"
    )


def _month_label(month: str) -> str:
    return f"{pd.Period(month, freq='M'):%B %Y}"


def _marks(fig: Any, base: Any, result: MonthResult, ids: Any, n: int = 8) -> Any:
    """Name the units that matter on a map and outline the provinces reporting as a whole."""
    from ..figures.labels import label_units, outline_units

    units = result.units
    whole = units.index[units["level"] == 1]
    outline_units(fig, base, whole, label="province reporting as a whole")
    names = units["name"].astype(str)
    label_units(fig, base, {u: names[u] for u in list(ids)[:n] if u in names.index})
    return fig


def atlas_page(pdf: Any, fig: Any, paper: str) -> None:
    """Write ``fig`` as one atlas page of the config's paper size, the figure centred on it.

    The figure keeps its own layout (fonts stay at their point size); the page around it is
    blank paper. A figure larger than the page is scaled down to fit.
    """
    from matplotlib.transforms import Bbox

    from ..config.schema import PAPER_SIZES

    pw, ph = PAPER_SIZES[paper]
    w, h = fig.get_size_inches()
    if w > pw or h > ph:
        k = min(pw / w, ph / h)
        fig.set_size_inches(w * k, h * k)
        w, h = w * k, h * k
    # A bounding box larger than the figure pads it to the page (vector output kept).
    box = Bbox.from_bounds(-(pw - w) / 2, -(ph - h) / 2, pw, ph)
    pdf.savefig(fig, bbox_inches=box, pad_inches=0)


#: One figure to draw: its file name, a call that draws it, its caption.
FigurePlan = tuple[str, Callable[[], Any], str]


def draw_figures(result: MonthResult) -> Iterator[tuple[str, Any, str]]:
    """Yield ``(name, figure, caption)`` for every figure the result supports, in atlas order.

    Figures are drawn one at a time as they are asked for, so memory stays flat.
    """
    for name, build, caption in figure_plans(result):
        yield name, build(), caption


def figure_plans(result: MonthResult) -> list[FigurePlan]:
    """Return the plan of every figure the result supports, in atlas order, none drawn yet.

    Names and captions are known before any drawing (the atlas's contents page lists them),
    and each figure can be drawn on its own, in any process that holds the result.
    """
    return list(_plans(result))


def _plans(result: MonthResult) -> Iterator[FigurePlan]:
    notes = notes_for(result)
    base = maps.base_map(result.units, country_names=result.config.country_names)
    month = _month_label(result.month)

    if result.rates is not None:
        hist = result.rates_history
        bins = maps.rate_classes(hist if hist is not None else result.rates["month_rate"])
        rate = result.rates["month_rate"].where(result.rates["month_weeks_reported"] > 0)
        yield (
            "attack_rate",
            lambda: _marks(
                maps.attack_rate_map(
                    base, rate, notes, bins=bins, period=month, subtitle=_rate_subtitle(result)
                ),
                base,
                result,
                rate.dropna().sort_values(ascending=False).index,
                n=6,
            ),
            f"Attack rate per 100,000 in {month}, from reported counts ({_coverage(result)}; "
            "the nowcast-adjusted rate is in the rates table). Classes (Fisher-Jenks on the "
            "last six months pooled) are the same as in the monthly panels.",
        )
        if hist is not None:
            panels = hist.copy()
            panels.columns = [f"{pd.Period(c, freq='M'):%b %Y}" for c in panels.columns]
            yield (
                "attack_rate_months",
                lambda: maps.rate_small_multiples(base, panels, notes, bins=bins),
                "Attack rate per 100,000 for each of the last six months, one shared class scheme.",
            )
    if result.hotspots is not None and result.cluster_colours is not None:
        hs = result.hotspots
        fdr = result.config.analysis.fdr
        yield (
            "hotspots",
            lambda: _marks(
                maps.cluster_map(
                    base,
                    hs["label"],
                    result.cluster_colours,
                    notes,
                    legend=result.cluster_legend,
                    always=result.cluster_significant,
                    untested=_untested_labels(result),
                    title=f"Hotspots, {month}",
                    subtitle=f"{notes.region}: rate-adjusted local Moran's I; coloured where "
                    f"the false discovery rate q < {fdr:g}",
                ),
                base,
                result,
                hs[hs["label"] == "High-High"].sort_values("q").index,
            ),
            "Clusters of the month's attack rate (empirical Bayes standardised local Moran's I, "
            f"{_draws_text(hs, result.config.analysis.permutations)}, two-sided, "
            f"Benjamini-Hochberg q < {fdr:g}).",
        )
    if result.fronts is not None:
        yield (
            "arrival",
            lambda: _marks(
                maps.arrival_map(
                    base,
                    result.fronts["first_week"],
                    notes,
                    fronts=result.front_outlines,
                    current=result.month,
                ),
                base,
                result,
                _new_this_month(result),
            ),
            "Quarter of the first reported case per unit; lines outline each month's newly "
            "affected area, this month's heavier.",
        )
    if result.risk is not None:
        risk = result.risk
        affected = []
        if result.fronts is not None:
            affected = result.fronts.index[result.fronts["first_week"].notna()]
        silent = risk.index[risk["silent"].astype(bool)] if "silent" in risk else []
        yield (
            "border_risk",
            lambda: _marks(
                maps.risk_map(
                    base,
                    risk["probability"],
                    affected,
                    notes,
                    silent=silent,
                    horizon_weeks=result.config.risk.horizon_weeks,
                    side_note=BACKTEST_POINTER,
                ),
                base,
                result,
                risk.sort_values("rank").index,
            ),
            "Probability of a first case within the horizon for unaffected units within two "
            "graph steps of an affected one. How far to trust it: the backtest table (in the "
            "report below this map; in the atlas on the map's side panel).",
        )
    if result.priorities is not None:
        depots = result.depots
        yield (
            "priorities",
            lambda: _marks(
                maps.priority_map(
                    base,
                    result.priorities["rank"],
                    notes,
                    depots=depots,
                    reach_km=result.config.supplies.reach_km,
                    sites=result.depot_sites,
                ),
                base,
                result,
                _priority_order(result),
            ),
            "Candidate districts ranked for pre-positioning, depots to open and their reach. "
            "Quantities use example planning values, not guidance.",
        )
    yield from _epi_figures(result, notes)
    yield from outlook_figures(result, notes, base)


def _draws_text(hs, first: int) -> str:
    """Say how many permutations are behind the hotspot p-values (first round, most per unit).

    Units whose label was in doubt get more draws than the configured first round (the
    ``draws`` column, ``attrs["max_permutations"]``), so the configured count alone understates
    them.
    """
    used = int(hs["draws"].max()) if "draws" in hs and len(hs) else first
    cap = hs.attrs.get("max_permutations")
    if used <= first:
        return f"{first:,} conditional permutations per unit"
    limit = f" (limit {cap:,})" if cap and cap > used else ""
    return f"{first:,} conditional permutations per unit, up to {used:,}{limit} where needed"


def _new_this_month(result: MonthResult) -> pd.Index:
    """Return the units whose first case fell in the month, earliest first."""
    first = pd.to_datetime(result.fronts["first_week"])
    from ..inputs.weeks import week_month

    ok = first.notna()
    months = pd.Series(pd.NaT, index=first.index, dtype=object)
    months[ok] = week_month(first[ok]).astype(str)
    return first[months == result.month].sort_values().index


def _priority_order(result: MonthResult) -> list[str]:
    """Return the first ranks, then the largest expected needs (probability x planning cases)."""
    p = result.priorities
    need = (p["probability"] * p["planning_cases"]).sort_values(ascending=False)
    return list(dict.fromkeys([*p.sort_values("rank").index[:4], *need.index[:4]]))


def _untested_labels(result: MonthResult) -> tuple[str, ...]:
    """Cluster labels that mean the unit was not tested (drawn with a pattern on the map)."""
    from ..stats.autocorrelation import NO_NEIGHBOURS, NO_VALUE

    return tuple(k for k in (NO_NEIGHBOURS, NO_VALUE) if k in (result.cluster_colours or {}))


def cover_page(result: MonthResult, captions: list[str]) -> Any:
    """Draw the atlas's first page: title, as-of date, headline numbers, contents, cautions."""
    import textwrap

    from matplotlib.figure import Figure

    from ..figures._mapkit import _MAP_SIZE, _no_math

    h = result.headline
    month = _month_label(result.month)
    fig = Figure(figsize=_MAP_SIZE, facecolor="white")
    fig.text(0.06, 0.90, result.config.region.name, fontsize=18, fontweight="bold")
    fig.text(0.06, 0.85, f"Monthly atlas, {month}", fontsize=13)
    fig.text(
        0.06,
        0.81,
        f"Data as received by {result.as_of:%Y-%m-%d}; "
        f"{h['units']} analysis units; seed {result.seed}.",
        fontsize=9,
        color="#4a4740",
    )

    def num(v: Any, fmt: str) -> str:
        return "not computed" if v is None else format(v, fmt)

    lines = [
        f"Cases reported in {month}: {num(h['cases'], ',.0f')}",
        f"Deaths reported in {month}: {num(h['deaths'], ',.0f')}",
        f"Attack rate per 100,000, whole region: {num(h['rate'], '.1f')}",
        f"Units with a first case this month: {num(h['newly_affected'], 'd')}",
        f"Global Moran's I (rate-adjusted): {num(h['global_moran_i'], '.3f')}",
        f"Expected newly affected units, next {result.config.risk.horizon_weeks} weeks: "
        f"{num(h['expected_new_units'], '.1f')}",
    ]
    fig.text(0.06, 0.74, "\n".join(lines), fontsize=10, va="top", linespacing=1.6)
    pages = [f"{i + 2}. {_page_title(c)}" for i, c in enumerate(captions)]
    fig.text(0.06, 0.47, "Pages", fontsize=10, fontweight="bold")
    fig.text(0.06, 0.45, "\n".join(pages), fontsize=7, va="top", linespacing=1.5, color="#2b2925")
    fig.text(
        0.06,
        0.08,
        textwrap.fill(maps.CAUTION_LINE, 100),
        fontsize=8,
        style="italic",
        color="#6b2a22",
        va="top",
    )
    return _no_math(fig)


def _page_title(caption: str) -> str:
    """Return the caption's first clause for the contents (a cut-off sentence reads as broken)."""
    import re

    head = re.split(r"; |\. ", caption.strip(), maxsplit=1)[0].rstrip(".")
    if len(head) > 110:
        head = re.sub(r"\s*\([^)]*\)$", "", head)
    return head if len(head) <= 110 else head[:107].rsplit(" ", 1)[0] + " ..."


#: The risk map's side panel in the PNG (the report prints the backtest table beside it, so
#: the picture must not repeat it); the atlas page swaps in the table (:func:`for_atlas`).
BACKTEST_POINTER = "How far to trust it:\nsee the backtest table\nbelow this map in the\nreport."


def for_atlas(name: str, fig: Any, result: MonthResult) -> Any:
    """Finish a saved figure for its atlas page: what the report shows beside it goes on it.

    The atlas has no tables, so the border-risk page gets the backtest numbers in its side
    panel where the PNG (embedded in the report above the same table) has a pointer.
    """
    if name == "border_risk":
        for t in fig.texts:
            if t.get_text() == BACKTEST_POINTER:
                t.set_text(backtest_note(result))
    return fig


def backtest_note(result: MonthResult) -> str:
    """Backtest numbers as a short monospace block for the risk map's side panel."""
    bt = result.backtest
    if bt is None or not len(bt):
        return "Backtest: not available."
    lines = [
        "How far to trust it",
        "(rolling-origin backtest)",
        "",
        f"{'model':<11}{'AUC':>6}{'Brier':>7}",
    ]
    for model, row in bt.iterrows():
        lines.append(f"{str(model):<11}{_f(row.get('auc'), 2):>6}{_f(row.get('brier'), 3):>7}")
    k = result.config.risk.top_k
    if "hits_top_k" in bt and "score" in bt.index:
        lines.append("")
        lines.append(f"score: {_f(bt.loc['score', 'hits_top_k'], 1)} of top {k}")
        lines.append("hit within the horizon")
    if "n_origins" in bt and "score" in bt.index:
        lines.append(f"over {int(bt.loc['score', 'n_origins'])} past weeks")
    return "\n".join(lines)


def _f(v: Any, digits: int) -> str:
    try:
        x = float(v)
    except (TypeError, ValueError):
        return "-"
    return "-" if not np.isfinite(x) else f"{x:.{digits}f}"


def weekly_by(result: MonthResult, key: pd.Series | None) -> dict[str, pd.DataFrame]:
    """Weekly cases and deaths summed per group (``key``: unit id -> group; None = region)."""
    w = result.weekly
    if w is None or not len(w):
        return {}
    df = w.assign(cases=w["cases"].astype("Float64"), deaths=w["deaths"].astype("Float64"))
    df["group"] = "region" if key is None else df["unit_id"].map(key)
    g = df.groupby(["group", "week"])
    summed = pd.DataFrame(
        {"cases": g["cases"].sum(min_count=1), "deaths": g["deaths"].sum(min_count=1)}
    )
    out = {}
    for name, part in summed.groupby(level=0, sort=True):
        out[str(name)] = part.droplevel(0).astype(float)
    return out


def with_nowcast(
    series: dict[str, pd.DataFrame], result: MonthResult, level: str
) -> dict[str, pd.DataFrame]:
    """Add the nowcast's ``estimate lower upper`` (estimated weeks only) to weekly series.

    Bars stay the reported counts; the estimate is where the totals really stand, with late
    reports and units that sent nothing added (never a silent unit taken as zero).
    """
    nc = result.nowcast
    if nc is None:
        return series
    part = nc[nc["level"].eq(level) & nc["status"].ne("reported")]
    out = {}
    for name, df in series.items():
        g = part[part["group"].eq(name)].set_index("week")[["estimate", "lower", "upper"]]
        out[name] = df.join(g, how="outer")
    return out


def _band_sentence(result: MonthResult) -> str:
    if result.nowcast is None:
        return ""
    return (
        " Diamonds: the nowcast estimate wherever the bar is incomplete, both the weeks still "
        "arriving (found per area, so they can reach further back than the shading) and "
        "earlier weeks in which some units sent nothing (late reports and silent units "
        "added; bars are what has arrived); the vertical bar through a diamond is its 90% "
        "interval for reporting delay: the week's final count will probably fall inside it, "
        "and the wider it is, the less is in yet."
    )


def _epi_figures(result: MonthResult, notes: maps.MapNotes) -> Iterator[FigurePlan]:
    delay = result.config.analysis.reporting_delay_weeks
    as_of = result.as_of
    week_days = 7
    reg = with_nowcast(weekly_by(result, None), result, "region")
    if not reg:
        return
    shaded = (
        f"the last {delay} complete weeks up to the as-of date (the configured reporting delay) "
        "are shaded and their bars drawn paler: reporting incomplete."
    ) + _band_sentence(result)
    # The full reading key is given once, under the whole-region curve; the others point to it.
    same = (
        "shading"
        + (" and diamonds" if result.nowcast is not None else "")
        + " as in the whole-region curve."
    )
    yield (
        "epi_region",
        lambda: maps.epi_curves(
            {notes.region or "Region": reg["region"]},
            notes,
            as_of=as_of,
            delay_weeks=delay,
            title="Weekly cases and deaths, whole region",
            week_days=week_days,
        ),
        f"Weekly reported cases (bars) and deaths (line) for the whole region; {shaded}",
    )
    units = result.units
    label = result.config.country_label
    by_country = with_nowcast(weekly_by(result, units["country"]), result, "country")
    countries = {label(c): w for c, w in by_country.items()}
    yield (
        "epi_countries",
        lambda: maps.epi_curves(
            countries,
            notes,
            as_of=as_of,
            delay_weeks=delay,
            title="Weekly cases and deaths by country",
            ncols=2,
            week_days=week_days,
        ),
        f"Weekly reported cases and deaths per country; {same}",
    )
    prov = province_of(units)
    names = {}
    if result.all_units is not None and "name" in result.all_units:
        names = result.all_units["name"].to_dict()
    per_prov = with_nowcast(weekly_by(result, prov), result, "province")
    country_of_prov = units.groupby(prov)["country"].first()
    for country in sorted(units["country"].unique()):
        ids = sorted(p for p in per_prov if country_of_prov.get(p) == country)
        if not ids:
            continue
        n_all = len(ids)
        ids = busiest(ids, per_prov, "cases")
        panels = {f"{names.get(p, p)} ({p})": per_prov[p] for p in ids}
        extra = (
            f", the {len(ids)} of its {n_all} provinces with the most reported cases (every "
            "unit's weekly counts are in tables/weekly.csv)"
            if len(ids) < n_all
            else ""
        )
        yield (
            f"epi_provinces_{country}",
            lambda panels=panels, country=country: maps.epi_curves(
                panels,
                notes,
                as_of=as_of,
                delay_weeks=delay,
                title=f"Weekly cases and deaths by province, {label(country)}",
                ncols=3,
                week_days=week_days,
            ),
            f"Weekly reported cases and deaths per province of {label(country)}{extra}; {same}",
        )
