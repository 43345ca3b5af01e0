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

The block is compact because it grows with the units (at 50,000 units the written-out texts were
16 MB): texts are :class:`Texts` (templates, a code per unit, rounded numbers the script writes
out as Python's ``format`` would), classes and countries one character per unit
(:func:`codes`), weekly cases one string (:func:`_epi`).

Layers are data-driven: :data:`LAYERS` is a list of builders ``f(result) -> Layer | None``
(``None``: the month has nothing for it); :func:`register_layer` adds one, so a new result field
plugs in without touching the page code.
"""

from __future__ import annotations

import base64
import hashlib
import json
import re
from collections.abc import Callable, Mapping, Sequence
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
    text : Texts or pandas.Series
        What hovering or clicking a unit shows for this layer (plain text, escaped by the page):
        templates and numbers (:class:`Texts`), or one string per unit id.
    legend : sequence of (label, colour, hatched)
    hatched : pandas.Series, optional
        True where the static map hatches the unit (no report; not tested).
    default : str
        Colour of units absent from ``fill``.
    """

    key: str
    title: str
    fill: pd.Series
    text: Texts | pd.Series
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


# --- per-unit texts as templates + numbers ------------------------------------------------------
_SPEC = re.compile(r"^(,?)\.(\d)f$")
_SLOT = re.compile(r"\{\{|\}\}|\{(\d+)\}")
DASH = "–"  # shown for a missing number


def literal(text: str) -> str:
    """Return ``text`` as a template that shows it as written (braces doubled)."""
    return text.replace("{", "{{").replace("}", "}}")


def _scaled(values: pd.Series, decimals: int) -> np.ndarray:
    """Return ``values * 10**decimals`` rounded as ``format(v, ".<decimals>f")`` rounds (NaN kept).

    numpy's rounding multiplies first, so a value within a rounding error of a half (``0.25`` at
    one decimal) may round the other way from Python's correctly rounded ``format``; those few
    are taken from ``format`` itself.
    """
    v = pd.to_numeric(values, errors="coerce").to_numpy(dtype=float)
    v = np.where(np.isfinite(v), v, np.nan)
    y = v * 10.0**decimals
    n = np.rint(y)
    frac = np.abs(y - np.trunc(y))
    near = np.isfinite(y) & (np.abs(frac - 0.5) <= 1e-9 * np.maximum(1.0, np.abs(y)))
    for i in np.flatnonzero(near):  # ties and near-ties only: a handful, if any
        n[i] = float(format(v[i], f".{decimals}f").replace(".", ""))
    return n


def format_number(n: float | None, decimals: int, comma: bool) -> str:
    """Format a scaled integer as the page's script does (``None``: a dash).

    >>> format_number(1234567, 1, True), format_number(5, 3, False), format_number(None, 0, True)
    ('123,456.7', '0.005', '–')
    """
    if n is None:
        return DASH
    s = str(abs(int(n))).rjust(decimals + 1, "0")
    whole, frac = s[: len(s) - decimals], s[len(s) - decimals :]
    if comma:
        whole = f"{int(whole):,}"
    return ("-" if n < 0 else "") + whole + ("." + frac if decimals else "")


@dataclass(frozen=True)
class Texts:
    """What the map says about each unit for one layer or fact: a template per unit, its numbers.

    A template is plain text with ``{k}`` where the ``k``-th field's number goes (``{{`` and
    ``}}`` for braces). The page stores each template once, a template code per unit and the
    numbers already rounded to what is shown (as integers scaled by the decimals), and
    ``webmap.js`` writes the text; at 50,000 units this is a fraction of the size of every text
    written out. :meth:`strings` gives the same texts in Python.

    Attributes
    ----------
    templates : tuple of str
    which : pandas.Series
        Template index per unit id.
    fields : tuple of (pandas.Series, str)
        Numbers per unit id and their format: ``".Nf"`` or ``",.Nf"`` (thousands separated);
        missing or non-finite numbers show as a dash.
    """

    templates: tuple[str, ...]
    which: pd.Series
    fields: tuple[tuple[pd.Series, str], ...] = ()

    @classmethod
    def of(cls, template: str, index: pd.Index, *fields: tuple[pd.Series, str]) -> Texts:
        """Return one template for every unit of ``index``."""
        for _, spec in fields:
            if not _SPEC.match(spec):
                raise ValueError(f"number format {spec!r}: only '.Nf' and ',.Nf' are supported")
        return cls((template,), pd.Series(0, index=index), tuple(fields))

    @classmethod
    def from_strings(cls, text: pd.Series) -> Texts:
        """Return plain per-unit strings as a table of the distinct strings and a code per unit."""
        codes, uniques = pd.factorize(text.fillna(DASH).astype(str))
        return cls(tuple(literal(u) for u in uniques), pd.Series(codes, index=text.index))

    def where(self, keep: pd.Series | np.ndarray, other: str) -> Texts:
        """Return these texts where ``keep`` holds and the template ``other`` elsewhere."""
        keep = np.asarray(keep, dtype=bool)
        code = len(self.templates)
        which = self.which.where(keep, code)
        return Texts((*self.templates, other), which, self.fields)

    def labelled(self, labels: pd.Series, template: str) -> Texts:
        """Return ``template`` with ``{label}`` replaced by each unit's label (a few distinct)."""
        lab = labels.reindex(self.which.index).astype(str)
        codes, uniques = pd.factorize(lab)
        base = len(self.templates)
        parts = tuple(template.replace("{label}", literal(u)) for u in uniques)
        which = pd.Series(codes + base, index=self.which.index)
        return Texts((*self.templates, *parts), which, self.fields)

    def _uses_fields(self) -> np.ndarray:
        return np.array(
            [bool(_SLOT.search(t.replace("{{", "").replace("}}", ""))) for t in self.templates]
            + [False]
        )

    def encode(self, index: pd.Index) -> dict[str, Any]:
        """Return the JSON form for the units of ``index`` (a unit not in ``which``: a dash).

        ``t`` the templates; ``w`` the template code per unit (:func:`codes`), left out when
        every unit has template 0; ``f`` per field ``[decimals, comma, numbers]`` with numbers
        only for the units whose template has a number slot, in unit order (``null``: a dash).
        """
        templates = (*self.templates, DASH)
        which = self.which.reindex(index).fillna(len(self.templates)).astype(np.int64).to_numpy()
        rows = self._uses_fields()[which]
        fields = []
        for values, spec in self.fields:
            comma, dec = _SPEC.match(spec).groups()  # type: ignore[union-attr]
            n = _scaled(values.reindex(index), int(dec))[rows]
            nums = np.where(np.isfinite(n), n, 0).astype(np.int64).astype(object)
            nums[~np.isfinite(n)] = None
            fields.append([int(dec), int(bool(comma)), nums.tolist()])
        out: dict[str, Any] = {
            "t": list(templates if (which == len(self.templates)).any() else self.templates)
        }
        if which.any():
            out["w"] = codes(which)
        if fields:
            out["f"] = fields
        return out

    def strings(self) -> pd.Series:
        """Return the text per unit, formatted exactly as the page's script formats it."""
        enc = self.encode(self.which.index)
        return pd.Series(decode(enc, len(self.which)), index=self.which.index)


def decode(enc: Mapping[str, Any], n: int) -> list[str]:
    """Return the ``n`` texts of an encoded :class:`Texts` (what ``webmap.js`` does, in Python)."""
    templates = enc["t"]
    which = uncodes(enc.get("w", ""), n) if "w" in enc else [0] * n
    fields = enc.get("f", [])
    out = []
    row = 0
    for c in which:
        t = templates[c]
        has = bool(_SLOT.search(t.replace("{{", "").replace("}}", "")))

        def sub(m: re.Match, r: int = row) -> str:
            if m.group(1) is None:
                return m.group(0)[0]
            dec, comma, nums = fields[int(m.group(1))]
            return format_number(nums[r], dec, bool(comma))

        out.append(_SLOT.sub(sub, t))
        row += has
    return out


_ALPHABET = "0123456789abcdefghijklmnopqrstuvwxyzABCDEFGHIJKLMNOPQRSTUVWXYZ"


def codes(values: np.ndarray) -> str | list[int]:
    """Return small non-negative codes as one character each (a list when there are too many).

    >>> codes(np.array([0, 1, 11])), codes(np.array([0, 70]))
    ('01b', [0, 70])
    """
    v = np.asarray(values, dtype=np.int64)
    if len(v) and (v.max() >= len(_ALPHABET) or v.min() < 0):
        return v.tolist()
    return "".join(np.array(list(_ALPHABET))[v].tolist())


_LOOKUP = np.full(128, -1, dtype=np.int64)
_LOOKUP[np.frombuffer(_ALPHABET.encode("ascii"), dtype=np.uint8)] = np.arange(len(_ALPHABET))


def uncodes(enc: str | list[int], n: int) -> list[int]:
    """Inverse of :func:`codes`."""
    if isinstance(enc, list):
        return list(enc)
    return _LOOKUP[np.frombuffer(enc.encode("ascii"), dtype=np.uint8)].tolist()


# --- the layers (same classes as the static maps: figures/_mapclass) ----------------------------
def _rate_layer(result: MonthResult) -> Layer | None:
    r = result.rates
    if r is None:
        return None
    rate = r["month_rate"].where(r["month_weeks_reported"] > 0)
    text = Texts.of(
        "{0} per 100,000 (95% CI {1} to {2}); {3} cases",
        r.index,
        (rate, ",.1f"),
        (r["month_lower"], ",.1f"),
        (r["month_upper"], ",.1f"),
        (r["month_cases"], ",.0f"),
    )
    return _rate_classes_layer(result, "rate", "Attack rate per 100,000, the month", rate, text)


def _rate_classes_layer(
    result: MonthResult, key: str, title: str, rate: pd.Series, text: Texts
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
    text = Texts((), pd.Series(0, index=lab.index), ((q, ".3f"),)).labelled(
        lab.fillna("not in the analysis"), "{label} (q = {0})"
    )
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
    index = result.units.index
    cand = index.isin(risk.index)
    text = (
        Texts.of(
            "{0}% chance of a first case (rank {1})",
            index,
            (risk["probability"].reindex(index) * 100, ".1f"),
            (risk["rank"].reindex(index), ".0f"),
        )
        .where(cand | ~index.isin(pd.Index(affected)), "affected (cases by the as-of date)")
        .where(cand | index.isin(pd.Index(affected)), "not a candidate")
    )
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
    index = result.units.index
    planning = p.get("planning_cases", pd.Series(np.nan, index=p.index))
    text = Texts.of(
        "rank {0}; planning cases {1}",
        index,
        (p["rank"].reindex(index), ".0f"),
        (planning.reindex(index), ",.0f"),
    ).where(index.isin(p.index), "not a candidate")
    legend = _entries(mc._priority_entries(None, None, None))
    return Layer("priorities", "Pre-positioning priorities", fill, text, legend)


def _nowcast_rate_layer(result: MonthResult) -> Layer | None:
    """Nowcast-adjusted month rate, when the rates table carries ``month_adjusted_rate``."""
    r = result.rates
    if r is None or "month_adjusted_rate" not in r:
        return None
    rate = r["month_adjusted_rate"].astype(float)
    text = Texts.of("{0} per 100,000 (nowcast-adjusted)", r.index, (rate, ",.1f"))
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
    index = result.units.index
    lab = pd.Series(np.nan, index=index, dtype=object)
    number = pd.Series(np.nan, index=index)
    p = pd.Series(np.nan, index=index)
    # One row per cluster (a handful): the loop is over clusters, not units.
    for i, row in enumerate(cl.itertuples(index=False), start=1):
        members = pd.Index(list(row.units)).intersection(index)
        lab.loc[members] = "emerging cluster"
        number.loc[members] = i
        p.loc[members] = getattr(row, "p", np.nan)
    text = Texts.of("cluster {0}: p = {1}", index, (number, ".0f"), (p, ".3f")).where(
        lab.notna().to_numpy(), "in no emerging cluster"
    )
    colours = {"emerging cluster": mc.FRONT_COLOUR} if hasattr(mc, "FRONT_COLOUR") else {}
    fill = mc._cluster_colours(lab, colours)
    legend = _entries(mc._cluster_entries(lab, colours, legend=None, always=(), untested=set()))
    return Layer("emerging", "Emerging space-time clusters", fill, text, legend)


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
    ('M5000 5000l0-5000-5000 0 0 5000z', (10000, 5000))
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
    # A minus sign separates numbers by itself (SVG path grammar): no space before one.
    mid = np.where(d[:, 1] < 0, "", " ")
    core = np.char.add(np.char.add(d[:, 0].astype(str), mid), d[:, 1].astype(str))
    head = np.char.add(np.char.add(q[:, 0].astype(str), " "), q[:, 1].astype(str))
    lead = np.where(prev_first, "l", np.where(d[:, 0] < 0, "", " "))
    tok = np.where(first, np.char.add("M", head), np.char.add(lead, core))
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
    """Return the names a unit is known by beyond its id and name (aliases, report spellings).

    ``"a|b"`` per unit id, in first-seen order without repeats; ``""`` for most units. The page
    searches ``id|name|`` these (the id and name are in the data block already).
    """
    units = result.units
    parts = []
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
    if not parts:
        return pd.Series("", index=units.index, dtype=object)
    allnames = pd.concat(parts)
    own_id = pd.Series(allnames.index.astype(str), index=allnames.index)
    own_name = units["name"].astype(str).reindex(allnames.index)
    keep = (allnames.str.len() > 0) & (allnames != own_id) & (allnames != own_name)
    allnames = allnames[keep.to_numpy()]
    joined = (
        allnames.groupby(level=0, sort=False)
        .agg(lambda s: "|".join(dict.fromkeys(s)))
        .reindex(units.index)
    )
    return joined.fillna("")


def _epi(result: MonthResult) -> tuple[list[str], str]:
    """Return the sparkline weeks and every unit's weekly cases as one compact string.

    Units are separated by ``;``, weeks by ``,``; a zero is an empty field, a week not reported
    is ``x`` and trailing zeros are left out (most units have no case in most weeks), so
    ``",,3,x"`` is 0, 0, 3, not reported, then zeros. :func:`epi_rows` reads it back.
    """
    w = result.weekly
    n = len(result.units)
    if w is None or not len(w):
        return [], ";" * (n - 1) if n else ""
    weeks = pd.DatetimeIndex(sorted(pd.to_datetime(w["week"]).unique()))[-EPI_WEEKS:]
    sub = w[pd.to_datetime(w["week"]).isin(weeks)]
    table = sub.pivot_table(index="unit_id", columns="week", values="cases", aggfunc="sum")
    table = table.reindex(index=result.units.index, columns=weeks)
    arr = table.to_numpy(dtype=float)
    cells = np.where(np.isfinite(arr), arr, -1).astype(np.int64)
    tok = np.where(cells < 0, "x", np.where(cells == 0, "", cells.astype(str))).astype(object)
    # Trailing zeros dropped: keep each row up to its last non-zero week.
    nz = cells != 0
    last = np.where(nz.any(axis=1), nz.shape[1] - np.argmax(nz[:, ::-1], axis=1), 0)
    tok[np.arange(cells.shape[1])[None, :] >= last[:, None]] = None
    return [f"{x:%Y-%m-%d}" for x in weeks], _join_rows(tok)


def _join_rows(tok: np.ndarray) -> str:
    """Join a units x weeks token array (``None``: cut) into ``a,b;c,,d;...``."""
    flat = pd.Series(tok.ravel())
    unit = np.repeat(np.arange(tok.shape[0]), tok.shape[1])
    keep = flat.notna().to_numpy()
    joined = flat[keep].groupby(unit[keep]).agg(",".join)
    return ";".join(joined.reindex(range(tok.shape[0]), fill_value="").tolist())


def epi_rows(enc: str, weeks: int) -> list[list[int]]:
    """Read :func:`_epi`'s string back (what ``webmap.js`` does): ``-1`` is not reported."""
    out = []
    for row in enc.split(";"):
        t = row.split(",") if row else []
        out.append([(-1 if v == "x" else int(v or 0)) for v in t] + [0] * (weeks - len(t)))
    return out


def _facts(result: MonthResult) -> tuple[list[str], list[Texts]]:
    units = result.units
    index = units.index
    cols = {"population": Texts.of("{0}", index, (units["population"], ",.0f"))}
    r = result.rates
    if r is not None:
        for c, label, spec in (
            ("month_cases", "cases, the month", ",.0f"),
            ("month_deaths", "deaths, the month", ",.0f"),
            ("cumulative_cases", "cases since the start", ",.0f"),
            ("cumulative_rate", "rate since the start /100,000", ",.1f"),
        ):
            if c in r:
                cols[label] = Texts.of("{0}", index, (r[c].reindex(index), spec))
        if "cfr" in r:
            cols["CFR since the start"] = Texts.of(
                "{0}%", index, (r["cfr"].reindex(index) * 100, ".1f")
            )
    return list(cols), list(cols.values())


def map_data(result: MonthResult) -> tuple[dict, list[Layer]]:
    """Return the page's data block (JSON-ready) and the layers it holds.

    Compact where it grows with the units: texts as :class:`Texts` (templates, codes,
    numbers), colour classes and countries as :func:`codes`, weekly cases as :func:`_epi`'s
    string, and ``find`` only the names beyond a unit's id and name, for the units that have
    any (``{index: "a|b"}``).
    """
    units = result.units
    index = units.index
    layers = [lay for b in LAYERS if (lay := b(result)) is not None]
    out_layers = []
    for lay in layers:
        fill = lay.fill.reindex(index).fillna(lay.default).astype(str)
        hatched = (
            lay.hatched.reindex(index).fillna(False).astype(bool)
            if lay.hatched is not None
            else pd.Series(False, index=index)
        )
        key = fill + np.where(hatched, "|h", "")
        cls, uniques = pd.factorize(key)
        legend = [[label, colour + ("|h" if h else "")] for label, colour, h in lay.legend]
        text = lay.text if isinstance(lay.text, Texts) else Texts.from_strings(lay.text)
        out_layers.append(
            {
                "key": lay.key,
                "title": lay.title,
                "palette": list(uniques),
                "cls": codes(cls),
                "text": text.encode(index),
                "legend": legend,
            }
        )
    weeks, epi = _epi(result)
    fact_labels, fact_values = _facts(result)
    country, countries = pd.factorize(units["country"].map(result.config.country_label).astype(str))
    ids = index.astype(str).tolist()
    names = units["name"].astype(str).tolist()
    extra = _find_names(result).reset_index(drop=True)
    extra = extra[extra.str.len() > 0]
    data = {
        "id": ids,
        "name": names,
        "countries": list(countries),
        "country": codes(country),
        "find": {str(i): v for i, v in extra.items()},
        "weeks": weeks,
        "epi": epi,
        "facts": fact_labels,
        "factValues": [t.encode(index) for t in fact_values],
        "layers": out_layers,
    }
    return data, layers


def hatch_keys(layers: Sequence[Mapping[str, Any]]) -> list[str]:
    """Return the hatched colour keys the layers use, in the order of the page's patterns."""
    return sorted(
        {p for lay in layers for p in lay["palette"] if p.endswith("|h")}
        | {c for lay in layers for _, c in lay["legend"] if c.endswith("|h")}
    )


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
    hatched = hatch_keys(data["layers"])
    data["hatch"] = hatched
    first = data["layers"][0] if data["layers"] else None

    if first is None:
        fills = [OTHER_COLOUR] * len(paths)
    else:
        paint = [
            f"url(#ml-h{hatched.index(key)})" if key.endswith("|h") else key
            for key in first["palette"]
        ]
        fills = np.asarray(paint, dtype=object)[uncodes(first["cls"], len(paths))].tolist()
    # The k-th path is the k-th unit (the script counts them): no index attribute per path.
    # The commonest colour is the group's; only the other paths carry their own.
    common = pd.Series(fills).mode().iloc[0] if fills else OTHER_COLOUR
    d = np.asarray(paths, dtype=object)
    f = np.asarray(fills, dtype=object)
    d_attr = np.where(d != "", ' d="' + d + '"', "")
    f_attr = np.where(f != common, ' fill="' + f + '"', "")
    body = "".join(("<path" + d_attr + f_attr + "/>").tolist())
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
        f'<g id="ml-units" fill="{common}" stroke="#7d7a72" stroke-width="{GRID // 2000}" '
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
