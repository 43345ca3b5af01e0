"""The geometry work behind :func:`marchland.graph.build.border_graph`.

Two rules, because two kinds of seams occur in the inputs:

* **Within one boundary file** the topology is the file producer's own, so neighbours are found
  exactly, by the rule of libpysal's vertex-based ``Graph.build_contiguity``: units sharing a
  vertex (queen) or a segment (rook, ``rule="rook"``), joined on the coordinates by one sort
  (``_Segments``; libpysal loops over every vertex in Python, 80 % of this step's time at
  10,000 units), the same pairs as libpysal's (tests/reference/test_graph_reference.py).
  With ``strict=True``, libpysal's geometric contiguity itself.
* **Between files, or between countries**, outlines digitised by different producers neither
  meet nor stop overlapping exactly. Candidate pairs come within ``tolerance`` metres (an
  STRtree query and shapely 2 array functions over the candidate pairs only). A pair whose
  boundaries truly touch along a line (line contact, below) is always joined, as within a
  file. Any other pair is joined when its near-shared length (below) is
  positive and at least ``min_shared_m`` (the corner rule; default 0: any positive length).
  Pairs within the tolerance that the rule leaves out are listed in ``BorderGraph.left_out``.

The near-shared length of a pair (the corner rule)
--------------------------------------------------
Only a unit's *outline* can meet another file: the segments of its boundary it shares with no
other unit of its own file (found by matching coordinate pairs, as a clean file has them). For
each direction, ``near_ij`` is the length of i's outline lying within ``tolerance`` of j's
outline (outline intersected with the buffer of the other outline).

What ``near`` counts beyond the stretch the two really share depends on the outlines' ends:

* When both units tile their files, their outlines along a border end at the files' own
  junctions. The buffers are flat-capped, so they stop there and nothing beyond a stretch's
  end counts: ``min(near_ij, near_ji)`` is the overlap of the two stretches, whatever the
  offset between the two files' junctions. Pairs that meet only at a junction score about 0.
* When a unit stands alone in its file (no neighbour there), its outline is its whole boundary
  and turns away at both ends of the stretch; with round caps that adds about two tolerances
  to its direction, which are subtracted: ``near_lone - 2 * tolerance``.

The smaller of the two directions is used: a sliver thinner than the tolerance has both its
long sides within the buffer and would count twice in its own direction. A unit touching only
the far end of a sliver scores about the sliver's width. Where a border meets a coast, a lake
shore or the edge of the data, both outlines turn along it and the estimate gains up to about
one tolerance. Measured errors: on the demo's 48 cross-border district pairs (true lengths
1.8-35 km) +48 m mean, 137 m standard deviation, most of it the files' own digitising
differences (their outlines differ in length); on a synthetic Voronoi layer with oblique
junctions (benchmarks/bench_graph.py, 10,000 units) +13 m mean, 89 m standard deviation, and no
pair meeting at a point above 91 m. The same turn makes a pair that meets only where a border
ends at a third country absent from the data face each other: on two real county files 85-560 m
apart along their border (tests/reference/test_graph_realborders.py, libpysal's sids2 and
georgia) such a corner pair, 278 m apart, scores 33 m at a 500 m tolerance, 571 m at 1 km and
1,483 m at 1.5 km, and is joined; a ``min_shared_m`` above the tolerance leaves it out.

Line contact up to roundoff
---------------------------
Two files cut from one source share a border vertex for vertex, but read through different
CRSs (one in lon/lat, one in UTM, both reprojected to the working CRS) the common vertices land
a fraction of a millimetre apart (0.2-0.7 mm on libpysal's sids2 and vautm17n counties,
tests/reference/test_graph_realborders.py), so GEOS finds slivers and hair gaps and no shared
line. Line contact is therefore the same near-shared length measured at a width of 1 cm
(``_ROUNDOFF_M``), or the exactly shared length if larger, for pairs no more than 1 cm apart:
it must exceed 1 cm, and where the units overlap, the overlap's mean width along that line must
stay under 1 cm (a real overlap of two digitisations is no line contact; its near-shared length
decides). Pairs in line contact are joined whatever ``min_shared_m`` is and whatever the
tolerance, 0 included, with that length as ``shared_m``. Likewise at zero tolerance a point
contact is one within 1 cm, and under rook units overlap only beyond a 1 cm square.

``shared_m`` of a cross-file pair is the larger of the line-contact length and the near-shared
estimate. ``kind`` is "shared-boundary" for line contact (and point contact at zero tolerance)
and "gap-bridged" when the tolerance was needed; ``gap_m`` is 0 for outlines that overlap.

Why the default needs only a positive near-shared length: a file pulled away from its
neighbour across the border (normal to it) keeps the junctions of both files facing each
other, so a pair meeting at a corner scores 0 (the flat caps stop at the junction) and a true
pair scores its full shared length, however short. On a three-country Voronoi tessellation
pulled apart by 60 m (tests/reference/test_graph_reference.py) the smallest true pair scores
1 m and no other pair scores above 0. What the rule cannot tell apart is a file *sliding along*
the border by ``s``: a true pair sharing ``L < s`` metres then faces less of its partner than
the next pair does. Such pairs are never dropped silently: the one left out is listed with its
gap and score. A positive ``min_shared_m`` demands that length for gap-bridged pairs (corner
pairs of slid files then stay out, short true pairs are listed instead); true line contact is
joined whatever ``min_shared_m`` is. At zero tolerance under queen a point contact also joins
(the files are declared to match exactly: plain queen, as libpysal's); with a positive
tolerance a point contact between files is no evidence of a border and is listed.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import shapely
from libpysal.graph import Graph

from ..errors import DataWarning, InputError
from ._leftout import left_out_table
from ._links import add_links
from .border import RULES, BorderGraph

# Near-shared lengths at or below this (metres) are numerical noise of a point contact: the
# buffers' flat caps pass exactly through the other outline's end there.
_MIN_NEAR_M = 1e-3
# Width (metres) within which two outlines count as one line: well above the reprojection
# roundoff between files read through different CRSs (0.2-0.7 mm measured on libpysal's sids2
# and vautm17n, tests/reference/test_graph_realborders.py), far below any digitising precision.
_ROUNDOFF_M = 0.01
_HASH_MULTIPLIERS = tuple(
    np.uint64(m)
    for m in (0x9E3779B97F4A7C15, 0xC2B2AE3D27D4EB4F, 0x165667B19E3779F9, 0x27D4EB2F165667C5)
)


def build_border_graph(
    units,
    *,
    tolerance: float = 0.0,
    links=None,
    rule: str = "queen",
    min_shared_m: float | None = None,
    strict: bool = False,
    parents: pd.Series | None = None,
):
    """Build a :class:`~marchland.graph.BorderGraph` from analysis units (see module docs)."""
    if rule not in RULES:
        raise ValueError(f"'rule' needs to be one of {RULES}. {rule!r} was given instead.")
    tolerance = _metres(tolerance, "the gap tolerance", "tolerance")
    if min_shared_m is None:
        min_shared_m = 0.0
    min_shared_m = _metres(min_shared_m, "the minimum near-shared length", "min_shared_m")

    ids, geoms, country, group, source = _check_units(units, tolerance)
    n = len(ids)
    if n == 0:
        raise InputError("there are no analysis units to build a graph of", column="unit_id")

    # 1. exact contiguity within each source file
    segments = _Segments(geoms, pd.factorize(pd.Series(source))[0], rule=None if strict else rule)
    if strict:
        ei, ej = _within_source_pairs_strict(geoms, source, rook=rule == "rook")
    else:
        ei, ej = segments.within
    shared = _shared_lengths(geoms, ei, ej, segments.pair_len, strict=strict)
    exact = pd.DataFrame(
        {"i": ei, "j": ej, "shared_m": shared, "gap_m": 0.0, "kind": "shared-boundary"}
    )

    # 2. tolerant contiguity between different files or countries
    known = ei.astype(np.int64) * n + ej
    tol, left = _tolerant_pairs(
        geoms, group, known, tolerance, min_shared_m, rule == "rook", segments
    )

    pairs = pd.concat([exact, tol], ignore_index=True)
    pairs["link_kind"] = pd.Series(pd.NA, index=pairs.index, dtype="string")
    pairs["link_name"] = pd.Series(pd.NA, index=pairs.index, dtype="string")

    # 3. extra links from a table
    if links is not None:
        pairs = add_links(pairs, links, ids, geoms, parents)

    cross = country[pairs["i"].to_numpy()] != country[pairs["j"].to_numpy()]
    pairs["cross_border"] = cross
    edges = _both_directions(pairs, ids)
    return BorderGraph(
        edges=edges,
        ids=pd.Index(ids, name="unit_id"),
        countries=pd.Series(country, index=pd.Index(ids, name="unit_id"), name="country"),
        left_out=left_out_table(left, pairs, ids, country),
    )


# --- input checks ------------------------------------------------------------------------------
def _metres(value, what: str, column: str) -> float:
    value = float(value)
    if not np.isfinite(value) or value < 0:
        raise InputError(f"{what} must be a number of metres >= 0", column=column, value=value)
    return value


def _check_units(units, tolerance: float):
    import geopandas as gpd

    if not isinstance(units, gpd.GeoDataFrame):
        raise InputError(
            f"units need to be a GeoDataFrame of analysis units. {type(units).__name__} "
            "was given instead."
        )
    if "country" not in units.columns:
        raise InputError("units need a 'country' column", column="country")
    if not units.index.is_unique:
        dup = units.index[units.index.duplicated()][0]
        raise InputError("unit ids must be unique", column="unit_id", value=dup)
    crs = units.crs
    if crs is not None and crs.is_geographic:
        raise InputError(
            f"units are in a geographic CRS ({crs.to_string()}); the graph measures metres, "
            "so reproject them to the working equal-area CRS first",
            column="geometry",
        )
    if crs is not None and crs.is_projected:
        unit = crs.axis_info[0].unit_name if crs.axis_info else "metre"
        if unit not in ("metre", "meter", "m"):
            raise InputError(
                f"units are in a CRS measured in {unit!r} ({crs.to_string()}); the graph "
                "measures metres, so reproject them to the working equal-area CRS first",
                column="geometry",
            )
    if crs is None and tolerance > 0:
        raise InputError(
            "units have no CRS, so a tolerance in metres cannot be applied; set the working "
            "equal-area CRS first",
            column="geometry",
        )
    geoms = units.geometry.to_numpy()
    bad = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    if bad.any():
        raise InputError(
            "unit has no geometry", column="geometry", value=units.index[np.flatnonzero(bad)[0]]
        )
    poly = np.isin(shapely.get_type_id(geoms), [3, 6])
    if not poly.all():
        raise InputError(
            "unit geometry must be a Polygon or MultiPolygon",
            column="geometry",
            value=units.index[np.flatnonzero(~poly)[0]],
        )
    valid = shapely.is_valid(geoms)
    if not valid.all():
        k = np.flatnonzero(~valid)[0]
        raise InputError(
            f"unit geometry is not valid ({shapely.is_valid_reason(geoms[k])}); repair it "
            "(e.g. shapely.make_valid) before building the graph",
            column="geometry",
            value=units.index[k],
        )
    country = units["country"].astype(str).to_numpy()
    # Without a 'source' column each country is taken to be one file.
    source = units["source"].astype(str).to_numpy() if "source" in units.columns else country
    group = pd.factorize(pd.Series(source) + "\x00" + pd.Series(country))[0]
    return units.index.to_numpy(), geoms, country, group, source


# --- within one file ---------------------------------------------------------------------------
def _within_source_pairs_strict(geoms, source, *, rook: bool):
    """Pairs (i < j, positions) of neighbours inside each source file, by libpysal's geometry.

    libpysal's ``strict`` contiguity (GEOS predicates over an STRtree), for files whose
    neighbouring polygons do not share vertices.
    """
    codes, _ = pd.factorize(pd.Series(source))
    out_i, out_j = [], []
    for c in range(codes.max() + 1):  # one libpysal call per file (a handful), not per unit
        pos = np.flatnonzero(codes == c)
        if len(pos) < 2:
            continue
        g = Graph.build_contiguity(
            pd.Series(geoms[pos]).pipe(_as_geoseries), rook=rook, strict=True
        )
        adj = g.adjacency
        f = adj.index.get_level_values(0).to_numpy()
        t = adj.index.get_level_values(1).to_numpy()
        keep = f < t
        out_i.append(pos[f[keep]])
        out_j.append(pos[t[keep]])
    if not out_i:
        return np.empty(0, dtype=np.int64), np.empty(0, dtype=np.int64)
    return np.concatenate(out_i).astype(np.int64), np.concatenate(out_j).astype(np.int64)


def _as_geoseries(s):
    import geopandas as gpd

    return gpd.GeoSeries(s.to_numpy(), index=pd.RangeIndex(len(s)))


def _shared_lengths(geoms, i, j, pair_len: pd.Series, *, strict: bool) -> np.ndarray:
    """Length of shared boundary of exact neighbours (i, j).

    GEOS intersection of every pair costs more than the contiguity itself, so edges are matched
    as coordinate pairs instead (exact for a clean coverage, the same assumption libpysal's
    vertex method makes). Pairs matched by ``strict`` geometry without shared vertices fall back
    to the GEOS intersection.
    """
    if len(i) == 0:
        return np.empty(0)
    n = len(geoms)
    out = pair_len.reindex(i * n + j, fill_value=0.0).to_numpy(dtype=float, copy=True)
    if strict:
        redo = out == 0
        if redo.any():
            b = shapely.boundary(geoms)
            out[redo] = shapely.length(shapely.intersection(b[i[redo]], b[j[redo]]))
    return out


class _Segments:
    """Every boundary vertex and segment of every unit, matched within each source file.

    A segment two units of one file share is inside the file; the others form the file's
    outline, the only place where another file's units can meet it. With ``rule`` given,
    ``within`` holds the exact neighbours inside each file (positions i < j): under queen the
    units sharing a vertex, under rook those sharing a segment (both endpoints), the rules of
    libpysal's vertex-based ``Graph.build_contiguity`` (strict=False). libpysal builds them
    with a Python loop over every vertex into a dict of sets, 80 % of this step's time at
    10,000 units (py-spy); here they are joined on the same coordinates by one sort, as the
    segments are, and checked equal to libpysal's in tests/reference/test_graph_reference.py.
    """

    def __init__(self, geoms, source_code: np.ndarray, rule: str | None = None) -> None:
        n = len(geoms)
        if (shapely.get_type_id(geoms) == 3).all():  # all Polygons: skip the costly explode
            parts, part_of = geoms, np.arange(n)
        else:
            parts, part_of = shapely.get_parts(geoms, return_index=True)
        rings, ring_of = shapely.get_rings(parts, return_index=True)
        xy, v_ring = shapely.get_coordinates(rings, return_index=True)
        unit = part_of[ring_of[v_ring]]
        if rule == "queen":
            src = source_code[unit]
            order, same = _sorted_runs(src, (xy[:, 0], xy[:, 1]))
            self.within = _pairs_in_runs(same, unit[order], n)
        same = v_ring[:-1] == v_ring[1:]
        a, b, u = xy[:-1][same], xy[1:][same], unit[:-1][same]
        # Fix each segment's endpoint order so both polygons' copies compare equal.
        swap = (a[:, 0] > b[:, 0]) | ((a[:, 0] == b[:, 0]) & (a[:, 1] > b[:, 1]))
        p = np.where(swap[:, None], b, a)
        q = np.where(swap[:, None], a, b)
        src = source_code[u]
        order, same = _sorted_runs(src, (p[:, 0], p[:, 1], q[:, 0], q[:, 1]))
        p, q, u, src = p[order], q[order], u[order], src[order]
        if rule == "rook":
            self.within = _pairs_in_runs(same, u, n)
        eq = same & (u[1:] != u[:-1])
        k = np.flatnonzero(eq)
        matched = np.zeros(len(u), dtype=bool)
        matched[k] = matched[k + 1] = True
        lo = np.minimum(u[k], u[k + 1]).astype(np.int64)
        hi = np.maximum(u[k], u[k + 1]).astype(np.int64)
        length = np.hypot(*(q[k] - p[k]).T)
        self.pair_len = pd.Series(length, index=lo * n + hi).groupby(level=0).sum()
        self.n = n
        self.p, self.q, self.u = p[~matched], q[~matched], u[~matched]
        # A unit sharing no segment with another unit of its file stands alone in it.
        self.tiled = np.zeros(n, dtype=bool)
        self.tiled[u[matched]] = True

    def outlines(self, which: np.ndarray) -> np.ndarray:
        """Outline part of each unit in ``which`` (MultiLineString, empty if none), by position."""
        out = np.full(self.n, None, dtype=object)
        which = np.unique(which)
        out[which] = shapely.from_wkt("MULTILINESTRING EMPTY")
        sel = np.isin(self.u, which)
        if sel.any():
            k = np.flatnonzero(sel)
            k = k[np.argsort(self.u[k], kind="stable")]  # multilinestrings wants sorted owners
            lines = shapely.linestrings(np.stack([self.p[k], self.q[k]], axis=1))
            owners, idx = np.unique(self.u[k], return_inverse=True)
            # Merged, so a flat-capped buffer has caps only where an outline really ends.
            out[owners] = shapely.line_merge(shapely.multilinestrings(lines, indices=idx))
        return out


def _sorted_runs(src: np.ndarray, cols: tuple) -> tuple[np.ndarray, np.ndarray]:
    """Order putting equal rows of (file, *cols) together, and which rows equal the one before.

    ``same[k]``: in that order, row ``k + 1`` equals row ``k``.

    Sorts by a 64-bit hash of the row rather than lexsorting the keys (4x faster); rows next
    to each other are then compared exactly. Two different rows with one hash would sit in one
    run of that hash and so be caught; then (never seen) the rows are lexsorted instead.
    """
    key = src.astype(np.uint64)
    for col, mult in zip(cols, _HASH_MULTIPLIERS, strict=False):
        key ^= np.ascontiguousarray(col + 0.0).view(np.uint64) * mult  # + 0.0: no -0.0
        key = (key << np.uint64(31)) | (key >> np.uint64(33))
    order = np.argsort(key, kind="stable")

    def equal_next(order):
        same = src[order][1:] == src[order][:-1]
        for col in cols:
            c = col[order]
            same &= c[1:] == c[:-1]
        return same

    same = equal_next(order)
    k = key[order]
    if ((k[1:] == k[:-1]) & ~same).any():
        order = np.lexsort((*cols[::-1], src))
        same = equal_next(order)
    return order, same


def _pairs_in_runs(same: np.ndarray, u: np.ndarray, n: int) -> tuple[np.ndarray, np.ndarray]:
    """Every pair (i < j) of different units in a run of equal rows, each pair once, sorted.

    ``same`` as from :func:`_sorted_runs`, ``u`` the units in that order.
    """
    u = u.astype(np.int64)
    # Run of each row; only runs of two rows or more can pair anything.
    run_end = np.append(np.flatnonzero(~same), len(u) - 1)  # last row of each run
    size = np.diff(run_end, prepend=-1)
    keep = np.repeat(size > 1, size)
    end = np.repeat(run_end, size)[keep]
    u, pos = u[keep], np.flatnonzero(keep)
    # Each row with every later row of its run.
    later = end - pos
    first = np.repeat(np.arange(len(u)), later)
    step = np.arange(len(first)) - np.repeat(np.cumsum(later) - later, later) + 1
    i, j = u[first], u[first + step]
    lo, hi = np.minimum(i, j), np.maximum(i, j)
    key = np.unique((lo * n + hi)[lo != hi])
    return key // n, key % n


# --- between files or countries ----------------------------------------------------------------
def _tolerant_pairs(
    geoms, group, known, tolerance, min_shared_m, rook, segments: _Segments
) -> pd.DataFrame:
    """Pairs of units of different groups joined by the gap tolerance and the corner rule."""
    n = len(geoms)
    cols = ["i", "j", "shared_m", "gap_m", "kind"]
    empty = pd.DataFrame(
        {
            c: pd.Series(dtype=t)
            for c, t in zip(cols, ["int64", "int64", "float", "float", "object"], strict=True)
        }
    )
    left_empty = pd.DataFrame(
        {
            c: pd.Series(dtype=t)
            for c, t in zip(
                ["i", "j", "near_shared_m", "gap_m", "reason"],
                ["int64", "int64", "float", "float", "object"],
                strict=True,
            )
        }
    )
    if group.max(initial=0) == 0:
        return empty, left_empty
    # Only units on their file's outline can come near another file's units: the others are
    # surrounded by their own file. (In a file without shared vertices nothing matches, so
    # every unit counts as on the outline.)
    rim = np.unique(segments.u)
    bounds = shapely.bounds(geoms)

    def grown(idx, by=tolerance):
        b = bounds[idx]
        return shapely.box(b[:, 0] - by, b[:, 1] - by, b[:, 2] + by, b[:, 3] + by)

    tree = shapely.STRtree(geoms[rim])
    a, b = tree.query(grown(rim))  # bounding boxes only: cheap, then filter by group
    i, j = rim[a].astype(np.int64), rim[b].astype(np.int64)
    keep = (i < j) & (group[i] != group[j])
    i, j = i[keep], j[keep]
    keep = ~np.isin(i * n + j, known)
    i, j = i[keep], j[keep]
    gi, gj = geoms[i], geoms[j]
    near = shapely.dwithin(gi, gj, max(tolerance, _ROUNDOFF_M))
    i, j, gi, gj = i[near], j[near], gi[near], gj[near]
    if len(i) == 0:
        return empty, left_empty
    gap = shapely.distance(gi, gj)
    # Near-shared and truly shared lengths are measured on the units' outline parts (segments
    # not shared inside their own file): boundaries turning away into a file do not count, nor
    # does a file's inner edge that an overlapping file's inner edge happens to lie along.
    outline = segments.outlines(np.concatenate([i, j]))
    exact = shapely.length(shapely.intersection(outline[i], outline[j]))
    # Line contact up to roundoff: files read through different CRSs put one border's common
    # vertices a fraction of a millimetre apart, so GEOS finds no shared line between them
    # (see the module docstring). Measured by the same near-shared length at _ROUNDOFF_M.
    contact = np.zeros(len(i))
    touching = gap <= _ROUNDOFF_M
    if touching.any():
        contact[touching] = _near_shared(
            outline, i[touching], j[touching], _ROUNDOFF_M, segments.tiled, grown
        )
    line = np.maximum(exact, contact)
    estimate = (
        _near_shared(outline, i, j, tolerance, segments.tiled, grown)
        if tolerance > 0
        else np.zeros(len(i))
    )
    shared = np.maximum(line, estimate)
    # True contact along a line always joins (as within a file). A gap-bridged pair needs a
    # positive near-shared length of at least min_shared_m; a point contact joins only under
    # queen at zero tolerance (files declared to match exactly, so plain queen as libpysal).
    # (Units that overlap may have outlines running together along the data's edge: that is
    # not contact along a line, so their near-shared length decides. Overlap counts from a
    # mean width of _ROUNDOFF_M along the line, or an area of _ROUNDOFF_M squared where they
    # meet at a point: thinner slivers are roundoff. A line no longer than _ROUNDOFF_M is a
    # point contact moved by roundoff.)
    inside = (gap == 0) & ~shapely.touches(gi, gj)  # interiors meet
    overlap = inside.copy()
    check = inside & ((line > _ROUNDOFF_M) | ((tolerance == 0) & rook))
    if check.any():
        area = shapely.area(shapely.intersection(gi[check], gj[check]))
        overlap[check] = area > _ROUNDOFF_M * np.maximum(line[check], _ROUNDOFF_M)
    touch_line = (line > _ROUNDOFF_M) & ~overlap
    bridged = (estimate > _MIN_NEAR_M) & (estimate >= min_shared_m) & (gap <= tolerance)
    # At zero tolerance: a point contact under queen, and units that overlap under either rule.
    point = (gap <= _ROUNDOFF_M) & (tolerance == 0) & (overlap | (not rook))
    joined = touch_line | bridged | point
    _warn_overlaps(gi[joined], gj[joined], i[joined], j[joined])
    kind = np.where(touch_line | (point & ~bridged), "shared-boundary", "gap-bridged")
    out = pd.DataFrame(
        {
            "i": i[joined],
            "j": j[joined],
            "shared_m": shared[joined],
            "gap_m": gap[joined],
            "kind": kind[joined],
        }
    )
    left = ~joined & (gap <= tolerance)  # (candidates come within _ROUNDOFF_M at least)
    reason = np.where(estimate[left] > _MIN_NEAR_M, "short", "corner")
    left_out = pd.DataFrame(
        {
            "i": i[left],
            "j": j[left],
            "near_shared_m": estimate[left],
            "gap_m": gap[left],
            "reason": reason,
        }
    )
    return out, left_out


def _near_shared(outline, i, j, width, tiled, grown) -> np.ndarray:
    """Near-shared length of pairs (i, j) at ``width`` metres (the corner rule, module docs)."""
    # Clip each outline to the other's box grown by the width: only that part can be near,
    # and buffering a whole long district outline is the costly step.
    ci = shapely.intersection(outline[i], grown(j, width))
    cj = shapely.intersection(outline[j], grown(i, width))
    # Both units tiling their files: flat-capped buffers stop at the outlines' ends, so nothing
    # beyond a stretch's end counts. Otherwise round caps, and a lone unit's direction loses the
    # two widths its turning outline adds.
    both = tiled[i] & tiled[j]
    bi = np.empty(len(i), dtype=object)
    bj = np.empty(len(i), dtype=object)
    for mask, cap in ((both, "flat"), (~both, "round")):
        bi[mask] = shapely.buffer(ci[mask], width, cap_style=cap)
        bj[mask] = shapely.buffer(cj[mask], width, cap_style=cap)
    near_ij = shapely.length(shapely.intersection(ci, bj))
    near_ji = shapely.length(shapely.intersection(cj, bi))
    estimate = np.minimum(near_ij - 2 * width * ~tiled[i], near_ji - 2 * width * ~tiled[j])
    return np.maximum(estimate, 0.0)


def _warn_overlaps(gi, gj, i, j) -> None:
    """Warn when cross-file neighbours overlap by half the smaller one (levels mixed?)."""
    if len(gi) == 0:
        return
    area = shapely.area(shapely.intersection(gi, gj))
    small = np.minimum(shapely.area(gi), shapely.area(gj))
    bad = area > 0.5 * small
    if bad.any():
        warnings.warn(
            f"{int(bad.sum())} pairs of units from different boundary files overlap by more "
            "than half the smaller unit (are two levels of one country mixed?)",
            DataWarning,
            stacklevel=4,
        )


def _both_directions(pairs: pd.DataFrame, ids) -> pd.DataFrame:
    """Edge table with both directions of every pair, ordered by focal then neighbour."""
    fwd = pairs
    rev = pairs.rename(columns={"i": "j", "j": "i"})
    both = pd.concat([fwd, rev[fwd.columns]], ignore_index=True)
    both = both.sort_values(["i", "j"], kind="stable", ignore_index=True)
    edges = pd.DataFrame(
        {
            "focal": ids[both["i"].to_numpy()],
            "neighbor": ids[both["j"].to_numpy()],
            "shared_m": both["shared_m"].to_numpy(dtype=float),
            "gap_m": both["gap_m"].to_numpy(dtype=float),
            "cross_border": both["cross_border"].to_numpy(dtype=bool),
            "kind": both["kind"].astype(str).to_numpy(),
            "link_kind": both["link_kind"].astype("string").to_numpy(),
            "link_name": both["link_name"].astype("string").to_numpy(),
        }
    )
    return edges
