"""report.html: one self-contained page for the month (inline CSS, images as data URIs).

No script, no font or style sheet from elsewhere, no link that leaves the page: the file can
be mailed or opened offline. Every string that comes from input data (unit names, sources,
reasons, config values) goes through :func:`html.escape`; numbers are formatted here.
"""

from __future__ import annotations

import base64
import html
from collections.abc import Mapping, Sequence
from datetime import UTC, datetime
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd

from . import __version__
from .maps import CAUTION_LINE

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

CAUTIONS = (
    (
        "Decision support, not a diagnosis.",
        "These figures help a team decide where to look and what to prepare. They do not say "
        "what is happening in any district.",
    ),
    (
        "Reporting is incomplete and delayed.",
        "The last weeks always look lower than they will once late reports arrive; districts "
        "that sent nothing are shown as not reported, never as zero.",
    ),
    (
        "Small numbers are unstable.",
        "A few cases in a small population give a high rate with a wide interval. Read the "
        "limits and the smoothed rates beside the raw ones.",
    ),
    (
        "Defer to national authorities and field epidemiologists.",
        "They know what these tables cannot: testing, access, local events and the quality of "
        "each report.",
    ),
)

_CSS = """
body{font-family:"DejaVu Sans",Verdana,sans-serif;margin:0;background:#fbfaf6;color:#23211d}
main{max-width:1100px;margin:0 auto;padding:1.2rem 1.6rem 3rem}
header.top{border-bottom:3px solid #5c1e2a;padding-bottom:.6rem;margin-bottom:1rem}
h1{font-size:1.55rem;margin:.2rem 0} h2{font-size:1.2rem;margin:2rem 0 .6rem;
border-bottom:1px solid #d8d2c2;padding-bottom:.25rem} h3{font-size:1rem;margin:1.2rem 0 .4rem}
.sub{color:#5a564c;font-size:.92rem}
.caution{background:#f5ebe3;border-left:5px solid #9b3e2d;padding:.55rem .9rem;margin:.8rem 0;
font-size:.9rem}
.tiles{display:grid;grid-template-columns:repeat(auto-fill,minmax(165px,1fr));gap:.6rem}
.tile{background:#fff;border:1px solid #e0dacb;border-radius:4px;padding:.55rem .7rem}
.tile .v{font-size:1.35rem;font-weight:bold;color:#3d1722}.tile .k{font-size:.78rem;
color:#5a564c}.tile .d{font-size:.72rem;color:#77736a}
figure{margin:.8rem 0;background:#fff;border:1px solid #e0dacb;padding:.4rem}
figure img{width:100%;height:auto;display:block} figcaption{font-size:.82rem;color:#4a4740;
padding:.3rem .2rem}
.pair{display:grid;grid-template-columns:minmax(0,2.2fr) minmax(0,1fr);gap:1rem;
align-items:start} .side{background:#fff;border:1px solid #e0dacb;padding:.6rem .8rem;
font-size:.86rem}
table{border-collapse:collapse;font-size:.8rem;margin:.4rem 0;background:#fff;display:block;
max-width:100%;overflow-x:auto}
th,td{border:1px solid #e0dacb;padding:.2rem .45rem;text-align:left;vertical-align:top}
td:first-child{white-space:nowrap}
th{background:#f0ece1} td.n{text-align:right;font-variant-numeric:tabular-nums}
.scroll{max-height:30rem;overflow:auto}
.note{font-size:.82rem;color:#5a564c} .absent{color:#8a3b1f}
footer{margin-top:2.5rem;font-size:.75rem;color:#77736a;border-top:1px solid #d8d2c2;
padding-top:.5rem}
@media print{.scroll{max-height:none;overflow:visible} body{background:#fff}}
"""


def esc(value: Any) -> str:
    """Escape any value for HTML text or attribute context (quotes included)."""
    if value is None or value is pd.NA or value is pd.NaT:
        return ""
    if isinstance(value, float) and not np.isfinite(value):
        return ""
    return html.escape(str(value), quote=True)


def _fmt(value: Any, kind: str = "") -> str:
    """Format a number for a table cell (already safe text); strings are escaped."""
    if value is None or value is pd.NA or value is pd.NaT:
        return "&ndash;"
    if isinstance(value, (bool, np.bool_)):
        return "yes" if value else "no"
    if isinstance(value, pd.Timestamp):
        return esc(f"{value:%Y-%m-%d}")
    if isinstance(value, (int, np.integer)):
        return f"{int(value):,}"
    if isinstance(value, (float, np.floating)):
        if not np.isfinite(value):
            return "&ndash;"
        if kind == "pct":
            return f"{value:.1%}"
        if kind == "p":
            return f"{value:.3f}"
        if kind == "int":
            return f"{value:,.0f}"
        if abs(value) >= 100:
            return f"{value:,.0f}"
        if abs(value) >= 10:
            return f"{value:.1f}"
        return f"{value:.2f}" if abs(value) >= 1 or value == 0 else f"{value:.2g}"
    if isinstance(value, (list, tuple, set, np.ndarray)):
        return esc("; ".join(map(str, value)))
    return esc(value)


def table_html(
    df: pd.DataFrame | None,
    columns: Mapping[str, str] | None = None,
    *,
    kinds: Mapping[str, str] | None = None,
    index: str | None = None,
    limit: int | None = None,
    empty: str = "None.",
) -> str:
    """Render ``df`` as an HTML table with every cell escaped.

    Parameters
    ----------
    df : pandas.DataFrame
    columns : Mapping, optional
        Column -> header text, in display order (default: every column, as named).
    kinds : Mapping, optional
        Column -> number format ("pct", "p", "int").
    index : str, optional
        Header for the index, shown as the first column when given.
    limit : int, optional
        Show the first rows only (and say how many were left out).

    Returns
    -------
    str

    Examples
    --------
    >>> table_html(pd.DataFrame({"name": ["<script>"]}))
    '<table><thead><tr><th>name</th></tr></thead><tbody><tr><td>&lt;script&gt;</td></tr></tbody></table>'
    """
    if df is None or len(df) == 0:
        return f'<p class="note">{esc(empty)}</p>'
    columns = (
        dict(columns) if columns is not None else {c: str(c).replace("_", " ") for c in df.columns}
    )
    columns = {c: h for c, h in columns.items() if c in df.columns}
    kinds = kinds or {}
    shown = df if limit is None else df.head(limit)
    head = "".join(
        f"<th>{esc(h)}</th>" for h in ([index] if index else []) + list(columns.values())
    )
    rows = []
    for idx, row in shown.iterrows():
        cells = [f"<td>{esc(idx)}</td>"] if index else []
        for c in columns:
            v = row[c]
            num = isinstance(v, (int, float, np.integer, np.floating)) and not isinstance(
                v, (bool, np.bool_)
            )
            cls = ' class="n"' if num else ""
            cells.append(f"<td{cls}>{_fmt(v, kinds.get(c, ''))}</td>")
        rows.append("<tr>" + "".join(cells) + "</tr>")
    out = f"<table><thead><tr>{head}</tr></thead><tbody>{''.join(rows)}</tbody></table>"
    if limit is not None and len(df) > limit:
        out += f'<p class="note">First {limit} of {len(df):,} rows; all are in the CSV.</p>'
    return out


def _img(path: Path, alt: str) -> str:
    data = base64.b64encode(Path(path).read_bytes()).decode("ascii")
    return f'<img alt="{esc(alt)}" src="data:image/png;base64,{data}">'


def _figure(figures: Mapping[str, Any], name: str) -> str:
    f = figures.get(name)
    if f is None:
        return ""
    return (
        f'<figure id="fig-{esc(name)}">{_img(f["path"], f["caption"])}'
        f"<figcaption>{esc(f['caption'])}</figcaption></figure>"
    )


def _tile(value: str, key: str, detail: str = "") -> str:
    d = f'<div class="d">{detail}</div>' if detail else ""
    return f'<div class="tile"><div class="v">{value}</div><div class="k">{esc(key)}</div>{d}</div>'


def _num(v: Any, kind: str = "") -> str:
    return "not computed" if v is None else _fmt(v, kind)


def _headline(result: MonthResult) -> str:
    h = result.headline
    month = f"{pd.Period(result.month, freq='M'):%B %Y}"
    rate_ci = ""
    if h["rate_lower"] is not None:
        rate_ci = f"95% CI {_fmt(h['rate_lower'])} to {_fmt(h['rate_upper'])}"
    moran = (
        "" if h["global_moran_p"] is None else f"permutation p = {_fmt(h['global_moran_p'], 'p')}"
    )
    horizon = result.config.risk.horizon_weeks
    tiles = [
        _tile(_num(h["cases"], "int"), f"cases reported, {month}"),
        _tile(_num(h["deaths"], "int"), f"deaths reported, {month}"),
        _tile(_num(h["rate"]), "attack rate per 100,000, whole region", rate_ci),
        _tile(
            _num(h["newly_affected"], "int"),
            "units with a first case this month",
            "" if h["affected"] is None else f"{h['affected']:,} of {h['units']:,} affected so far",
        ),
        _tile(_num(h["global_moran_i"], "p"), "global Moran's I (rate-adjusted)", moran),
        _tile(
            _num(h["expected_new_units"]),
            f"expected newly affected units, next {horizon} weeks",
            ""
            if h["candidates"] is None
            else f"sum of probabilities over {h['candidates']:,} candidates",
        ),
    ]
    return '<div class="tiles">' + "".join(tiles) + "</div>"


def _section(title: str, body: str, ident: str) -> str:
    return f'<section id="{esc(ident)}"><h2>{esc(title)}</h2>{body}</section>'


def _absent(result: MonthResult, *steps: str) -> str:
    msgs = [
        f'<p class="absent">Not computed: {esc(s)} ({esc(result.absent[s])}).</p>'
        for s in steps
        if s in result.absent
    ]
    return "".join(msgs)


def _by_country_label(result: MonthResult, df: pd.DataFrame) -> pd.DataFrame:
    """Index a country table by "Name (CODE)" where the config names the country."""
    return df.rename(index=lambda c: result.config.country_label(c))


def _names(result: MonthResult, df: pd.DataFrame) -> pd.DataFrame:
    add = [c for c in ("name", "country") if c not in df.columns]
    if not add:
        return df
    return df.join(result.units[add], how="left")


def _rates_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    body = _absent(result, "rates")
    body += _figure(figures, "attack_rate") + _figure(figures, "attack_rate_months")
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
            )
            + "</div>"
        )
    if result.rates is not None:
        r = result.rates.sort_values("month_rate", ascending=False)
        cols = {
            "name": "unit",
            "country": "country",
            "population": "population",
            "month_cases": "cases",
            "month_rate": "rate",
            "month_lower": "lower",
            "month_upper": "upper",
            "month_rate_eb": "smoothed (EB)",
            "month_rate_seb": "smoothed (spatial EB)",
            "cumulative_rate": "since start",
            "cfr": "CFR (cumulative)",
            "cfr_too_few": "too few for CFR",
        }
        body += (
            '<h3>Units with the highest attack rate this month</h3><p class="note">'
            "Raw rates per 100,000 with exact Poisson limits, and empirical Bayes smoothed "
            "rates beside them: where the two differ much, the raw rate rests on a small "
            "population.</p>"
            + table_html(
                r, cols, index="unit_id", limit=25, kinds={"population": "int", "cfr": "pct"}
            )
        )
    return _section("Attack rates", body, "rates")


def _epi_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    names = [n for n in figures if n.startswith("epi_")]
    body = "".join(_figure(figures, n) for n in names)
    if not names:
        body = '<p class="note">No weekly counts to draw.</p>'
    return _section("Epi curves", body, "epi")


def _hotspot_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    body = _absent(result, "hotspots") + _figure(figures, "hotspots")
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


def _spread_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    body = _absent(result, "spread") + _figure(figures, "arrival")
    if result.velocity is not None:
        v = result.velocity
        body += "<h3>Speed of spread</h3>" + table_html(
            v.by_method,
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
        body += "<h3>Probable introductions per border</h3>" + table_html(
            result.introductions_by_border
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
    body = _absent(result, "border risk", "backtest")
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
                kinds={"auc": "p", "brier": "p"},
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
    body += (
        f'<div class="pair"><div>{_figure(figures, "border_risk")}</div>'
        f'<div class="side">{side}</div></div>'
    )
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
            + table_html(r, cols, index="unit_id", kinds={"probability": "pct"})
            + "</div>"
        )
    return _section("Border risk", body, "risk")


def _supplies_section(result: MonthResult, figures: Mapping[str, Any]) -> str:
    body = _absent(result, "supplies")
    body += (
        '<p class="caution"><b>Example planning values, not guidance.</b> Quantities come '
        "from the planning attack rates and per-case items in the config; they are the "
        "user's numbers"
        + (f" ({esc(result.supply_note.rstrip('. '))})" if result.supply_note else "")
        + ".</p>"
    )
    body += _figure(figures, "priorities")
    if result.priorities is not None:
        p = result.priorities
        base_cols = [
            "rank",
            "name",
            "country",
            "probability",
            "population",
            "planning_cases_low",
            "planning_cases",
            "planning_cases_high",
        ]
        items = [c for c in p.columns if c not in [*base_cols, "cross_border", "silent", "drivers"]]
        cols = {
            "rank": "rank",
            "name": "unit",
            "country": "country",
            "probability": "probability",
            "population": "population",
            "planning_cases": "planning cases",
            "planning_cases_low": "low",
            "planning_cases_high": "high",
        }
        cols.update({c: c for c in items})
        body += (
            "<h3>Priority list</h3>"
            + '<div class="scroll">'
            + table_html(
                p,
                cols,
                index="unit_id",
                kinds={
                    "probability": "pct",
                    "population": "int",
                    "planning_cases": "int",
                    "planning_cases_low": "int",
                    "planning_cases_high": "int",
                },
            )
            + "</div>"
        )
    if result.depots is not None:
        d = pd.DataFrame(result.depots.drop(columns="geometry"))
        body += "<h3>Depots</h3>" + table_html(
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
    if result.supply_totals is not None:
        body += "<h3>Totals per country</h3>" + table_html(
            _by_country_label(result, result.supply_totals), index="country"
        )
    if result.supply_totals_by_depot is not None:
        body += (
            "<h3>Totals per depot catchment</h3><p>Each candidate district counted at its nearest "
            "open depot, whether or not it lies within reach.</p>"
            + table_html(result.supply_totals_by_depot, index="depot")
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


def _cautions() -> str:
    items = "".join(f"<li><b>{esc(a)}</b> {esc(b)}</li>" for a, b in CAUTIONS)
    return _section("Cautions", f"<ul>{items}</ul>", "cautions")


def _contents(sections: Sequence[tuple[str, str]]) -> str:
    links = " &middot; ".join(f'<a href="#{esc(i)}">{esc(t)}</a>' for i, t in sections)
    return f'<nav class="sub">{links}</nav>'


def render_report(result: MonthResult, figures: Mapping[str, Any]) -> str:
    """Render the month's report as one HTML string.

    Parameters
    ----------
    result : MonthResult
    figures : Mapping
        Figure name -> ``{"path": PNG path, "caption": str}`` (from the bundle's maps).

    Returns
    -------
    str
    """
    region = result.config.region.name
    month = f"{pd.Period(result.month, freq='M'):%B %Y}"
    title = f"{region}: monthly situation, {month}"
    created = datetime.now(UTC).strftime("%Y-%m-%d %H:%M UTC")
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        # Nothing may load from elsewhere: images are data URIs, styles inline, no scripts.
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        "img-src data:; style-src 'unsafe-inline'\">",
        f"<title>{esc(title)}</title><style>{_CSS}</style></head><body><main>",
        f'<header class="top"><h1>{esc(title)}</h1>',
        f'<div class="sub">Data as received by {result.as_of:%Y-%m-%d} &middot; analysis '
        f"units: {len(result.units):,} &middot; seed {esc(result.seed)} &middot; made "
        f"{esc(created)} by marchland {esc(__version__)}</div></header>",
        f'<p class="caution">{esc(CAUTION_LINE)}</p>',
        _contents(
            [
                ("headline", "Headline"),
                ("rates", "Attack rates"),
                ("epi", "Epi curves"),
                ("hotspots", "Hotspots"),
                ("spread", "Spread"),
                ("risk", "Border risk"),
                ("supplies", "Pre-positioning"),
                ("data", "Data received"),
                ("cautions", "Cautions"),
            ]
        ),
        _section("Headline", _headline(result), "headline"),
        _rates_section(result, figures),
        _epi_section(result, figures),
        _hotspot_section(result, figures),
        _spread_section(result, figures),
        _risk_section(result, figures),
        _supplies_section(result, figures),
        _quality_section(result),
        _cautions(),
        f"<footer>marchland {esc(__version__)}. Inputs, their sha256, the config, package "
        "versions and step timings are in manifest.json beside this file; the tables are in "
        "tables/ and the layers in layers.gpkg.</footer>",
        "</main></body></html>",
    ]
    return "\n".join(parts)
