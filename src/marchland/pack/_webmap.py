"""The report's interactive map: inline SVG, the month's layers as data, a small script.

One ``<section>`` for ``report.html``: every analysis unit is one SVG path (geometry simplified
as a coverage with :func:`shapely.coverage_simplify`, so neighbours keep one shared border),
drawn in the first layer's colours so the map paints before any script runs. The layers'
classes, colours and legend lines come from :mod:`marchland.figures._mapclass`, the same
functions the static maps use (one source of classes). A JSON data block holds, per layer, the
class of each unit and the text shown for it, and per unit its name, the names it is known by
(alias table and report spellings) and its weekly cases; ``webmap.js`` (package data, plain
JavaScript, no library) adds the layer switch, hover, click with an epi-curve sparkline, and the
name search. Nothing is fetched: the page stays one file.

Layers are data-driven: :data:`LAYERS` is a list of builders ``f(result) -> Layer | None``
(``None``: the month has nothing for it); :func:`register_layer` adds one, so a new result field
plugs in without touching the page code.
"""

from __future__ import annotations

import base64
import hashlib
import json
from collections.abc import Callable, Sequence
from dataclasses import dataclass
from importlib import resources
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
import shapely

from ..figures import _mapclass as mc
from ..figures._mapkit import (
    NOT_CANDIDATE_COLOUR,
    OTHER_COLOUR,
)
from ._html import esc

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

GRID = 10_000  # SVG user units along the longer side of the frame (integer coordinates)
SIMPLIFY_SHARE = 1 / 2500  # tolerance as a share of the longer side (~ 0.4 px on a 1000 px map)
EPI_WEEKS = 26  # weeks in each unit's sparkline
_ID = "ml-map"


@dataclass(frozen=True)
class Layer:
    """One switchable map layer.

    Attributes
    ----------
    key : str
        Short identifier (used in the page's layer switch).
    title : str
        Shown in the switch and above the legend.
    fill : pandas.Series
        Colour (hex) per unit id; units missing get ``default``.
    text : pandas.Series
        What hovering or clicking a unit shows for this layer (plain text, escaped by the page).
    legend : sequence of (label, colour, hatched)
    hatched : pandas.Series, optional
        True where the static map hatches the unit (no report; not tested).
    default : str
        Colour of units absent from ``fill``.
    """

    key: str
    title: str
    fill: pd.Series
    text: pd.Series
    legend: Sequence[tuple[str, str, bool]]
    hatched: pd.Series | None = None
    default: str = OTHER_COLOUR


LayerBuilder = Callable[["MonthResult"], "Layer | None"]


def _entries(entries: Sequence[tuple[str, dict]]) -> list[tuple[str, str, bool]]:
    """Legend lines of ``_mapclass`` as (label, colour, hatched); outline-only lines dropped."""
    out = []
    for label, style in entries:
        face = style.get("facecolor")
        if not isinstance(face, str) or face == "none":
            continue
        out.append((label, face, bool(style.get("hatch"))))
    return out


def _fmt(v: Any, spec: str) -> str:
    try:
        f = float(v)
    except (TypeError, ValueError):
        return "–"
    return "–" if not np.isfinite(f) else format(f, spec)


# --- the layers (same classes as the static maps: figures/_mapclass) ----------------------------
def _rate_layer(result: MonthResult) -> Layer | None:
    r = result.rates
    if r is None:
        return None
    rate = r["month_rate"].where(r["month_weeks_reported"] > 0)
    text = (
        _fmt_series(rate, ",.1f")
        + " per 100,000 (95% CI "
        + _fmt_series(r["month_lower"], ",.1f")
        + " to "
        + _fmt_series(r["month_upper"], ",.1f")
        + "); "
        + _fmt_series(r["month_cases"], ",.0f")
        + " cases"
    )
    return _rate_classes_layer(result, "rate", "Attack rate per 100,000, the month", rate, text)


def _rate_classes_layer(
    result: MonthResult, key: str, title: str, rate: pd.Series, text: pd.Series
) -> Layer:
    """Return a layer of month rates in the static maps' shared classes (six months pooled)."""
    hist = result.rates_history
    bins = mc._rate_bounds(hist if hist is not None else result.rates["month_rate"], 5)
    fill, classes = mc._rate_colours(rate, bins)
    return Layer(
        key,
        title,
        fill,
        text.where(classes != -2, "no report in the month"),
        _entries(mc._rate_entries(bins, classes)),
        hatched=pd.Series(classes == -2, index=rate.index),
    )


def _hotspot_layer(result: MonthResult) -> Layer | None:
    hs = result.hotspots
    colours = result.cluster_colours
    if hs is None or colours is None:
        return None
    lab = hs["label"].reindex(result.units.index).astype(object)
    from ._figures import _untested_labels

    untested = set(_untested_labels(result))
    fill = mc._cluster_colours(lab, colours)
    legend = _entries(
        mc._cluster_entries(
            lab,
            colours,
            legend=result.cluster_legend,
            always=result.cluster_significant,
            untested=untested,
        )
    )
    q = hs["q"].reindex(lab.index) if "q" in hs else pd.Series(np.nan, index=lab.index)
    text = lab.fillna("not in the analysis").astype(str) + " (q = " + _fmt_series(q, ".3f") + ")"
    return Layer("hotspots", "Hotspots (local Moran's I)", fill, text, legend, lab.isin(untested))


def _risk_layer(result: MonthResult) -> Layer | None:
    risk = result.risk
    if risk is None:
        return None
    affected: Sequence = []
    if result.fronts is not None:
        affected = result.fronts.index[result.fronts["first_week"].notna()]
    fill, cls = mc._risk_colours(risk["probability"], affected)
    silent = bool(risk["silent"].astype(bool).any()) if "silent" in risk else False
    text = pd.Series("not a candidate", index=result.units.index, dtype=object)
    text.loc[text.index.intersection(pd.Index(affected))] = "affected (cases by the as-of date)"
    cand = (
        _fmt_series(risk["probability"] * 100, ".1f")
        + "% chance of a first case (rank "
        + _fmt_series(risk["rank"], ".0f")
        + ")"
    )
    text.loc[cand.index.intersection(text.index)] = cand
    horizon = result.config.risk.horizon_weeks
    return Layer(
        "risk",
        f"Border risk: first case within {horizon} weeks",
        fill,
        text,
        _entries(mc._risk_entries(cls, silent=silent)),
        default=NOT_CANDIDATE_COLOUR,
    )


def _priority_layer(result: MonthResult) -> Layer | None:
    p = result.priorities
    if p is None:
        return None
    fill = mc._priority_colours(p["rank"])
    text = pd.Series("not a candidate", index=result.units.index, dtype=object)
    t = (
        "rank "
        + _fmt_series(p["rank"], ".0f")
        + "; planning cases "
        + _fmt_series(p.get("planning_cases", pd.Series(np.nan, index=p.index)), ",.0f")
    )
    text.loc[t.index.intersection(text.index)] = t
    legend = _entries(mc._priority_entries(None, None, None))
    return Layer("priorities", "Pre-positioning priorities", fill, text, legend)


def _nowcast_rate_layer(result: MonthResult) -> Layer | None:
    """Nowcast-adjusted month rate, when the rates table carries ``month_adjusted_rate``."""
    r = result.rates
    if r is None or "month_adjusted_rate" not in r:
        return None
    rate = r["month_adjusted_rate"].astype(float)
    text = _fmt_series(rate, ",.1f") + " per 100,000 (nowcast-adjusted)"
    title = "Attack rate per 100,000, nowcast-adjusted"
    return _rate_classes_layer(result, "rate_nowcast", title, rate, text)


def _emerging_layer(result: MonthResult) -> Layer | None:
    """Emerging space-time clusters, when the result holds them (a ``units`` column per row)."""
    cl = getattr(result, "clusters", None)
    if not isinstance(cl, pd.DataFrame) or "units" not in cl or not len(cl):
        return None
    # The same clusters as the static map: those significant at 0.05.
    cl = cl[cl["p"] <= 0.05] if "p" in cl else cl
    if not len(cl):
        return None
    lab = pd.Series(np.nan, index=result.units.index, dtype=object)
    text = pd.Series("in no emerging cluster", index=result.units.index, dtype=object)
    # One row per cluster (a handful): the loop is over clusters, not units.
    for i, row in enumerate(cl.itertuples(index=False), start=1):
        members = pd.Index(list(row.units)).intersection(lab.index)
        lab.loc[members] = "emerging cluster"
        p = getattr(row, "p", np.nan)
        text.loc[members] = f"cluster {i}: p = {_fmt(p, '.3f')}"
    colours = {"emerging cluster": mc.FRONT_COLOUR} if hasattr(mc, "FRONT_COLOUR") else {}
    fill = mc._cluster_colours(lab, colours)
    legend = _entries(mc._cluster_entries(lab, colours, legend=None, always=(), untested=set()))
    return Layer("emerging", "Emerging space-time clusters", fill, text, legend)


def _fmt_series(s: pd.Series, spec: str) -> pd.Series:
    v = pd.to_numeric(s, errors="coerce").astype(float)
    return v.map(lambda x: "–" if not np.isfinite(x) else format(x, spec))


LAYERS: list[LayerBuilder] = [
    _rate_layer,
    _nowcast_rate_layer,
    _hotspot_layer,
    _emerging_layer,
    _risk_layer,
    _priority_layer,
]


def register_layer(builder: LayerBuilder) -> LayerBuilder:
    """Add a layer builder ``f(result) -> Layer | None`` to the map (usable as a decorator)."""
    if builder not in LAYERS:
        LAYERS.append(builder)
    return builder


# --- geometry -----------------------------------------------------------------------------------
def svg_paths(geometry: Any, *, tolerance: float | None = None) -> tuple[list[str], tuple]:
    """Simplify a coverage topologically and return one SVG path string per geometry.

    Parameters
    ----------
    geometry : geopandas.GeoSeries or array of shapely geometries
        Polygons in a projected CRS (y up).
    tolerance : float, optional
        Simplification tolerance in CRS units; default ``SIMPLIFY_SHARE`` of the longer side.

    Returns
    -------
    paths : list of str
        Path data on an integer grid of ``GRID`` units along the longer side (y down).
    size : tuple of int
        ``(width, height)`` of the grid.

    Examples
    --------
    >>> from shapely.geometry import box
    >>> paths, size = svg_paths([box(0, 0, 1, 1), box(1, 0, 2, 1)], tolerance=0)
    >>> paths[0], size
    ('M5000 5000l0 -5000 -5000 0 0 5000z', (10000, 5000))
    """
    geoms = np.asarray(getattr(geometry, "values", geometry), dtype=object)
    minx, miny, maxx, maxy = shapely.total_bounds(geoms)
    side = max(maxx - minx, maxy - miny) or 1.0
    tol = side * SIMPLIFY_SHARE if tolerance is None else tolerance
    if tol > 0:
        # Shared borders are simplified once for both neighbours (no slivers, no overlaps).
        simple = shapely.coverage_simplify(geoms, tol)
        bad = shapely.is_empty(simple) | ~shapely.is_valid(simple)
        simple[bad] = geoms[bad]
    else:
        simple = geoms
    k = GRID / side
    parts, part_of = shapely.get_parts(simple, return_index=True)
    rings, ring_of = shapely.get_rings(parts, return_index=True)
    xy, vertex_ring = shapely.get_coordinates(rings, return_index=True)
    q = np.empty_like(xy, dtype=np.int64)
    q[:, 0] = np.round((xy[:, 0] - minx) * k)
    q[:, 1] = np.round((maxy - xy[:, 1]) * k)
    first = np.r_[True, vertex_ring[1:] != vertex_ring[:-1]]
    last = np.r_[vertex_ring[1:] != vertex_ring[:-1], True]
    d = np.diff(q, axis=0, prepend=q[:1])
    # Drop each ring's closing vertex (``z`` closes it) and steps rounded to nothing.
    keep = first | (~last & (d != 0).any(axis=1))
    q, d, first, vertex_ring = q[keep], d[keep], first[keep], vertex_ring[keep]
    prev_first = np.r_[False, first[:-1]]
    core = np.char.add(np.char.add(d[:, 0].astype(str), " "), d[:, 1].astype(str))
    head = np.char.add(np.char.add(q[:, 0].astype(str), " "), q[:, 1].astype(str))
    tok = np.where(first, np.char.add("M", head), np.char.add(np.where(prev_first, "l", " "), core))
    ring_end = np.r_[first[1:], True]
    tok = np.where(ring_end, np.char.add(tok, "z"), tok)
    unit = part_of[ring_of[vertex_ring]]
    joined = pd.Series(tok).groupby(unit).agg("".join)
    paths = joined.reindex(range(len(geoms)), fill_value="").tolist()
    size = (int(round((maxx - minx) * k)), int(round((maxy - miny) * k)))
    return paths, size


# --- the page section ---------------------------------------------------------------------------
def _asset(name: str) -> str:
    return resources.files("marchland.pack").joinpath(name).read_text(encoding="utf-8")


def script() -> str:
    """Return the map's script (the exact text inlined in the page)."""
    return _asset("webmap.js")


def script_hash() -> str:
    """Return the Content-Security-Policy source for the inline script (``'sha256-...'``)."""
    digest = hashlib.sha256(script().encode("utf-8")).digest()
    return "'sha256-" + base64.b64encode(digest).decode("ascii") + "'"


def style() -> str:
    """Return the map's CSS (inlined in the page's style element)."""
    return _asset("webmap.css")


def _find_names(result: MonthResult) -> pd.Series:
    """Every name a unit is known by: its id and name, alias-table rows, report spellings."""
    units = result.units
    parts = [
        pd.Series(units.index.to_numpy(), index=units.index),
        pd.Series(units["name"].astype(str).to_numpy(), index=units.index),
    ]
    m = result.matches
    if isinstance(m, pd.DataFrame) and {"place", "unit_id"} <= set(m.columns):
        ok = m[m["unit_id"].isin(units.index)]
        parts.append(pd.Series(ok["place"].astype(str).to_numpy(), index=ok["unit_id"]))
    path = getattr(getattr(result.config, "matching", None), "aliases", None)
    if path is not None:
        from ..inputs.reports import load_aliases

        try:
            al = load_aliases(path, result.all_units if result.all_units is not None else units)
        except Exception:  # noqa: BLE001 - the run already read it; the search just goes without
            al = None
        if al is not None:
            al = al[al["unit_id"].isin(units.index)]
            parts.append(pd.Series(al["alias"].astype(str).to_numpy(), index=al["unit_id"]))
    allnames = pd.concat(parts)
    allnames = allnames[allnames.str.len() > 0]
    joined = (
        allnames.groupby(level=0, sort=False)
        .agg(lambda s: "|".join(dict.fromkeys(s)))
        .reindex(units.index)
    )
    return joined.fillna("")


def _epi(result: MonthResult) -> tuple[list[str], list]:
    w = result.weekly
    if w is None or not len(w):
        return [], [[] for _ in range(len(result.units))]
    weeks = pd.DatetimeIndex(sorted(pd.to_datetime(w["week"]).unique()))[-EPI_WEEKS:]
    sub = w[pd.to_datetime(w["week"]).isin(weeks)]
    table = sub.pivot_table(index="unit_id", columns="week", values="cases", aggfunc="sum")
    table = table.reindex(index=result.units.index, columns=weeks)
    arr = table.to_numpy(dtype=float)
    rows = np.where(np.isfinite(arr), arr, -1).astype(np.int64).tolist()
    return [f"{x:%Y-%m-%d}" for x in weeks], rows


def _facts(result: MonthResult) -> tuple[list[str], list[list[str]]]:
    units = result.units
    cols = {"population": _fmt_series(units["population"], ",.0f")}
    r = result.rates
    if r is not None:
        for c, label, spec in (
            ("month_cases", "cases, the month", ",.0f"),
            ("month_deaths", "deaths, the month", ",.0f"),
            ("cumulative_cases", "cases since the start", ",.0f"),
            ("cumulative_rate", "rate since the start /100,000", ",.1f"),
        ):
            if c in r:
                cols[label] = _fmt_series(r[c].reindex(units.index), spec)
        if "cfr" in r:
            cols["CFR since the start"] = (
                _fmt_series(r["cfr"].reindex(units.index) * 100, ".1f") + "%"
            )
    labels = list(cols)
    return labels, [cols[k].reindex(units.index).fillna("–").tolist() for k in labels]


def map_data(result: MonthResult) -> tuple[dict, list[Layer]]:
    """Return the page's data block (JSON-ready) and the layers it holds."""
    units = result.units
    layers = [lay for b in LAYERS if (lay := b(result)) is not None]
    out_layers = []
    for lay in layers:
        fill = lay.fill.reindex(units.index).fillna(lay.default).astype(str)
        hatched = (
            lay.hatched.reindex(units.index).fillna(False).astype(bool)
            if lay.hatched is not None
            else pd.Series(False, index=units.index)
        )
        key = fill + np.where(hatched, "|h", "")
        codes, uniques = pd.factorize(key)
        legend = [[label, colour + ("|h" if h else "")] for label, colour, h in lay.legend]
        out_layers.append(
            {
                "key": lay.key,
                "title": lay.title,
                "palette": list(uniques),
                "cls": codes.tolist(),
                "text": lay.text.reindex(units.index).fillna("–").astype(str).tolist(),
                "legend": legend,
            }
        )
    weeks, epi = _epi(result)
    fact_labels, fact_values = _facts(result)
    data = {
        "id": units.index.astype(str).tolist(),
        "name": units["name"].astype(str).tolist(),
        "country": units["country"].map(result.config.country_label).astype(str).tolist(),
        "find": _find_names(result).tolist(),
        "weeks": weeks,
        "epi": epi,
        "facts": fact_labels,
        "factValues": fact_values,
        "layers": out_layers,
    }
    return data, layers


def _patterns(palettes: Sequence[str]) -> str:
    """SVG hatch patterns for every hatched colour used (id = ``h`` + index)."""
    out = []
    for i, key in enumerate(palettes):
        colour = key.split("|")[0]
        out.append(
            f'<pattern id="ml-h{i}" width="60" height="60" patternUnits="userSpaceOnUse" '
            f'patternTransform="rotate(45)"><rect width="60" height="60" fill="{esc(colour)}"/>'
            '<line x1="0" y1="0" x2="0" y2="60" stroke="#9a968c" stroke-width="14"/></pattern>'
        )
    return "".join(out)


def map_section(result: MonthResult) -> str:
    """Return the interactive map's ``<section>`` (SVG, data block and script) for the report.

    Parameters
    ----------
    result : MonthResult

    Returns
    -------
    str
        HTML; every string from input data is escaped (``<`` in the JSON block as a unicode escape).
    """
    data, _ = map_data(result)
    units = result.units
    paths, (w, h) = svg_paths(units.geometry)
    hatched = sorted(
        {p for lay in data["layers"] for p in lay["palette"] if p.endswith("|h")}
        | {c for lay in data["layers"] for _, c in lay["legend"] if c.endswith("|h")}
    )
    data["hatch"] = hatched
    first = data["layers"][0] if data["layers"] else None

    def paint(i: int) -> str:
        if first is None:
            return OTHER_COLOUR
        key = first["palette"][first["cls"][i]]
        return f"url(#ml-h{hatched.index(key)})" if key.endswith("|h") else key

    body = "".join(
        f'<path d="{p}" fill="{paint(i)}" data-i="{i}"/>' for i, p in enumerate(paths) if p
    )
    borders = _country_borders(units)
    payload = json.dumps(data, ensure_ascii=False, separators=(",", ":")).replace("<", "\\u003c")
    switch = "".join(
        f'<label><input type="radio" name="ml-layer" value="{k}"{" checked" if k == 0 else ""}>'
        f"{esc(lay['title'])}</label>"
        for k, lay in enumerate(data["layers"])
    )
    pad = GRID // 100
    return (
        f'<section id="map"><h2>Interactive map</h2>'
        '<p class="note">Hover a unit for its value, click it for its numbers and epi curve, '
        "or find it by any of its names. Same classes and colours as the static maps. "
        "Works offline; nothing is fetched.</p>"
        f'<div id="{_ID}" class="ml"><div class="ml-bar"><form class="ml-find" role="search">'
        '<input type="search" id="ml-q" placeholder="Find a unit by name or alias" '
        'autocomplete="off" aria-label="Find a unit"><ul id="ml-hits"></ul></form>'
        f'<fieldset class="ml-layers"><legend>Layer</legend>{switch}</fieldset>'
        '<button type="button" id="ml-reset">Whole region</button></div>'
        '<div class="ml-body"><div class="ml-frame">'
        f'<svg id="ml-svg" viewBox="{-pad} {-pad} {w + 2 * pad} {h + 2 * pad}" '
        'role="img" aria-label="Map of the analysis units">'
        f"<defs>{_patterns(hatched)}</defs>"
        f'<g id="ml-units" stroke="#7d7a72" stroke-width="{GRID // 2000}" '
        f'stroke-linejoin="round">{body}</g>'
        f'<path id="ml-borders" d="{borders}" fill="none" stroke="#262522" '
        f'stroke-width="{GRID // 600}" pointer-events="none"/>'
        '<path id="ml-sel" d="" fill="none" stroke="#111" '
        f'stroke-width="{GRID // 300}" pointer-events="none"/></svg>'
        '<div id="ml-tip" hidden></div></div>'
        '<aside class="ml-side"><div id="ml-legend"></div>'
        '<div id="ml-info"><p class="note">Click a unit to see its numbers.</p></div>'
        "</aside></div></div>"
        f'<script type="application/json" id="ml-data">{payload}</script>'
        f"<script>{script()}</script></section>"
    )


def _country_borders(units: Any) -> str:
    """Country outlines as one path (drawn heavier over the district borders)."""
    geoms = np.asarray(units.geometry.values, dtype=object)
    country = units["country"].to_numpy()
    minx, miny, maxx, maxy = shapely.total_bounds(geoms)
    side = max(maxx - minx, maxy - miny) or 1.0
    simple = shapely.coverage_simplify(geoms, side * SIMPLIFY_SHARE)
    bad = shapely.is_empty(simple) | ~shapely.is_valid(simple)
    simple[bad] = geoms[bad]
    codes, uniques = pd.factorize(country)
    outlines = [
        shapely.boundary(shapely.union_all(simple[codes == k])) for k in range(len(uniques))
    ]
    lines = shapely.get_parts(np.asarray(outlines, dtype=object))
    k = GRID / side
    xy, idx = shapely.get_coordinates(lines, return_index=True)
    if not len(xy):
        return ""
    x = np.round((xy[:, 0] - minx) * k).astype(np.int64)
    y = np.round((maxy - xy[:, 1]) * k).astype(np.int64)
    first = np.r_[True, idx[1:] != idx[:-1]]
    tok = np.where(first, "M", "L") + x.astype(str) + " " + y.astype(str)
    return "".join(tok.tolist())
