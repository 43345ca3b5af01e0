"""border_graph and BorderGraph against sources this project did not write.

- libpysal's ``Graph.build_contiguity`` (queen and rook) on exactly tiled layers: a square grid
  and a Voronoi tessellation (shapely/GEOS), as one file and split into two files.
- libpysal's bundled ``columbus`` example (Anselin 1988, Spatial Econometrics, Table 12.1;
  49 Columbus, Ohio neighbourhoods): its ``columbus.gal`` queen contiguity file shipped with
  libpysal, and libpysal's own queen weights on ``columbus.shp``.
- networkx shortest paths for hop distances and higher-order neighbours.
- The demo scenario's generator truth (``demo_data/truth/adjacency.csv``): every true
  cross-border district adjacency is recovered at the configured tolerance.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import libpysal.examples
import networkx as nx
import numpy as np
import pandas as pd
import pytest
import shapely
import shapely.affinity
from hypothesis import given, settings
from hypothesis import strategies as st
from libpysal.graph import Graph
from libpysal.weights import Queen

from marchland.config.load import load_config
from marchland.demo import scenario_path
from marchland.graph import border_graph
from marchland.inputs.units import read_units

CRS = "EPSG:3035"


def edge_set(focal, neighbor):
    return {frozenset(p) for p in zip(focal, neighbor, strict=True) if p[0] != p[1]}


def bg_edges(bg):
    return edge_set(bg.edges["focal"], bg.edges["neighbor"])


def libpysal_edges(layer, *, rook):
    adj = Graph.build_contiguity(layer, rook=rook).adjacency.reset_index()
    return edge_set(adj["focal"], adj["neighbor"])


def square_grid(nx_, ny):
    cells = [
        shapely.box(c * 1000, r * 1000, (c + 1) * 1000, (r + 1) * 1000)
        for c in range(nx_)
        for r in range(ny)
    ]
    return gpd.GeoDataFrame(
        {"country": "AAA", "source": "one"},
        geometry=cells,
        index=pd.Index([f"G{k:03d}" for k in range(len(cells))], name="unit_id"),
        crs=CRS,
    )


def voronoi(n, seed):
    rng = np.random.default_rng(seed)
    frame = shapely.box(0, 0, 50_000, 50_000)
    pts = shapely.multipoints(rng.uniform(0, 50_000, (n, 2)))
    cells = shapely.intersection(
        shapely.get_parts(shapely.voronoi_polygons(pts, extend_to=frame)), frame
    )
    return gpd.GeoDataFrame(
        {"country": "AAA", "source": "one"},
        geometry=cells,
        index=pd.Index([f"V{k:03d}" for k in range(len(cells))], name="unit_id"),
        crs=CRS,
    )


LAYERS = {"grid": lambda: square_grid(9, 7), "voronoi": lambda: voronoi(150, 11)}


@pytest.mark.parametrize("layer_name", sorted(LAYERS))
@pytest.mark.parametrize("rule", ["queen", "rook"])
def test_exact_tiling_equals_libpysal_contiguity(layer_name, rule):
    layer = LAYERS[layer_name]()
    ref = libpysal_edges(layer, rook=rule == "rook")  # libpysal Graph.build_contiguity
    assert bg_edges(border_graph(layer, rule=rule)) == ref
    # Split into two countries' files along x: at zero tolerance (and no corner rule) the
    # tolerant path across the seam must give the same edges as libpysal on the whole layer.
    x = shapely.get_coordinates(layer.geometry.centroid)[:, 0]
    split = layer.assign(
        country=np.where(x > 4500, "BBB", "AAA"), source=np.where(x > 4500, "b", "a")
    )
    bg = border_graph(split, rule=rule, tolerance=0, min_shared_m=0)
    assert bg_edges(bg) == ref
    assert bg.edges["cross_border"].any()


@pytest.mark.parametrize("layer_name", sorted(LAYERS))
def test_exact_seam_with_tolerance_is_queen_within_rook_across(layer_name):
    layer = LAYERS[layer_name]()
    x = shapely.get_coordinates(layer.geometry.centroid)[:, 0]
    east = x > 4500
    split = layer.assign(country=np.where(east, "BBB", "AAA"), source=np.where(east, "b", "a"))
    # Expected from libpysal alone: queen pairs inside a file, rook pairs across the seam
    # whose shared edge passes the corner rule (min_shared_m = 100 m here).
    queen = Graph.build_contiguity(layer, rook=False, by_perimeter=True).adjacency
    q = queen.reset_index()
    q = q[q["focal"] != q["neighbor"]]
    side = pd.Series(east, index=layer.index)
    same = side.loc[q["focal"]].to_numpy() == side.loc[q["neighbor"]].to_numpy()
    keep = same | (q["weight"].to_numpy() >= 100)
    ref = edge_set(q["focal"][keep], q["neighbor"][keep])
    bg = border_graph(split, tolerance=20, min_shared_m=100)
    assert bg_edges(bg) == ref
    # Shared lengths equal libpysal's perimeter weights (within files: exact).
    e = bg.edges.set_index(["focal", "neighbor"])["shared_m"]
    common = e.index.intersection(queen.index)
    within = common[
        side.loc[common.get_level_values(0)].to_numpy()
        == side.loc[common.get_level_values(1)].to_numpy()
    ]
    np.testing.assert_allclose(e.loc[within], queen.loc[within], rtol=1e-9, atol=1e-6)


# --- columbus (libpysal.examples, offline) -------------------------------------------------------
def columbus():
    shp = libpysal.examples.get_path("columbus.shp")
    df = gpd.read_file(shp)
    df.index = pd.Index(df["POLYID"].astype(int), name="unit_id")
    return df.assign(country="USA", source="columbus.shp"), Path(shp).with_suffix(".gal")


def test_columbus_neighbour_counts_equal_libpysal_queen():
    df, gal = columbus()
    bg = border_graph(df)  # tolerance 0: no CRS needed
    ours = bg.edges.groupby("focal").size().reindex(df.index, fill_value=0)
    # libpysal's own queen weights on the same shapefile.
    w = Queen.from_dataframe(df, use_index=True)
    ref = pd.Series(w.cardinalities).reindex(df.index)
    pd.testing.assert_series_equal(ours, ref, check_names=False, check_dtype=False)
    # columbus.gal: the queen contiguity file shipped with the example (ids are POLYID).
    # GAL format: a header with n, then per unit a line "id k" and a line of its k neighbours
    # (read here directly: libpysal's GAL reader leaves its file open).
    lines = gal.read_text().splitlines()
    n = int(lines[0].split()[-1])
    assert n == 49
    heads = [ln.split() for ln in lines[1 : 1 + 2 * n : 2]]
    nbrs = [ln.split() for ln in lines[2 : 2 + 2 * n : 2]]
    gal_edges = {
        frozenset((int(h[0]), int(b))) for h, nb in zip(heads, nbrs, strict=True) for b in nb
    }
    assert bg_edges(bg) == gal_edges
    assert sum(int(h[1]) for h in heads) == len(bg.edges)


# --- hops and higher order against networkx -------------------------------------------------------
def reference_graphs():
    df, _ = columbus()
    layer = voronoi(120, 5)
    x = shapely.get_coordinates(layer.geometry.centroid)[:, 0]
    layer = layer.assign(
        country=np.where(x > 25_000, "BBB", "AAA"), source=np.where(x > 25_000, "b", "a")
    )
    # A far-off unit so the graph has an island (unreachable in networkx too).
    far = layer.iloc[:1].copy()
    far.index = pd.Index(["far"], name="unit_id")
    far["geometry"] = [shapely.box(500_000, 0, 501_000, 1000)]
    return {
        "columbus": border_graph(df),
        "voronoi-two-files": border_graph(pd.concat([layer, far]), tolerance=200),
    }


def to_nx(bg):
    g = nx.Graph()
    g.add_nodes_from(bg.ids)
    g.add_edges_from(zip(bg.edges["focal"], bg.edges["neighbor"], strict=True))
    return g


@pytest.mark.parametrize("name", ["columbus", "voronoi-two-files"])
def test_hops_from_equal_networkx_shortest_paths(name):
    bg = reference_graphs()[name]
    g = to_nx(bg)
    rng = np.random.default_rng(2)
    for size in (1, 3):
        sources = list(rng.choice(np.asarray(bg.ids, dtype=object), size, replace=False))
        ref = nx.multi_source_dijkstra_path_length(g, sources)  # unit weights = hops
        ours = bg.hops_from(sources)
        expected = pd.Series(ref, dtype="Int64").reindex(bg.ids)
        pd.testing.assert_series_equal(ours, expected, check_names=False)
    assert ours.isna().sum() == len(bg.islands)


@pytest.mark.parametrize("name", ["columbus", "voronoi-two-files"])
@pytest.mark.parametrize("k", [1, 2, 3])
@pytest.mark.parametrize("lower_order", [False, True])
def test_higher_order_equals_networkx(name, k, lower_order):
    bg = reference_graphs()[name]
    g = to_nx(bg)
    lengths = dict(nx.all_pairs_shortest_path_length(g, cutoff=k))
    ref = {
        frozenset((a, b))
        for a, d in lengths.items()
        for b, hops in d.items()
        if (1 <= hops <= k if lower_order else hops == k)
    }
    h = bg.higher_order(k, lower_order=lower_order)
    assert bg_edges(h) == ref
    order = {
        frozenset(p): o
        for p, o in zip(
            zip(h.edges["focal"], h.edges["neighbor"], strict=True), h.edges["order"], strict=True
        )
    }
    for p, o in order.items():
        a, b = tuple(p)
        assert lengths[a][b] == o


# --- the demo scenario's truth ------------------------------------------------------------------
def demo_districts():
    """All districts of the demo (every country at level 2, OSK included)."""
    cfg = load_config(scenario_path())
    srcs = cfg.boundaries
    units = read_units(
        [b.path for b in srcs],
        id=[b.id for b in srcs],
        name=[b.name for b in srcs],
        country=[b.country for b in srcs],
        parent=[b.parent for b in srcs],
        level=[b.level for b in srcs],
    )
    return units[units["level"] == 2], cfg


def test_demo_cross_border_adjacency_recovered_at_configured_tolerance():
    units, cfg = demo_districts()
    tol, min_shared = cfg.graph.tolerance_m, cfg.graph.min_shared_m  # 300 m, 500 m
    truth = pd.read_csv(scenario_path().parent / "truth" / "adjacency.csv")
    bg = border_graph(units, tolerance=tol, min_shared_m=min_shared)
    found = bg_edges(bg)
    true_cross = edge_set(truth["a"][truth["cross_border"]], truth["b"][truth["cross_border"]])
    assert len(true_cross) > 0
    assert true_cross <= found
    # No pair further apart than the tolerance is joined (distance measured here by geopandas).
    e = bg.edges[bg.edges["kind"] != "link"]
    geo = units.geometry
    dist = (
        geo.loc[e["focal"]]
        .reset_index(drop=True)
        .distance(geo.loc[e["neighbor"]].reset_index(drop=True))
    )
    assert (dist <= tol + 1e-6).all()
    # Every cross-border edge found is a true adjacency too (no corner neighbours).
    e = bg.edges[bg.edges["cross_border"]]
    assert edge_set(e["focal"], e["neighbor"]) == true_cross


def test_demo_mixed_levels_and_links_at_analysis_level():
    units, cfg = demo_districts()
    links = pd.read_csv(cfg.graph.links)
    osk = units["country"] == "OSK"
    # OSK is analysed at province level: its districts are replaced by their provinces.
    prov = units[osk].dissolve(by="parent_id").assign(country="OSK", source="osk-provinces")
    prov.index.name = "unit_id"
    mixed = pd.concat([units[~osk], prov[["country", "source", "geometry"]]])
    bg = border_graph(
        mixed,
        tolerance=cfg.graph.tolerance_m,
        min_shared_m=cfg.graph.min_shared_m,
        links=links,
        parents=units["parent_id"],
    )
    # The truth's cross-border district pairs, lifted to the analysis units, are all found,
    # and (links aside) nothing else crosses a border.
    truth = pd.read_csv(scenario_path().parent / "truth" / "adjacency.csv")
    lift = units["parent_id"].where(osk, units.index.to_series())
    t = truth[truth["cross_border"]]
    expected = edge_set(lift.loc[t["a"]], lift.loc[t["b"]])
    e = bg.edges[bg.edges["cross_border"] & (bg.edges["kind"] != "link")]
    assert edge_set(e["focal"], e["neighbor"]) == expected
    for _, row in links.iterrows():
        assert frozenset((lift.loc[row["from_id"]], lift.loc[row["to_id"]])) in bg_edges(bg)


# --- cross-file neighbours that share a short border (issue: real neighbours dropped) -----------
def three_countries(seed, n=300, size=30_000.0):
    """A Voronoi tessellation (shapely/GEOS) split into three countries by 120-degree sectors
    around its centre, each country its own file."""
    rng = np.random.default_rng(seed)
    frame = shapely.box(0, 0, size, size)
    pts = shapely.multipoints(rng.uniform(0, size, (n, 2)))
    cells = shapely.intersection(
        shapely.get_parts(shapely.voronoi_polygons(pts, extend_to=frame)), frame
    )
    c = shapely.get_coordinates(shapely.centroid(cells)) - size / 2
    sector = (np.degrees(np.arctan2(c[:, 1], c[:, 0])) % 360 // 120).astype(int)
    code = np.array(["AAA", "BBB", "CCC"])[sector]
    return gpd.GeoDataFrame(
        {"country": code, "source": [f"{k}.gpkg" for k in code]},
        geometry=cells,
        index=pd.Index([f"V{k:03d}" for k in range(len(cells))], name="unit_id"),
        crs=CRS,
    )


def pulled_apart(layer, gap):
    """Each country moved away from the centre along its sector's bisector, so that across each
    (straight) sector border the two files are ``gap`` metres apart, normal to it."""
    geoms = layer.geometry.to_numpy().copy()
    step = gap / np.sqrt(3)  # two moves 120 degrees apart: their difference is sqrt(3) * step
    for code, deg in (("AAA", 60), ("BBB", 180), ("CCC", 300)):
        sel = (layer["country"] == code).to_numpy()
        move = step * np.array([np.cos(np.radians(deg)), np.sin(np.radians(deg))])
        geoms[sel] = shapely.transform(geoms[sel], lambda xy, move=move: xy + move)
    return layer.set_geometry(gpd.GeoSeries(geoms, index=layer.index, crs=CRS))


def cross_rook_lengths(layer):
    """libpysal rook contiguity with shared-perimeter weights, cross-country pairs only."""
    r = Graph.build_contiguity(layer, rook=True, by_perimeter=True).adjacency.reset_index()
    c = layer["country"]
    r = r[c.loc[r["focal"]].to_numpy() != c.loc[r["neighbor"]].to_numpy()]
    return {
        frozenset(p): w
        for p, w in zip(zip(r["focal"], r["neighbor"], strict=True), r["weight"], strict=True)
    }


def joined_within(bg, layer, tol):
    e = bg.edges[bg.edges["kind"] != "link"]
    geo = layer.geometry
    d = shapely.distance(geo.loc[e["focal"]].to_numpy(), geo.loc[e["neighbor"]].to_numpy())
    return bool((d <= tol + 1e-6).all())


@pytest.mark.parametrize("seed", [0, 1])
def test_three_countries_pulled_apart_keep_every_border_neighbour(seed):
    layer = three_countries(seed)
    truth = cross_rook_lengths(layer)  # libpysal Graph.build_contiguity on the whole layer
    # The check means something: some true borders are far shorter than the tolerance.
    assert min(truth.values()) < 50
    moved = pulled_apart(layer, 60.0)
    bg = border_graph(moved, tolerance=150)
    e = bg.edges[bg.edges["cross_border"]]
    # Every true cross-border pair found, nothing else joined across a border (no pair here
    # meets at a point only: Voronoi junctions join three cells).
    assert edge_set(e["focal"], e["neighbor"]) == set(truth)
    assert joined_within(bg, moved, 150)
    assert set(e["kind"]) == {"gap-bridged"}
    # Pairs within the tolerance that were left out are listed, and none is a true neighbour.
    lo = edge_set(bg.left_out["unit_a"], bg.left_out["unit_b"])
    assert not lo & set(truth)
    assert (bg.left_out["gap_m"] <= 150 + 1e-6).all()
    # Within each file: libpysal queen, unchanged.
    within = bg.edges[~bg.edges["cross_border"]]
    ref = set()
    for _, part in layer.groupby("country"):
        ref |= libpysal_edges(part, rook=False)
    assert edge_set(within["focal"], within["neighbor"]) == ref


def virginia():
    """libpysal.examples 'virginia': counties and independent cities in UTM 17N metres
    (vautm17n.shp) with the rook and queen contiguity files shipped beside them."""
    shp = Path(libpysal.examples.get_path("vautm17n.shp"))
    va = gpd.read_file(shp)
    va.index = pd.Index(va["POLY_ID"].astype(int), name="unit_id")

    def gal(name, key):
        # GAL: a header ending in n (the rook file: "0 136 virginia POLY_ID", ids POLY_ID; the
        # queen file: "136", ids FIPS), then per unit a line "id k" and a line of k neighbours.
        lines = (shp.parent / name).read_text().splitlines()
        head = lines[0].split()
        n = int(head[1] if len(head) > 1 else head[0])
        heads = [ln.split() for ln in lines[1 : 1 + 2 * n : 2]]
        nbrs = [ln.split() for ln in lines[2 : 2 + 2 * n : 2]]
        return {
            frozenset((key[h[0]], key[b])) for h, nb in zip(heads, nbrs, strict=True) for b in nb
        }

    by_poly = {str(k): int(k) for k in va.index}
    by_fips = dict(zip(va["FIPS"].astype(int).astype(str), va.index.astype(int), strict=True))
    return va, gal("virginia_rook.gal", by_poly), gal("virginia_queen.gal", by_fips)


@pytest.mark.parametrize("move", [(60.0, 0.0), (0.0, 60.0), (-42.0, 42.0)])
@pytest.mark.parametrize("split", ["east-west", "random"])
def test_virginia_split_into_two_files_keeps_every_rook_neighbour(split, move):
    va, rook, queen = virginia()
    if split == "east-west":
        x = shapely.get_coordinates(va.geometry.centroid)[:, 0]
        b = x > np.median(x)
    else:  # scattered: half the counties, chosen at random, in the second file
        b = np.random.default_rng(4).random(len(va)) < 0.5
    geoms = va.geometry.to_numpy().copy()
    geoms[b] = shapely.transform(geoms[b], lambda xy: xy + np.asarray(move))  # known 60 m move
    layer = va.assign(country=np.where(b, "BBB", "AAA"), source=np.where(b, "b", "a"))
    layer = layer.set_geometry(gpd.GeoSeries(geoms, index=va.index, crs=va.crs))
    bg = border_graph(layer, tolerance=150)
    side = pd.Series(b, index=va.index)
    cross_rook = {p for p in rook if side.loc[list(p)].nunique() == 2}
    e = bg.edges[bg.edges["cross_border"]]
    found = edge_set(e["focal"], e["neighbor"])
    assert cross_rook <= found  # virginia_rook.gal: every rook pair across the files kept
    # Anything more is a queen pair of the shipped file (a point contact that the move turned
    # into a short facing stretch: the slide case of the module docs), within the tolerance.
    assert found - cross_rook <= queen - rook
    assert joined_within(bg, layer, 150)
    if split == "east-west":
        assert found == cross_rook


# --- within-file neighbours (the vertex join) against libpysal ----------------------------------
# border_graph joins units of one file on their vertex coordinates (queen: a shared vertex; rook:
# a shared segment) instead of calling libpysal's vertex-based Graph.build_contiguity. Both must
# give libpysal's pairs: on every polygon layer libpysal ships offline (tokyomet262 is left out:
# its geometry is invalid, which border_graph refuses) and on generated coverages.
SHIPPED = [
    "10740.shp",  # Albuquerque census tracts
    "Chicago77.shp",  # Chicago community areas
    "columbus.shp",  # Anselin (1988) Columbus neighbourhoods
    "G_utm.shp",  # Georgia counties (MultiPolygons)
    "mexicojoin.shp",  # Mexican states (MultiPolygons)
    "sids2.shp",  # North Carolina counties (MultiPolygons, islands)
    "stl_hom.shp",  # St Louis region counties
    "us48.shp",  # lower 48 US states
    "vautm17n.shp",  # Virginia counties and independent cities (enclaves)
    "lattice10x10.shp",  # 10 x 10 lattice: queen and rook differ at every inner corner
    "rook31.shp",
]


def within_file_edges(bg, layer):
    src = layer["source"]
    e = bg.edges
    same = src.loc[e["focal"]].to_numpy() == src.loc[e["neighbor"]].to_numpy()
    return edge_set(e["focal"][same], e["neighbor"][same])


def libpysal_per_file(layer, *, rook):
    ref = set()
    for _, part in layer.groupby("source"):
        ref |= libpysal_edges(part.geometry, rook=rook)  # Graph.build_contiguity per file
    return ref


@pytest.mark.parametrize("name", SHIPPED)
@pytest.mark.parametrize("rule", ["queen", "rook"])
def test_within_file_pairs_equal_libpysal_on_shipped_layers(name, rule):
    df = gpd.read_file(libpysal.examples.get_path(name))
    layer = gpd.GeoDataFrame(
        {"country": "AAA", "source": "one"},
        geometry=df.geometry.to_numpy(),  # no CRS: some are lon/lat, and tolerance 0 needs none
        index=pd.Index([f"u{k:03d}" for k in range(len(df))], name="unit_id"),
    )
    ref = libpysal_edges(layer.geometry, rook=rule == "rook")
    assert ref, "the layer has neighbours to compare"
    assert bg_edges(border_graph(layer, rule=rule)) == ref
    # Scattered over three files (shuffled): inside each file still libpysal's pairs there.
    rng = np.random.default_rng(len(df))
    split = layer.assign(source=rng.choice(["a", "b", "c"], len(layer))).sample(
        frac=1.0, random_state=1
    )
    bg = border_graph(split, rule=rule)
    assert within_file_edges(bg, split) == libpysal_per_file(split, rook=rule == "rook")


@st.composite
def coverages(draw):
    """A quadrilateral mesh with random inner nodes, some edges carrying an extra vertex (on
    both sides, or on one side only: a T-junction that is queen but not rook under the vertex
    rule), some cells joined into MultiPolygon units, some dropped, some holding an enclave
    in a hole, spread over one to three files, in random order; coordinates around 0 so that
    -0.0 and 0.0 occur."""
    nx_ = draw(st.integers(2, 7))
    ny = draw(st.integers(2, 7))
    seed = draw(st.integers(0, 2**32 - 1))
    files = draw(st.integers(1, 3))
    rng = np.random.default_rng(seed)
    cell = 1000.0
    gx, gy = np.meshgrid(np.arange(nx_ + 1) * cell, np.arange(ny + 1) * cell, indexing="ij")
    inner = (slice(1, -1), slice(1, -1))
    gx[inner] += rng.uniform(-0.3, 0.3, gx[inner].shape) * cell
    gy[inner] += rng.uniform(-0.3, 0.3, gy[inner].shape) * cell
    gx -= cell * rng.integers(0, nx_ + 1)  # a column of nodes at x = 0 ...
    gx[gx == 0] *= rng.choice([1.0, -1.0], (gx == 0).sum())  # ... some of them -0.0
    # Extra vertex at each edge's midpoint: 0 none, 1 in both cells, 2 in the first only.
    mid_v = rng.choice(3, (nx_ + 1, ny), p=[0.6, 0.25, 0.15])  # vertical edges
    mid_h = rng.choice(3, (nx_, ny + 1), p=[0.6, 0.25, 0.15])  # horizontal edges

    def node(c, r):
        return (gx[c, r], gy[c, r])

    def mid(a, b):
        return ((a[0] + b[0]) / 2, (a[1] + b[1]) / 2)

    cells = []
    for c in range(nx_):
        for r in range(ny):
            ring = []
            # counter-clockwise: bottom, right, top, left edges; "first" cell of an edge is
            # the one to its left (vertical) or below (horizontal).
            corners = [node(c, r), node(c + 1, r), node(c + 1, r + 1), node(c, r + 1)]
            kinds = [
                mid_h[c, r] == 1,  # bottom edge: this cell is above it (second)
                mid_v[c + 1, r] in (1, 2),  # right edge: this cell is left of it (first)
                mid_h[c, r + 1] in (1, 2),  # top edge: this cell is below it (first)
                mid_v[c, r] == 1,  # left edge: this cell is right of it (second)
            ]
            for k in range(4):
                ring.append(corners[k])
                if kinds[k]:
                    ring.append(mid(corners[k], corners[(k + 1) % 4]))
            cells.append(shapely.Polygon(ring))
    units = []
    for poly in cells:
        roll = rng.random()
        if roll < 0.1:
            continue  # dropped: a gap in the coverage
        if roll < 0.25:  # an enclave in a hole, sharing the hole's vertices
            inner_ring = shapely.get_coordinates(shapely.affinity.scale(poly, 0.4, 0.4))
            units += [shapely.Polygon(poly.exterior.coords, [inner_ring]),
                      shapely.Polygon(inner_ring)]  # fmt: skip
            continue
        units.append(poly)
    # Join some pairs of units that do not touch into one MultiPolygon unit.
    joined = []
    rest = list(rng.permutation(len(units)))
    while rest:
        a = units[rest.pop()]
        if rest and rng.random() < 0.15 and shapely.distance(a, units[rest[-1]]) > 0:
            a = shapely.MultiPolygon([a, units[rest.pop()]])
        joined.append(a)
    layer = gpd.GeoDataFrame(
        {"country": "AAA", "source": rng.choice(["a", "b", "c"][:files], len(joined))},
        geometry=joined,
        index=pd.Index([f"q{k:03d}" for k in range(len(joined))], name="unit_id"),
    )
    return layer


@settings(max_examples=60, deadline=None)
@given(layer=coverages(), rule=st.sampled_from(["queen", "rook"]))
def test_within_file_pairs_equal_libpysal_on_generated_coverages(layer, rule):
    assert shapely.is_valid(layer.geometry.to_numpy()).all()
    bg = border_graph(layer, rule=rule)
    assert within_file_edges(bg, layer) == libpysal_per_file(layer, rook=rule == "rook")


def test_negative_zero_is_the_same_vertex_as_libpysal_finds():
    # Two squares meeting along x = 0, written -0.0 in one and 0.0 in the other: Python (and
    # so libpysal's vertex dict) holds them equal, and the join must too.
    a = shapely.Polygon([(-1.0, 0.0), (-0.0, 0.0), (-0.0, 1.0), (-1.0, 1.0)])
    b = shapely.Polygon([(0.0, 0.0), (1.0, 0.0), (1.0, 1.0), (0.0, 1.0)])
    layer = gpd.GeoDataFrame(
        {"country": "AAA"}, geometry=[a, b], index=pd.Index(["a", "b"], name="unit_id")
    )
    for rook in (False, True):
        ref = libpysal_edges(layer.geometry, rook=rook)
        assert ref == {frozenset(("a", "b"))}
        assert bg_edges(border_graph(layer, rule="rook" if rook else "queen")) == ref
