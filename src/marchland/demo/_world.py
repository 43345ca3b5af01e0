"""The geometry of the fictional Senn basin: land, lake, river, districts, provinces.

Everything is built in a local azimuthal equidistant frame in metres (``GEN_CRS``), centred in
the open South Atlantic where there is no land, so no part of the scenario maps onto a real
place. Districts are a centroidal Voronoi tessellation of seeded points clipped to the land;
countries are sectors around Lake Ivesse; provinces are contiguous groups of districts.
"""

from __future__ import annotations

from dataclasses import dataclass

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from scipy.cluster.vq import kmeans2
from shapely.geometry import LineString, Polygon

from ._names import name_pool

GEN_CRS = "+proj=aeqd +lat_0=-15.5 +lon_0=-19 +datum=WGS84 +units=m +no_defs"
COUNTRIES = ("TVR", "OSK", "MRW", "QLN")
# Districts per country on the mainland (Marrowen also holds the island district).
N_LAND = {"OSK": 60, "TVR": 80, "MRW": 59, "QLN": 50}
N_PROVINCES = {"TVR": 8, "OSK": 6, "MRW": 6, "QLN": 5}
LAKE_CENTRE = (10_000.0, -15_000.0)
ARM_HALF_WIDTH = 900.0  # the lower Senn below the lake: 1.8 km of open water
MIN_CROSS_SHARED = 1_500.0  # every true cross-border adjacency shares at least this much border
MIN_CROSS_APART = 1_000.0  # non-adjacent cross-border districts are at least this far apart


@dataclass(frozen=True)
class World:
    """The true (unperturbed) geometry and attributes of the scenario."""

    districts: gpd.GeoDataFrame  # index unit_id; name country province_id river island geometry
    provinces: gpd.GeoDataFrame  # index unit_id; name country geometry
    land: Polygon
    lake: Polygon  # Lake Ivesse with the lower Senn arm
    river: LineString  # the upper Senn, from its source to the lake
    arm: LineString  # the lower Senn's centre line, lake to sea
    adjacency: pd.DataFrame  # a b cross_border shared_m


def _wobbly_ring(cx, cy, a, b, power, wobble, rng, n=240):
    t = np.linspace(0, 2 * np.pi, n, endpoint=False)
    k = np.arange(1, 6)
    amp = wobble * rng.random(5) / k
    ph = rng.random(5) * 2 * np.pi
    r = 1 + (amp[:, None] * np.sin(k[:, None] * t + ph[:, None])).sum(0)
    c, s = np.cos(t), np.sin(t)
    x = cx + a * r * np.sign(c) * np.abs(c) ** (2 / power)
    y = cy + b * r * np.sign(s) * np.abs(s) ** (2 / power)
    return Polygon(np.column_stack([x, y]))


def _outline(rng):
    land = _wobbly_ring(0, 0, 290_000, 235_000, 4, 0.06, rng)
    lake_body = shapely.affinity.rotate(
        _wobbly_ring(*LAKE_CENTRE, 34_000, 20_000, 2, 0.12, rng), 18, origin=LAKE_CENTRE
    )
    xs = np.linspace(LAKE_CENTRE[0], 340_000, 60)
    ys = LAKE_CENTRE[1] + 5_000 * np.sin((xs - LAKE_CENTRE[0]) / 31_000) - (xs - xs[0]) * 0.05
    arm = LineString(np.column_stack([xs, ys]))
    lake = shapely.union(lake_body, arm.buffer(ARM_HALF_WIDTH, quad_segs=4)).simplify(20)
    # The upper Senn rises in the north-west and meanders south-east into the lake.
    t = np.linspace(0, 1, 80)
    rx = -250_000 + t * (LAKE_CENTRE[0] - 5_000 + 250_000)
    ry = 190_000 + t * (LAKE_CENTRE[1] - 190_000) + 14_000 * np.sin(t * 9) * (1 - t)
    river = LineString(np.column_stack([rx, ry]))
    river = shapely.difference(river, lake)
    if river.geom_type == "MultiLineString":
        river = max(river.geoms, key=lambda g: g.length)
    return land, lake, river, arm


def _lloyd(domain, n, rng, iterations=12):
    minx, miny, maxx, maxy = domain.bounds
    pts = []
    while len(pts) < n:
        cand = shapely.points(rng.uniform(minx, maxx, 4 * n), rng.uniform(miny, maxy, 4 * n))
        pts.extend(cand[shapely.contains(domain, cand)].tolist())
    pts = np.array(pts[:n])
    envelope = shapely.box(minx - 1e5, miny - 1e5, maxx + 1e5, maxy + 1e5)
    for _ in range(iterations):
        cells = _cells(pts, domain, envelope)
        pts = shapely.centroid(cells)
    return pts, _cells(pts, domain, envelope)


def _cells(pts, domain, envelope):
    vor = shapely.voronoi_polygons(shapely.multipoints(pts), extend_to=envelope)
    polys = np.array(list(vor.geoms))
    # voronoi_polygons does not keep the input order; match each cell to its generator.
    idx = shapely.STRtree(polys).query(pts, predicate="within")
    order = np.empty(len(pts), dtype=int)
    order[idx[0]] = idx[1]
    return shapely.intersection(polys[order], domain)


def _merge_fragments(cells, pts):
    """Keep each cell's part holding its generator; hand other parts to a touching cell."""
    cells = list(cells)
    loose = []
    for i, g in enumerate(cells):
        if g.geom_type == "Polygon":
            continue
        parts = [p for p in getattr(g, "geoms", []) if p.geom_type == "Polygon" and p.area > 0]
        keep = max(parts, key=lambda p: (p.contains(pts[i]), p.area))
        cells[i] = keep
        loose.extend(p for p in parts if p is not keep)
    for frag in loose:
        tree = shapely.STRtree(cells)
        cand = tree.query(frag, predicate="intersects")
        shared = [shapely.intersection(frag.boundary, cells[j].boundary).length for j in cand]
        if not shared or max(shared) == 0:
            continue  # an isolated sliver of land is dropped
        j = cand[int(np.argmax(shared))]
        cells[j] = shapely.union(cells[j], frag)
    return np.array(cells)


def _assign_countries(cells, arm):
    """Order cells by angle around the lake (east first) and cut into country sectors."""
    rp = shapely.point_on_surface(cells)
    x, y = shapely.get_x(rp) - LAKE_CENTRE[0], shapely.get_y(rp) - LAKE_CENTRE[1]
    # East of the lake, north and south are decided by the lower Senn, not by the centre.
    arm_y = np.interp(x + LAKE_CENTRE[0], *np.asarray(arm.coords).T) - LAKE_CENTRE[1]
    y_rel = np.where(x > 0, y - arm_y, y)
    theta = np.mod(np.arctan2(y_rel, x), 2 * np.pi)
    order = np.argsort(theta, kind="stable")
    country = np.empty(len(cells), dtype=object)
    start = 0
    for c in ("OSK", "TVR", "MRW", "QLN"):
        country[order[start : start + N_LAND[c]]] = c
        start += N_LAND[c]
    return country


def _pairs(geoms):
    """Unordered pairs of polygons that meet, with the length of boundary they share."""
    tree = shapely.STRtree(geoms)
    a, b = tree.query(geoms, predicate="intersects")
    keep = a < b
    a, b = a[keep], b[keep]
    shared = shapely.length(
        shapely.intersection(shapely.boundary(geoms[a]), shapely.boundary(geoms[b]))
    )
    return a, b, shared


def _provinces(geoms, country, rng):
    """Group each country's districts into contiguous provinces (k-means, then repair)."""
    prov = np.full(len(geoms), -1)
    cent = np.column_stack(
        [shapely.get_x(shapely.centroid(geoms)), shapely.get_y(shapely.centroid(geoms))]
    )
    a, b, shared = _pairs(geoms)
    adj = {i: set() for i in range(len(geoms))}
    for i, j, s in zip(a, b, shared, strict=True):
        if s > 0:
            adj[i].add(j)
            adj[j].add(i)
    for c in COUNTRIES:
        idx = np.flatnonzero(country == c)
        _, lab = kmeans2(cent[idx], N_PROVINCES[c], seed=rng, minit="++")
        lab = np.asarray(lab)
        # Repair: any group part cut off from its group's largest piece joins a neighbour group.
        for _ in range(5):
            changed = False
            for g in range(N_PROVINCES[c]):
                members = set(idx[lab == g])
                comps = _components(members, adj)
                for comp in sorted(comps, key=len)[:-1]:
                    for i in comp:
                        nb = [
                            lab[np.searchsorted(idx, j)]
                            for j in adj[i]
                            if j in set(idx) and lab[np.searchsorted(idx, j)] != g
                        ]
                        if nb:
                            lab[np.searchsorted(idx, i)] = max(set(nb), key=nb.count)
                            changed = True
            if not changed:
                break
        prov[idx] = lab
    return prov, adj


def _components(members, adj):
    members = set(members)
    comps = []
    while members:
        stack = [members.pop()]
        comp = set(stack)
        while stack:
            i = stack.pop()
            for j in adj[i]:
                if j in members:
                    members.discard(j)
                    comp.add(j)
                    stack.append(j)
        comps.append(comp)
    return comps


def _check_borders(geoms, country):
    """Check cross-border pairs share >= MIN_CROSS_SHARED of border or lie >= MIN_CROSS_APART."""
    a, b, shared = _pairs(geoms)
    cross = country[a] != country[b]
    if np.any(cross & (shared < MIN_CROSS_SHARED)):
        return False
    tree = shapely.STRtree(geoms)
    a2, b2 = tree.query(geoms, predicate="dwithin", distance=MIN_CROSS_APART)
    near = (a2 < b2) & (country[a2] != country[b2])
    touching = set(zip(a[cross], b[cross], strict=True))
    return all((i, j) in touching for i, j in zip(a2[near], b2[near], strict=True))


def _densify(geoms, step=1_000.0):
    """Add vertices every ``step`` metres, the same ones on both sides of every shared edge.

    Densifying each polygon on its own can place a shared edge's new vertices differently on
    its two sides (an extra vertex on one side changes the spacing), which breaks exact
    tiling; densifying the common linework once and polygonising it cannot.
    """
    lines = shapely.segmentize(shapely.union_all(shapely.boundary(geoms)), step)
    polys = np.array(list(shapely.polygonize(list(lines.geoms)).geoms))
    tree = shapely.STRtree(polys)
    inner = shapely.point_on_surface(geoms)
    src, dst = tree.query(inner, predicate="within")
    out = np.empty(len(geoms), dtype=object)
    out[src] = polys[dst]
    if len(src) != len(geoms) or not np.allclose(shapely.area(out), shapely.area(geoms)):
        raise RuntimeError("densified districts do not match the originals")  # pragma: no cover
    return out


def build_world(rng: np.random.Generator) -> World:
    """Build the scenario's true geometry from the generator (retries until the rules hold).

    Parameters
    ----------
    rng : numpy.random.Generator

    Returns
    -------
    World
    """
    land, lake, river, arm = _outline(rng)
    domain = shapely.difference(land, lake)
    if domain.geom_type == "MultiPolygon":
        domain = max(domain.geoms, key=lambda g: g.area)
    n = sum(N_LAND.values())
    for _attempt in range(40):
        pts, cells = _lloyd(domain, n, rng)
        cells = _merge_fragments(cells, pts)
        cells = shapely.set_precision(cells, 1.0)
        if not all(g.geom_type == "Polygon" and g.is_valid for g in cells):
            continue
        country = _assign_countries(cells, arm)
        if _check_borders(cells, country):
            break
    else:  # pragma: no cover - the fixed seed passes; a change of parameters may not
        raise RuntimeError("no tessellation met the border rules in 40 attempts")
    # The island: a small wooded isle in Lake Ivesse, far from every shore.
    isle_c = (LAKE_CENTRE[0] - 9_000, LAKE_CENTRE[1] - 3_000)
    isle = shapely.set_precision(_wobbly_ring(*isle_c, 4_500, 2_800, 2, 0.1, rng, n=40), 1.0)
    geoms = _densify(np.append(cells, isle))
    country = np.append(country, "MRW")
    prov, _ = _provinces(geoms[:-1], country[:-1], rng)
    # The island joins the nearest Marrowen province.
    mrw = np.flatnonzero(country[:-1] == "MRW")
    near = mrw[np.argmin(shapely.distance(geoms[mrw], isle))]
    prov = np.append(prov, prov[near])
    river_d = shapely.distance(geoms, river)
    arm_d = shapely.distance(geoms, arm)
    is_river = (river_d == 0) | (arm_d < 3 * ARM_HALF_WIDTH)
    island = np.zeros(len(geoms), dtype=bool)
    island[-1] = True
    is_river[-1] = False
    return _label(geoms, country, prov, is_river, island, rng, land, lake, river, arm)


def _label(geoms, country, prov, is_river, island, rng, land, lake, river, arm):
    rp = shapely.point_on_surface(geoms)
    px, py = shapely.get_x(rp), shapely.get_y(rp)
    ids = np.empty(len(geoms), dtype=object)
    prov_ids = np.empty(len(geoms), dtype=object)
    names = np.empty(len(geoms), dtype=object)
    prov_rows = []
    for c in COUNTRIES:
        idx = np.flatnonzero(country == c)
        groups = np.unique(prov[idx])
        gy = {g: py[idx][prov[idx] == g].mean() for g in groups}
        gx = {g: px[idx][prov[idx] == g].mean() for g in groups}
        # Number provinces north to south, then districts north to south within each.
        gorder = sorted(groups, key=lambda g: (-round(gy[g], -4), gx[g]))
        # One draw for districts and provinces, so no province shares a district's name.
        pool = name_pool(c, len(idx) + len(groups), rng, prefixes=(c == "MRW"))
        dnames, pnames = pool[: len(idx)], pool[len(idx) :]
        k = 0
        for pn, g in enumerate(gorder, start=1):
            pid = f"{c}-{pn:02d}"
            members = idx[prov[idx] == g]
            members = members[np.lexsort((px[members], -np.round(py[members], -4)))]
            for dn, i in enumerate(members, start=1):
                ids[i] = f"{pid}-{dn:02d}"
                prov_ids[i] = pid
                names[i] = dnames[k]
                k += 1
            prov_rows.append((pid, pnames[pn - 1], c, shapely.union_all(geoms[members])))
    districts = gpd.GeoDataFrame(
        {
            "name": names,
            "country": country,
            "province_id": prov_ids,
            "river": is_river,
            "island": island,
        },
        geometry=list(geoms),
        index=pd.Index(ids, name="unit_id"),
        crs=GEN_CRS,
    ).sort_index()
    provinces = (
        gpd.GeoDataFrame(
            pd.DataFrame(prov_rows, columns=["unit_id", "name", "country", "geometry"]),
            geometry="geometry",
            crs=GEN_CRS,
        )
        .set_index("unit_id")
        .sort_index()
    )
    g = districts.geometry.values
    a, b, shared = _pairs(np.asarray(g))
    keep = shared > 0
    ia, ib = districts.index[a[keep]], districts.index[b[keep]]
    adjacency = pd.DataFrame(
        {
            "a": np.where(ia < ib, ia, ib),
            "b": np.where(ia < ib, ib, ia),
            "cross_border": districts["country"].values[a[keep]]
            != districts["country"].values[b[keep]],
            "shared_m": np.round(shared[keep], 1),
        }
    ).sort_values(["a", "b"], ignore_index=True)
    return World(districts, provinces, land, lake, river, arm, adjacency)
