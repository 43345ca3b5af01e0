"""Briefing prose for the report: how to read each section, the glossary, the priority list.

The report's sections (``_sections.py``) show the numbers; this module adds what an officer
needs to present them as they are: what each statistic is, its unit, what a label means,
which of two figures to quote, and for the priority list the ordering rule, the units of every
quantity, each district's depot and whether it is within reach.
"""

from __future__ import annotations

from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from ._html import PAGE_ROWS, esc, table_html

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

_PLURAL = {"box": "boxes"}


def _plural(unit: str) -> str:
    return _PLURAL.get(unit, unit + "s")


# --- "How to read this" -------------------------------------------------------------------------
def _how(*items: str) -> str:
    lis = "".join(f"<li>{i}</li>" for i in items)
    return f'<details class="how" open><summary>How to read this</summary><ul>{lis}</ul></details>'


def month_definition(result: MonthResult) -> str:
    """Say in one sentence which weeks make the month and which data the report reads."""
    period = pd.Period(result.month, freq="M")
    lag = result.config.region.as_of_lag_days
    return (
        f"<b>The month.</b> {period:%B %Y} is the epi weeks whose mid-week day (Thursday for "
        "ISO weeks) falls in the month, so every week belongs to exactly one month. The data "
        f"are the reports received by {result.as_of:%Y-%m-%d} (the month's last day plus "
        f"{lag} days for late reports); anything received later waits for the next run."
    )


def how_to_read(section: str, result: MonthResult) -> str:
    """Return the 'How to read this' box of one report section (HTML), or '' for none."""
    a = result.config.analysis
    r = result.config.risk
    if section == "rates":
        return _how(
            "<b>Attack rate</b>: cases in the month per 100,000 people living in the unit. "
            "<b>lower/upper</b>: the exact Poisson 95% interval; a wide interval means few cases.",
            "<b>Smoothed (EB)</b>: the rate pulled toward the regional rate in proportion to how "
            "little the unit's own population says (empirical Bayes); <b>spatial EB</b> pulls "
            "toward the neighbours instead. Quote the raw rate with its interval; use the "
            "smoothed rates to rank small units.",
            "<b>CFR</b>: deaths per case since the start, as a percentage, only where the "
            f"cumulative case count reaches {a.min_cases_cfr}.",
            _provinces_note(result),
        )
    if section == "hotspots":
        return _how(
            "<b>Cluster</b> (local Moran's I on rates adjusted for population): <b>High-High</b> "
            "(on the map: raised rate, raised-rate neighbours) a unit with a high rate among "
            "neighbours with high rates, a hotspot; "
            "<b>Low-Low</b> the reverse; <b>High-Low</b>/<b>Low-High</b> an outlier against its "
            f"neighbours. Shown only where <b>q</b> &le; {a.fdr} (the false discovery rate, "
            f"Benjamini-Hochberg over all units; pseudo p from {a.permutations:,} "
            "permutations).",
            "<b>local I</b>: positive when a unit resembles its neighbours, negative when it "
            "differs; it has no unit.",
            "<b>Gi* z / Gi* q / Gi* view</b>: a second, simpler view (Getis-Ord Gi*) on the "
            "smoothed rate: z above 0 means the unit and its neighbours together are higher "
            "than the region. <b>Gi* agrees</b> says whether it points the same way as the "
            "cluster label. The two can differ on the same row because they ask different "
            "questions of different inputs: local Moran's I asks whether the unit's "
            "population-adjusted rate resembles its neighbours', Gi* whether the unit and its "
            "neighbours summed together stand above the region's smoothed rate; each has its "
            "own false discovery correction, so near the threshold one can pass and the other "
            "not, and Gi* cannot show outliers (High-Low, Low-High) at all. Quote the cluster "
            "label; cite Gi* only where it agrees.",
        )
    if section == "spread":
        return _how(
            "<b>Speed of spread</b> in km per week, estimated two ways from the week of each "
            "unit's first case: a <b>trend surface</b> of arrival times and a <b>distance "
            "regression</b> (distance from the first units against arrival week). They answer "
            "slightly different questions; quote the one with the narrower interval and give "
            "its interval, and say both if they differ by more than their intervals allow. "
            + _speed_to_quote(result),
            "<b>Probable cross-border introduction</b>: a unit whose first case came while a "
            "neighbour across a border was already affected and no neighbour in its own country "
            "was. Evidence, not proof.",
        )
    if section == "risk":
        return _how(
            f"<b>Probability</b>: the model's chance that a still-unaffected unit next to the "
            f"outbreak reports its first case within {r.horizon_weeks} weeks, in percent. "
            "<b>Rank</b> 1 is the most likely.",
            "<b>Part</b> columns: each feature's contribution to the score on the model's "
            "complementary log-log scale (no unit). 0 is an average unit, +1 raises the chance "
            "noticeably, -1 lowers it; the parts add up to the score.",
            "<b>Cross-border</b> yes: an affected unit of another country lies within two "
            "steps (a neighbour, or a neighbour's neighbour), so exposure across a border "
            "exists, even when the strongest drivers are in the same country. "
            "<b>Driven by</b>: the affected neighbours that weigh most on the score.",
            "<b>Silent</b> yes: no report for "
            f"{r.silent_weeks} weeks or more; the unit may have undetected cases.",
            "The backtest (AUC, Brier, hits in the top k) says how this ranking did at past "
            "weeks against two simple baselines; a score that does not beat them should not be "
            "quoted.",
        )
    return ""


def _provinces_note(result: MonthResult) -> str:
    u = result.units
    whole = u[u["level"] == 1]
    if not len(whole):
        return "Every analysis unit is a district."
    countries = ", ".join(
        esc(result.config.country_label(c)) for c in sorted(whole["country"].unique())
    )
    ratio = whole["population"].median() / max(1.0, u.loc[u["level"] != 1, "population"].median())
    return (
        f"{countries} reports only whole provinces ({len(whole)} units, marked "
        "<b>(province)</b> in the priority list and outlined dashed on the maps); a median "
        f"province holds about {ratio:,.0f} times a district's population, so its rate is an "
        "average over a large area."
        if ratio > 1.5
        else f"{countries} reports only whole provinces ({len(whole)} units)."
    )


def _speed_to_quote(result: MonthResult) -> str:
    v = result.velocity
    if v is None or v.by_method is None or not len(v.by_method):
        return ""
    b = v.by_method.dropna(subset=["km_per_week", "lower", "upper"])
    if not len(b):
        return ""
    best = (b["upper"] - b["lower"]).idxmin()
    r = b.loc[best]
    others = b.drop(index=best)
    apart = any(o["lower"] > r["upper"] or o["upper"] < r["lower"] for _, o in others.iterrows())
    text = (
        f"This month: quote <b>{r['km_per_week']:.1f} km per week</b> ({r['lower']:.1f} to "
        f"{r['upper']:.1f}, {esc(str(best).replace('_', ' '))})"
    )
    if apart:
        text += (
            "; the other estimate lies outside this interval, so say the speed is uncertain "
            "and give both"
        )
    return text + "."


GLOSSARY = (
    ("Analysis unit", "a district, or a whole province where a country reports only provinces."),
    ("Attack rate", "cases per 100,000 people in the period."),
    ("CFR", "case fatality ratio: deaths per case, in percent."),
    ("Epi week", "a reporting week (Monday to Sunday for ISO weeks)."),
    (
        "Month",
        "the epi weeks whose mid-week day falls in the calendar month, as received by the "
        "as-of date.",
    ),
    ("q (BH)", "a p value corrected for testing every unit at once (Benjamini-Hochberg)."),
    ("High-High", "a hotspot: high rate, neighbours high too."),
    (
        "Hotspot",
        "a unit whose month rate resembles (or, for an outlier, differs from) its neighbours' "
        "beyond chance: local Moran's I, on the Hotspots map.",
    ),
    (
        "Emerging cluster",
        "neighbouring units whose cases in the last weeks exceed their usual share: a "
        "space-time scan, on the Emerging clusters map. Not the same as a hotspot.",
    ),
    (
        "Gi*",
        "Getis-Ord Gi*: a second view of hotspots, the unit and its neighbours summed.",
    ),
    (
        "Nowcast",
        "the estimate of what the latest weeks will show once late reports are in, with a "
        "guess for units that sent nothing; nowcast-adjusted figures use it.",
    ),
    ("Silent unit", "a unit that sent no report in the last weeks: not the same as no cases."),
    (
        "AUC, Brier, CRPS",
        "backtest scores: AUC ranks (0.5 coin toss, 1 perfect); Brier and CRPS are errors "
        "(lower is better).",
    ),
    (
        "Coverage, PIT-based coverage",
        "share of past outcomes inside a forecast's 90% interval. For counts that are usually "
        "0 it is above 90% even for a right forecast; the PIT-based figure takes that out: "
        "near 90% means intervals of the right width, below means too narrow.",
    ),
    ("Border risk", "the chance of a first case within the horizon, for unaffected units."),
    (
        "Planning cases",
        "population x planning attack rate: a case load to prepare for if the outbreak "
        "arrives (low / mid / high from the config's three attack rates).",
    ),
    ("Expected cases", "probability x planning cases: the need to expect, weighted by risk."),
    ("Buffer", "the extra share on top of each per-case quantity (0.2 = 20% more)."),
    ("Reach", "the straight-line distance a depot serves, from the config."),
    ("Covered", "the unit's centre lies within reach of its nearest open depot."),
)


def glossary_section() -> str:
    """Return the glossary as a report section (HTML)."""
    rows = "".join(f"<dt>{esc(k)}</dt><dd>{esc(v)}</dd>" for k, v in GLOSSARY)
    return f'<section id="glossary"><h2>Glossary</h2><dl class="gloss">{rows}</dl></section>'


# --- the priority list --------------------------------------------------------------------------
def item_units(result: MonthResult) -> dict[str, str]:
    """Return supply item -> its unit as the items file names it ('sachet', 'litre', ...)."""
    c = getattr(result.config, "supplies", None)
    if c is None or c.items is None:
        return {}
    from ..supplies.plan import SupplyPlan

    try:
        plan = SupplyPlan.from_config(c, base=result.config.base_dir)
    except Exception:  # the supplies step has already reported a bad file
        return {}
    return dict(zip(plan.items["item"], plan.items["unit"], strict=True))


def priority_frame(result: MonthResult) -> pd.DataFrame:
    """Return the priority list with expected cases, need rank, depot, distance, cover flag."""
    p = result.priorities.copy()
    p["expected_cases"] = p["probability"] * p["planning_cases"]
    p["need_rank"] = p["expected_cases"].rank(ascending=False, method="first").astype("Int64")
    level = result.units["level"].reindex(p.index)
    p["name"] = p["name"].where(level != 1, p["name"].astype(str) + " (province)")
    a = result.depot_assignment
    top_k = result.config.risk.top_k
    if a is not None:
        a = a.reindex(p.index)
        p["depot"] = a["depot_name"]
        p["distance_km"] = a["distance_km"]
        p["covered"] = a["covered"].astype(bool)
        p["flag"] = np.where(
            (p["need_rank"] <= top_k).to_numpy(dtype=bool) & ~p["covered"].to_numpy(dtype=bool),
            "LARGE NEED, OUT OF REACH",
            "",
        )
    return p


def priority_block(result: MonthResult) -> str:
    """Render the priority list with its ordering rule, column notes and out-of-reach flags."""
    p = priority_frame(result)
    units = item_units(result)
    plan = result.config.supplies.planning_attack_rate
    top_k = result.config.risk.top_k
    reach = result.config.supplies.reach_km
    notes = [
        "<b>Order:</b> by <b>rank</b>, the probability of a first case within "
        f"{result.config.risk.horizon_weeks} weeks (1 = most likely). <b>Need rank</b> orders "
        "the same districts by <b>expected cases</b> = probability x planning cases, the size "
        "of what is likely to be needed: use rank to decide where to look first and need rank "
        "to decide where to send most.",
        "<b>Planning cases</b> = population x planning attack rate "
        f"({_pct(plan, 'mid')} of the population); <b>low</b> and <b>high</b> use "
        f"{_pct(plan, 'low')} and {_pct(plan, 'high')}. They are cases to prepare for "
        "<i>if</i> the outbreak arrives, not a forecast.",
        "<b>Item columns</b> (unit in brackets): what to hold in the district if the outbreak "
        "arrives = planning cases x quantity per case x (1 + buffer), rounded up, not weighted "
        "by probability; severe-case items count only the config's severe share.",
    ]
    if "depot" in p:
        notes.append(
            f"<b>Depot</b>: the nearest open depot; <b>km</b>: straight-line distance to it; "
            f"<b>covered</b>: yes when within the {reach:g} km reach."
        )
    body = '<ul class="note">' + "".join(f"<li>{n}</li>" for n in notes) + "</ul>"
    flagged = p[p.get("flag", pd.Series("", p.index)) != ""]
    if len(flagged):
        lines = "".join(
            f"<li><b>{esc(row['name'])}</b> ({esc(uid)}): {row['expected_cases']:,.0f} expected "
            f"cases (need rank {int(row['need_rank'])}, {row['planning_cases']:,.0f} planning "
            f"cases), {row['distance_km']:,.0f} km from the nearest open depot "
            f"({esc(row['depot'])}).</li>"
            for uid, row in flagged.sort_values("need_rank").iterrows()
        )
        body += (
            f'<div class="caution"><b>Outside every depot\'s reach among the {top_k} largest '
            f"expected needs ({len(flagged)}):</b><ul>{lines}</ul>Plan another route or site "
            "for these.</div>"
        )
    cols = {
        "rank": "rank",
        "need_rank": "need rank",
        "name": "unit",
        "country": "country",
        "probability": "probability",
        "population": "population",
        "planning_cases_low": "planning cases low",
        "planning_cases": "planning cases",
        "planning_cases_high": "planning cases high",
        "expected_cases": "expected cases",
        "depot": "depot",
        "distance_km": "km to depot",
        "covered": "covered",
        "flag": "flag",
    }
    cols.update({i: f"{i} ({_plural(u)})" for i, u in units.items() if i in p.columns})
    body += table_html(
        p,
        cols,
        index="unit_id",
        kinds={
            "probability": "pct",
            "population": "int",
            "planning_cases": "int",
            "planning_cases_low": "int",
            "planning_cases_high": "int",
            "expected_cases": "int",
            "distance_km": "int",
        },
        limit=PAGE_ROWS,  # the ranked list's head; every row is in tables/priorities.csv
    )
    return body


AFFECTED_ROWS = 30  # districts with cases shown in the report, largest upper total first


def affected_block(result: MonthResult) -> str:
    """Render supply quantities for districts with cases, sized from the forecast."""
    a = result.supplies_affected
    if a is None:
        return ""
    q = a.attrs.get("quantile") or result.config.supplies.forecast_quantile
    weeks = a.attrs.get("weeks") or 4
    units = item_units(result)
    p = a.copy()
    level = result.units["level"].reindex(p.index) if "level" in result.units else None
    if level is not None:
        p["name"] = p["name"].where(level != 1, p["name"].astype(str) + " (province)")
    body = (
        '<ul class="note"><li>For the districts that have reported cases (the priority list '
        "covers those that have not yet). <b>Forecast cases</b>: the mean of the forecast "
        f"case total over the next {weeks} weeks; <b>upper</b>: the total that "
        f"{q:.0%} of the simulated futures stay at or below (the config's forecast_quantile).</li>"
        "<li><b>Item columns</b> (unit in brackets) = the upper total x quantity per case x "
        "(1 + buffer), rounded up; severe-case items count only the severe share. This is what "
        f"the district would use over {weeks} weeks if cases run high: compare it with the stock "
        "it holds. Upper totals are per district; summed over districts they overstate a "
        "regional upper total (not every district runs high at once).</li>"
        "<li>The forecast assumes no change in response: vaccination, water and sanitation "
        "work or changes in reporting are not foreseen, and the weeks it starts from are "
        "nowcast estimates. A district whose forecast start is unknown shows no quantity.</li></ul>"
    )
    cols = {
        "name": "unit",
        "country": "country",
        "population": "population",
        "forecast_cases": f"forecast cases ({weeks} weeks)",
        "forecast_cases_upper": f"upper ({q:.0%})",
    }
    cols.update({i: f"{i} ({_plural(u)})" for i, u in units.items() if i in p.columns})
    return (
        body
        + table_html(
            p,
            cols,
            index="unit_id",
            kinds={"population": "int", "forecast_cases": "int", "forecast_cases_upper": "int"},
            limit=AFFECTED_ROWS,
            empty="No district with cases has a forecast.",
        )
        + (
            f'<p class="note">All {len(p)} districts: tables/supplies_affected.csv.</p>'
            if len(p) > AFFECTED_ROWS
            else ""
        )
    )


def _pct(plan: Any, key: str) -> str:
    value = plan.get(key) if isinstance(plan, dict) else getattr(plan, key, None)
    return "&ndash;" if value is None else f"{float(value):.1%}"


def depot_sentence(result: MonthResult) -> str:
    """Say why an existing depot covers none of this month's candidates (HTML, or '')."""
    d = result.depots
    if d is None or result.priorities is None or "existing" not in d:
        return ""
    idle = d[d["existing"].astype(bool) & (d["covered_units"] == 0)]
    if not len(idle):
        return ""
    from ..supplies.depots import assign_depots

    parts = []
    for site, row in idle.iterrows():
        alone = assign_depots(result.priorities, d.loc[[site]], units=result.units)
        near = int(alone["covered"].sum())
        why = (
            f"no candidate district lies within its {row['reach_km']:g} km reach (the nearest "
            f"is {alone['distance_km'].min():,.0f} km away)"
            if near == 0
            else f"the {near} candidate(s) within its reach are nearer to another open depot"
        )
        parts.append(f"<li><b>{esc(row['name'])}</b> ({esc(site)}): {why}.</li>")
    return (
        f'<p class="note">Existing depots that serve none of this month\'s candidates '
        f'({len(idle)} of {int(d["existing"].astype(bool).sum())}):</p><ul class="note">'
        + "".join(parts)
        + "</ul>"
    )


def with_units(table: pd.DataFrame, units: dict[str, str]) -> pd.DataFrame:
    """Rename item columns (and their ``_risk_weighted`` twins) to carry their unit."""
    ren = {}
    for item, unit in units.items():
        ren[item] = f"{item} ({_plural(unit)}, if it arrives)"
        ren[f"{item}_risk_weighted"] = f"{item} ({_plural(unit)}, expected)"
    ren["planning_cases"] = "planning cases"
    ren["expected_cases"] = "expected cases"
    return table.rename(columns=ren)
