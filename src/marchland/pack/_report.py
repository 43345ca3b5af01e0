"""report.html: one self-contained page for the month (inline CSS, images as data URIs).

One inline script (the interactive map, allowed by its hash), no font or style sheet from
elsewhere, no link that leaves the pack folder (each figure links to its full-resolution file in
``maps/``): the file can be mailed or opened offline. The figures are embedded as screen copies
(:func:`._html.page_png`). Every string that comes from input data (unit names, sources,
reasons, config values) goes through :func:`html.escape`; numbers are formatted here.
"""

from __future__ import annotations

from collections.abc import Mapping, Sequence
from typing import TYPE_CHECKING, Any

import pandas as pd

from .. import __version__
from ..figures.maps import CAUTION_LINE
from . import _webmap
from ._briefing import glossary_section, month_definition
from ._html import _fmt, _num, _section, _tile, esc
from ._nowcastsection import coverage_note, nowcast_section
from ._outlook import clusters_section, forecast_section
from ._sections import (
    _cautions,
    _epi_section,
    _hotspot_section,
    _quality_section,
    _rates_section,
    _risk_section,
    _spread_section,
    _supplies_section,
)

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

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
# Printing (or saving as PDF) must give every table whole: no scroll boxes, no clipped columns.
_PRINT_CSS = """
details.how{background:#f4f1e8;border:1px solid #e0dacb;padding:.3rem .8rem;margin:.5rem 0;
font-size:.84rem} details.how summary{font-weight:bold;cursor:pointer}
details.how ul{margin:.3rem 0;padding-left:1.2rem}
dl.gloss{display:grid;grid-template-columns:12rem 1fr;gap:.2rem .8rem;font-size:.86rem}
dl.gloss dt{font-weight:bold} dl.gloss dd{margin:0}
@media print{
@page{size:A4 landscape;margin:9mm}
main{max-width:none;padding:0}
nav.sub{display:none}
table{display:table;width:100%;max-width:none;overflow:visible;font-size:6.4pt;
table-layout:auto;page-break-inside:auto}
thead{display:table-header-group} tr{break-inside:avoid}
th,td{padding:1px 2px;overflow-wrap:break-word;white-space:normal;hyphens:none}
td:first-child{white-space:normal}
figure{break-inside:avoid} figure img{max-height:175mm;width:auto;max-width:100%;margin:0 auto}
h2{break-after:avoid} h3{break-after:avoid}
}
"""


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
    adj = _region_adjusted(result)
    tiles = [
        _tile(
            _num(h["cases"], "int"),
            f"cases reported, {month}",
            "" if adj is None else f"nowcast-adjusted: {_fmt(adj['adjusted_cases'], 'int')}",
        ),
        _tile(_num(h["deaths"], "int"), f"deaths reported, {month}"),
        _tile(
            _num(h["rate"]),
            "attack rate per 100,000, whole region",
            rate_ci + ("" if adj is None else f"; nowcast-adjusted: {_fmt(adj['adjusted_rate'])}"),
        ),
        _tile(
            _num(h["newly_affected"], "int"),
            "units with a first case this month",
            "" if h["affected"] is None else f"{h['affected']:,} of {h['units']:,} affected so far",
        ),
        _tile(
            _num(h["global_moran_i"], "p"),
            "global Moran's I (rate-adjusted)",
            moran or _why(result, "hotspots"),
        ),
        _tile(
            _num(h["expected_new_units"]),
            f"expected newly affected units, next {horizon} weeks",
            _why(result, "border risk")
            if h["candidates"] is None
            else f"sum of probabilities over {h['candidates']:,} candidates",
        ),
    ]
    return '<div class="tiles">' + "".join(tiles) + "</div>" + coverage_note(result)


def _region_adjusted(result: MonthResult) -> Any:
    """Return the whole region's nowcast-adjusted month (cases, rate), or None."""
    a = result.month_adjusted_by_area
    if a is None:
        return None
    row = a[a["level"] == "region"]
    return None if not len(row) else row.iloc[0]


def _why(result: MonthResult, step: str) -> str:
    """Say why a headline number is missing: the step's reason from ``result.absent``."""
    if step in result.absent:
        return f"not computed: {esc(result.absent[step])}"
    return ""


def _contents(sections: Sequence[tuple[str, str]]) -> str:
    links = " &middot; ".join(f'<a href="#{esc(i)}">{esc(t)}</a>' for i, t in sections)
    return f'<nav class="sub">{links}</nav>'


def render_report(
    result: MonthResult, figures: Mapping[str, Any], *, map_html: str | None = None
) -> str:
    """Render the month's report as one HTML string.

    Parameters
    ----------
    result : MonthResult
    figures : Mapping
        Figure name -> ``{"path": PNG path, "caption": str}`` (from the bundle's maps).
    map_html : str, optional
        The interactive map's section when already made (:func:`_webmap.map_section`, which
        needs no figure: the bundle makes it while the figures are drawn).

    Returns
    -------
    str
    """
    region = result.config.region.name
    month = f"{pd.Period(result.month, freq='M'):%B %Y}"
    title = f"{region}: monthly situation, {month}"
    parts = [
        "<!DOCTYPE html>",
        '<html lang="en"><head><meta charset="utf-8">',
        '<meta name="viewport" content="width=device-width, initial-scale=1">',
        # Nothing may load from elsewhere: images are data URIs, styles inline, no scripts.
        # The map's one inline script is allowed by its hash; nothing may connect anywhere.
        '<meta http-equiv="Content-Security-Policy" content="default-src \'none\'; '
        f"img-src data:; style-src 'unsafe-inline'; script-src {_webmap.script_hash()}\">",
        f"<title>{esc(title)}</title><style>{_CSS}{_webmap.style()}{_PRINT_CSS}</style>"
        "</head><body><main>",
        f'<header class="top"><h1>{esc(title)}</h1>',
        f'<div class="sub">Data as received by {result.as_of:%Y-%m-%d} &middot; analysis '
        f"units: {len(result.units):,} &middot; seed {esc(result.seed)} &middot; made "
        # No clock time: the same inputs and as-of date give the same page byte for byte.
        f"by marchland {esc(__version__)}</div></header>",
        f'<p class="caution">{esc(CAUTION_LINE)}</p>',
        f'<p class="note">{month_definition(result)}</p>',
        _contents(
            [
                ("headline", "Headline"),
                ("map", "Interactive map"),
                ("epi", "Epi curves"),
                ("nowcast", "Latest weeks (nowcast)"),
                ("rates", "Attack rates"),
                ("hotspots", "Hotspots"),
                ("clusters", "Emerging clusters"),
                ("spread", "Spread"),
                ("risk", "Border risk"),
                ("outlook", "The next four weeks"),
                ("supplies", "Pre-positioning"),
                ("data", "Data received"),
                ("cautions", "Cautions"),
                ("glossary", "Glossary"),
            ]
        ),
        _section("Headline", _headline(result), "headline"),
        _webmap.map_section(result) if map_html is None else map_html,
        # Reading order: how the counts move, how complete the last weeks are, then where.
        _epi_section(result, figures),
        nowcast_section(result, figures),
        _rates_section(result, figures),
        _hotspot_section(result, figures),
        clusters_section(result, figures),
        _spread_section(result, figures),
        _risk_section(result, figures),
        forecast_section(result, figures),
        _supplies_section(result, figures),
        _quality_section(result),
        _cautions(),
        glossary_section(),
        f"<footer>marchland {esc(__version__)}. Inputs, their sha256, the config, package "
        "versions and step timings are in manifest.json beside this file; the tables are in "
        "tables/ and the layers in layers.gpkg.</footer>",
        "</main></body></html>",
    ]
    return "\n".join(parts)
