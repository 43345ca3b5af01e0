"""The report page's sections, one function each, from a MonthResult and its figures."""

from __future__ import annotations

from collections.abc import Mapping
from typing import TYPE_CHECKING, Any

import pandas as pd

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult
from ._briefing import (
    affected_block,
    depot_sentence,
    how_to_read,
    item_units,
    priority_block,
    with_units,
)
from ._html import (
    CAUTIONS,
    PAGE_ROWS,
    _absent,
    _by_country_label,
    _figure,
    _names,
    _section,
    esc,
    table_html,
)
from ._nowcastsection import adjusted_rates_table


def _rates_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    # How much of the month is in is said once, in the headline; the adjusted table is here.
    body = how_to_read("rates", result) + _absent(result, "rates")
    body += _figure(figures, "attack_rate") + _figure(figures, "attack_rate_months")
    body += adjusted_rates_table(result)
    if result.rates_by_area is not None:
        a = result.rates_by_area
        cols = {
            "name": "area",
            "cases": "cases",
            "population": "population",
            "rate": "rate /100,000",
            "lower": "lower",
            "upper": "upper",
            "units_reported": "units reporting",
            "units": "units",
        }
        for level, label in (("region", "Whole region"), ("country", "Countries")):
            part = a[(a["level"] == level)]
            piv = part[part["window"] == "month"].set_index("group")
            body += f"<h3>{esc(label)}: the month</h3>" + table_html(
                piv, cols, kinds={"population": "int", "cases": "int"}
            )
        prov = a[(a["level"] == "province") & (a["window"] == "month")].set_index("group")
        body += (
            '<h3>Provinces: the month</h3><div class="scroll">'
            + table_html(
                prov.sort_values("rate", ascending=False),
                cols,
                index="province",
                kinds={"population": "int", "cases": "int"},
                limit=PAGE_ROWS,  # the highest rates; every row is in tables/rates_by_area.csv
            )
            + "</div>"
        )
    if result.rates is not None:
        r = result.rates.sort_values("month_rate", ascending=False)
        if result.month_adjusted is not None:
            r = r.join(result.month_adjusted[["adjusted_rate"]].add_prefix("month_"))
        cols = {
            "name": "unit",
            "country": "country",
            "population": "population",
            "month_cases": "cases",
            "month_rate": "rate",
            "month_lower": "lower",
            "month_upper": "upper",
            "month_adjusted_rate": "rate nowcast-adjusted",
            "month_rate_eb": "smoothed (EB)",
            "month_rate_seb": "smoothed (spatial EB)",
            "cumulative_rate": "since start",
            "cfr": "CFR (cumulative)",
            "cfr_too_few": "too few for CFR",
        }
        body += (
            '<h3>Units with the highest attack rate this month</h3><p class="note">'
            "Raw rates per 100,000 with exact Poisson limits, and empirical Bayes smoothed "
            "rates beside them. The limits cover Poisson noise only: outbreak counts vary "
            "more than that from week to week, so the true uncertainty is wider. Where the "
            "raw and smoothed "
            "rates differ much, the raw rate rests on a small population.</p>"
            + table_html(
                r, cols, index="unit_id", limit=25, kinds={"population": "int", "cfr": "pct"}
            )
        )
    return _section("Attack rates", body, "rates")


def _epi_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    # The forecast fan charts (epi_forecast_*) belong to "The next four weeks".
    names = [n for n in figures if n.startswith("epi_") and not n.startswith("epi_forecast")]
    body = "".join(_figure(figures, n) for n in names)
    if not names:
        body = '<p class="note">No weekly counts to draw.</p>'
    return _section("Epi curves", body, "epi")


def _hotspot_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    body = how_to_read("hotspots", result) + _absent(result, "hotspots")
    body += _figure(figures, "hotspots")
    hs = result.hotspots
    if hs is not None:
        sig = hs[hs["label"].isin(result.cluster_significant)]
        sig = _names(result, sig)
        if result.rates is not None:
            sig = sig.join(result.rates[["month_rate"]], how="left")
        cols = {
            "name": "unit",
            "country": "country",
            "label": "cluster",
            "month_rate": "rate /100,000",
            "I": "local I",
            "p": "pseudo p",
            "q": "q (BH)",
        }
        for c, head in (("gi_z", "Gi* z"), ("gi_q", "Gi* q"), ("gi_label", "Gi* view")):
            if c in sig:
                cols[c] = head
        if "gi_label" in sig:
            sig = sig.assign(gi_agrees=gi_agrees(sig["label"], sig["gi_label"]))
            cols["gi_agrees"] = "Gi* agrees"
        body += (
            f"<h3>Significant units ({len(sig)})</h3>"
            + '<div class="scroll">'
            + table_html(
                sig.sort_values(["label", "q"]),
                cols,
                index="unit_id",
                kinds={"p": "p", "q": "p", "I": "p", "gi_q": "p"},
                empty="No unit is significant at this false discovery rate.",
            )
            + "</div>"
        )
    return _section("Hotspots", body, "hotspots")


def _method_name(method: str) -> str:
    """Return the speed method as the prose names it ("trend surface")."""
    return str(method).replace("_", " ")


def gi_agrees(label: pd.Series, gi_label: pd.Series) -> pd.Series:
    """Say per unit whether the Gi* view agrees with the local Moran's I cluster label.

    High-High agrees with a Gi* hot spot, Low-Low with a cold spot. High-Low and Low-High are
    outliers, which Gi* (the unit and its neighbours summed together) cannot show: for them the
    answer is "not comparable", never a "no" that would read as a contradiction.
    """
    from ..stats.autocorrelation import COLD, HOT

    match = {"High-High": HOT, "Low-Low": COLD}
    want = label.astype(object).map(match)
    out = pd.Series("not comparable (outlier)", index=label.index, dtype=object)
    cl = want.notna()
    out[cl] = (gi_label[cl].astype(object) == want[cl]).map({True: "yes", False: "no"})
    return out


def _spread_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    body = how_to_read("spread", result) + _absent(result, "spread") + _figure(figures, "arrival")
    if result.velocity is not None:
        v = result.velocity
        body += "<h3>Speed of spread</h3>" + table_html(
            v.by_method.rename(index=_method_name),
            {
                "km_per_week": "km per week",
                "lower": "lower",
                "upper": "upper",
                "n_units": "units used",
                "note": "note",
            },
            index="method",
        )
        if v.by_group is not None and len(v.by_group):
            by = v.by_group.reset_index(level="group").rename(columns={"group": "country"})
            by = by.rename(index=_method_name)
            by["country"] = by["country"].map(result.config.country_label)
            body += (
                "<h3>Speed of spread by country</h3>"
                + table_html(
                    by,
                    {
                        "country": "country",
                        "km_per_week": "km per week",
                        "lower": "lower",
                        "upper": "upper",
                        "n_units": "units used",
                        "note": "note",
                    },
                    index="method",
                )
                + '<p class="note">Few units give wide intervals: read the limits.</p>'
            )
    if result.introductions_by_border is not None and len(result.introductions_by_border):
        body += (
            "<h3>Probable introductions per border</h3>"
            + table_html(result.introductions_by_border)
            + '<p class="note">A unit with sources in two countries counts under each border, '
            "so the rows can add up to more than the introductions listed below.</p>"
        )
    if result.introductions is not None:
        intro = result.introductions
        body += (
            f'<h3>Probable cross-border introductions ({len(intro)})</h3><p class="note">'
            "Units whose first case came when a neighbour across a border was already "
            "affected and no neighbour in their own country was: evidence, not proof.</p>"
            + '<div class="scroll">'
            + table_html(_names(result, intro), index="unit_id")
            + "</div>"
        )
    return _section("Spread", body, "spread")


def _risk_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    body = how_to_read("risk", result) + _absent(result, "border risk", "backtest")
    side = "<h3>How far to trust it</h3>"
    bt = result.backtest
    if bt is not None:
        side += (
            "<p>Rolling-origin backtest: at past weeks the model was fitted on what was "
            "known then and its ranking compared with what happened next, beside two "
            "simple baselines.</p>"
            + table_html(
                bt,
                {
                    "auc": "AUC",
                    "brier": "Brier",
                    "hits_top_k": "hits in top k",
                    "n_origins": "origins",
                },
                index="model",
                kinds={"auc": "p", "brier": "p", "n_origins": "int"},
            )
        )
        side += (
            f'<p class="note">AUC 0.5 is a coin toss, 1 a perfect ranking; lower Brier '
            f"is better; k = {result.config.risk.top_k}.</p>"
        )
    else:
        side += '<p class="absent">The backtest did not run.</p>'
    if result.risk is not None and result.risk.attrs.get("model"):
        kind = result.risk.attrs["model"]
        detail = result.risk.attrs.get("note") or ""
        side += (
            f'<p class="note">This month\'s score: {esc(kind)} model'
            + (f" ({esc(detail)})" if detail else "")
            + ".</p>"
        )
    body += f'{_figure(figures, "border_risk")}<div class="side">{side}</div>'

    if result.risk is not None:
        r = _names(result, result.risk)
        cols = {
            "rank": "rank",
            "name": "unit",
            "country": "country",
            "probability": "probability",
            "cross_border": "cross-border",
            "silent": "silent",
            "drivers": "driven by",
        }
        cols.update(
            {
                c: "part: " + c.removeprefix("part_").replace("_", " ")
                for c in r.columns
                if c.startswith("part_")
            }
        )
        body += (
            '<h3>Candidates by risk</h3><p class="note">Each score is shown with its '
            "parts (contribution to the linear predictor). Silent units sent no report "
            "lately: they may have undetected cases and are not safely unaffected.</p>"
            + '<div class="scroll">'
            + table_html(r, cols, index="unit_id", kinds={"probability": "pct"}, limit=PAGE_ROWS)
            + "</div>"
        )
    return _section("Border risk", body, "risk")


def _supplies_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    body = _absent(result, "supplies")
    body += (
        '<p class="caution"><b>Example planning values, not guidance.</b> Quantities come '
        "from the planning attack rates and per-case items in the config; they are the "
        "user's numbers, not this analysis's."
        + (
            f" The config says: &ldquo;{esc(result.supply_note.strip())}&rdquo;"
            if result.supply_note
            else ""
        )
        + "</p>"
    )
    body += _figure(figures, "priorities")
    if result.priorities is not None:
        body += "<h3>Priority list</h3>" + priority_block(result)
    if result.supplies_affected is not None:
        body += "<h3>Districts with cases: the next four weeks</h3>" + affected_block(result)
    if result.depots is not None:
        d = pd.DataFrame(result.depots.drop(columns="geometry"))
        body += (
            "<h3>Depots</h3>"
            + table_html(
                d,
                {
                    "name": "depot",
                    "existing": "existing",
                    "covered_units": "units covered",
                    "covered_population": "population covered",
                    "covered_weight": "risk-weighted population",
                },
                index="site",
                kinds={"covered_population": "int", "covered_weight": "int"},
            )
            + depot_sentence(result)
        )
    if result.supply_totals is not None:
        body += (
            '<h3>Totals per country</h3><p class="note">"If it arrives": the sum of the '
            'districts\' quantities; "expected": each quantity times its probability, summed '
            "(what to stock when not every district will be reached).</p>"
        ) + table_html(
            with_units(_by_country_label(result, result.supply_totals), item_units(result)),
            index="country",
        )
    if result.supply_totals_by_depot is not None:
        by_depot = result.supply_totals_by_depot
        if result.depots is not None and "name" in result.depots:
            # The depot's name as in the depot table and the priority list, with its site code.
            names = result.depots["name"].astype(str)
            by_depot = by_depot.rename(
                index=lambda s: f"{names[s]} ({s})" if s in names.index else s
            )
        body += (
            "<h3>Totals per depot catchment</h3><p>Each candidate district counted at its nearest "
            "open depot, whether or not it lies within reach.</p>"
            + table_html(with_units(by_depot, item_units(result)), index="depot")
        )
    return _section("Pre-positioning", body, "supplies")


def _quality_section(result: MonthResult) -> str:
    body = ""
    rj = result.rejects
    if rj is not None and len(rj):
        summary = (
            rj.assign(reason=rj["reason"].astype(str))
            .groupby(["source", "reason"])
            .size()
            .rename("rows")
            .reset_index()
        )
        body += (
            f'<h3>Rejected rows ({len(rj):,})</h3><p class="note">Every input row is '
            "used or listed in rejects.csv with its reason.</p>"
            + table_html(summary, {"source": "source", "reason": "reason", "rows": "rows"})
        )
    else:
        body += '<h3>Rejected rows</h3><p class="note">None.</p>'
    m = result.matches
    if isinstance(m, pd.DataFrame) and len(m) and {"source", "method"} <= set(m.columns):
        method = m["method"].astype(object).where(m["method"].notna(), "")
        m = m.assign(method=method.replace("", "not matched (rows rejected)"))
        how = m.groupby(["source", "method"]).agg(
            names=("method", "size"),
            rows=("rows", "sum") if "rows" in m else ("method", "size"),
        )
        body += (
            '<h3>How place names were matched</h3><p class="note">In the fixed order: code, '
            "exact name, normalised name, alias table, then fuzzy match (only when clear).</p>"
            + table_html(
                how.reset_index(),
                {"source": "source", "method": "method", "names": "place names", "rows": "rows"},
            )
        )
        fuzzy = m[m["method"].astype(str).str.contains("fuzzy")]
        if len(fuzzy):
            body += (
                f'<h3>Fuzzy matches to confirm ({len(fuzzy)})</h3><p class="note">Accepted '
                "automatically; confirm each into the alias table.</p>"
                + table_html(
                    fuzzy,
                    {
                        "source": "source",
                        "place": "name as sent",
                        "unit_id": "matched to",
                        "score": "score",
                    },
                )
            )
    acc = result.accounting
    if isinstance(acc, pd.DataFrame):
        body += "<h3>Row accounting</h3>" + table_html(acc, index=acc.index.name or "source")
    by_country = result.completeness_by_country
    if isinstance(by_country, pd.DataFrame) and len(by_country):
        body += (
            '<h3>Reporting completeness by country</h3><p class="note">Share of the expected '
            "unit-weeks that were reported (a reported zero counts; a missing week does not); "
            "gap weeks are weeks with no report at all from the country.</p>"
            + table_html(
                _by_country_label(result, by_country), index="country", kinds={"share": "pct"}
            )
        )
    comp = result.completeness
    if isinstance(comp, pd.DataFrame) and len(comp) and "share" in comp:
        low = comp[comp["share"] < 0.95].sort_values("share")
        body += (
            f"<h3>Units reporting less than 95% of weeks ({len(low)})</h3>"
            + '<div class="scroll">'
            + table_html(
                low,
                index=comp.index.name or "unit",
                kinds={"share": "pct"},
                empty="Every unit reported at least 95% of its weeks.",
            )
            + '</div><p class="note">Every unit\'s completeness is in '
            "tables/completeness.csv.</p>"
        )
    body += left_out_block(getattr(result.graph, "left_out", None))
    if result.graph is not None and hasattr(result.graph, "short_joins"):
        body += short_joins_block(result.graph.short_joins(result.config.graph.tolerance_m))
    if result.absent:
        body += (
            "<h3>Steps not computed</h3><ul>"
            + "".join(f"<li>{esc(k)}: {esc(v)}</li>" for k, v in result.absent.items())
            + "</ul>"
        )
    if result.warnings:
        body += (
            "<h3>Warnings</h3><ul>"
            + "".join(f"<li>{esc(w)}</li>" for w in result.warnings)
            + "</ul>"
        )
    return _section("Data received", body, "data")


LEFT_OUT_ADVICE = (
    "These pairs of units from different boundary files or countries come within the gap "
    "tolerance but were not made neighbours: they come close only at a corner, or face each "
    "other along less than the configured minimum. If a pair really borders (or people cross "
    "between them), add it as a row of the links table ([graph] links) and run again."
)


def left_out_block(left: pd.DataFrame | None) -> str:
    """Render the data section's list of near pairs the graph left out, and what to do."""
    if left is None:
        return ""
    if not len(left):
        return (
            '<h3>Border pairs left out</h3><p class="note">None: every pair of units from '
            "different files within the gap tolerance is a neighbour.</p>"
        )
    return _pairs_block("Border pairs left out", LEFT_OUT_ADVICE, left)


SHORT_JOINS_ADVICE = (
    "These pairs from different boundary files or countries were made neighbours across a "
    "gap, but face each other along less than the gap tolerance: a corner where a border "
    "meets a country missing from the data looks like this. If a pair does not really "
    "border, raise [graph] min_shared_m above its facing length and run again."
)


def short_joins_block(short: pd.DataFrame | None) -> str:
    """Render the data section's list of pairs joined on a short facing length (if any)."""
    if short is None or not len(short):
        return ""
    return _pairs_block("Border pairs joined on a short facing length", SHORT_JOINS_ADVICE, short)


def _pairs_block(title: str, advice: str, pairs: pd.DataFrame) -> str:
    """Render a heading with the count, the advice and the pairs (``LEFT_OUT_COLUMNS`` or some)."""
    cols = {
        "unit_a": "unit",
        "country_a": "country",
        "unit_b": "unit",
        "country_b": "country",
        "gap_m": "gap (m)",
        "near_shared_m": "facing length (m)",
        "reason": "why left out",
    }
    cols = {k: v for k, v in cols.items() if k in pairs.columns}
    return (
        f'<h3>{esc(title)} ({len(pairs)})</h3><p class="note">{esc(advice)}</p>'
        + '<div class="scroll">'
        + table_html(pairs.round({"gap_m": 0, "near_shared_m": 0}), cols)
        + "</div>"
    )


def _cautions() -> str:
    items = "".join(f"<li><b>{esc(a)}</b> {esc(b)}</li>" for a, b in CAUTIONS)
    return _section("Cautions", f"<ul>{items}</ul>", "cautions")
