"""Tests of marchland.graph and marchland.graph._contiguity on small invented layers.

What must be covered (after libpysal's contiguity tests): shuffled unit order, string and
integer-like ids, islands, both rules (queen, rook); and for the cross-border part: gaps just
under and over the tolerance, the corner rule (a point contact, a sliver's far end), mixed
levels, extra links and their errors, bad input, inputs never changed. Outside checks (libpysal,
networkx, the demo's truth) are in tests/reference/test_graph_reference.py.
"""

from __future__ import annotations

import sys

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from hypothesis import given, settings
from hypothesis import strategies as st
from libpysal.graph import Graph

from marchland.errors import InputError
from marchland.graph import BorderGraph, as_border_graph, border_graph, edges_layer
from marchland.graph.border import EDGE_COLUMNS

CRS = "EPSG:3035"
CELL = 2000.0


def grid(nx, ny, *, gap=0.0, split=None, cell=CELL, prefix="U"):
    """A grid of square cells; columns >= ``split`` are country BBB in their own file, shifted
    east by ``gap`` metres."""
    rows = []
    for c in range(nx):
        for r in range(ny):
            east = split is not None and c >= split
            dx = gap if east else 0.0
            rows.append(
                {
                    "unit_id": f"{prefix}{c}{r}",
                    "country": "BBB" if east else "AAA",
                    "source": "b.gpkg" if east else "a.gpkg",
                    "geometry": shapely.box(
                        c * cell + dx, r * cell, (c + 1) * cell + dx, (r + 1) * cell
                    ),
                }
            )
    return gpd.GeoDataFrame(rows, crs=CRS).set_index("unit_id")


def pairs(bg, *, cross=None):
    e = bg.edges
    if cross is not None:
        e = e[e["cross_border"] == cross]
    return {frozenset(p) for p in zip(e["focal"], e["neighbor"], strict=True)}


def rook_pairs(nx, ny, prefix="U"):
    out = set()
    for c in range(nx):
        for r in range(ny):
            if c + 1 < nx:
                out.add(frozenset({f"{prefix}{c}{r}", f"{prefix}{c + 1}{r}"}))
            if r + 1 < ny:
                out.add(frozenset({f"{prefix}{c}{r}", f"{prefix}{c}{r + 1}"}))
    return out


# --- the structure -----------------------------------------------------------------------------
def test_edge_table_columns_and_symmetry():
    bg = border_graph(grid(4, 3, gap=100, split=2), tolerance=300)
    assert list(bg.edges.columns[:6]) == list(EDGE_COLUMNS)
    fwd = set(zip(bg.edges["focal"], bg.edges["neighbor"], strict=True))
    assert fwd == {(b, a) for a, b in fwd}
    assert bg.edges["kind"].isin(["shared-boundary", "gap-bridged", "link"]).all()


def test_gap_under_tolerance_joins_straight_border_only():
    bg = border_graph(grid(4, 3, gap=250, split=2), tolerance=300)
    cross = pairs(bg, cross=True)
    # Across the seam only the facing cells (same row), never the diagonal corner pairs.
    assert cross == {frozenset({f"U1{r}", f"U2{r}"}) for r in range(3)}
    e = bg.edges[bg.edges["cross_border"]]
    assert (e["kind"] == "gap-bridged").all()
    np.testing.assert_allclose(e["gap_m"], 250.0)
    # Shared length estimate: within one tolerance of the true facing length (2000 m); the
    # rows at the layer's edge gain a little where both outlines turn along it.
    assert (abs(e["shared_m"] - CELL) <= 300).all()
    middle = e[e["focal"].isin(["U11", "U21"])]
    np.testing.assert_allclose(middle["shared_m"], CELL)
    # Inside each file: exact queen, diagonals included.
    within = pairs(bg, cross=False)
    assert frozenset({"U00", "U11"}) in within


def test_gap_over_tolerance_is_not_bridged():
    bg = border_graph(grid(4, 3, gap=301, split=2), tolerance=300)
    assert pairs(bg, cross=True) == set()
    assert (bg.edges["gap_m"] == 0).all()


def test_zero_tolerance_exact_seam_is_plain_queen():
    layer = grid(4, 3, split=2)
    bg = border_graph(layer, tolerance=0)
    ref = Graph.build_contiguity(layer, rook=False)
    adj = ref.adjacency.reset_index()
    assert pairs(bg) == {frozenset(p) for p in zip(adj["focal"], adj["neighbor"], strict=True)}
    e = bg.edges[bg.edges["cross_border"]]
    assert set(e["kind"]) == {"shared-boundary"}


def test_overlapping_outlines_are_joined_with_zero_gap():
    # The eastern file overlaps the western one by 200 m, as mismatched outlines do.
    bg = border_graph(grid(4, 2, gap=-200, split=2), tolerance=300)
    cross = bg.edges[bg.edges["cross_border"]]
    assert pairs(bg, cross=True) == {frozenset({f"U1{r}", f"U2{r}"}) for r in range(2)}
    assert (cross["gap_m"] == 0).all()
    assert (cross["kind"] == "gap-bridged").all()


def test_rook_rule_within_file():
    bg = border_graph(grid(3, 3), rule="rook")
    assert pairs(bg) == rook_pairs(3, 3)
    with pytest.raises(ValueError, match="'rule' needs to be one of"):
        border_graph(grid(2, 2), rule="bishop")


# --- the corner rule ---------------------------------------------------------------------------
def two_files(a, b):
    return gpd.GeoDataFrame(
        {"country": ["AAA", "BBB"], "source": ["a", "b"]},
        geometry=[a, b],
        index=pd.Index(["a", "b"], name="unit_id"),
        crs=CRS,
    )


def test_point_contact_across_files_is_not_joined():
    layer = two_files(shapely.box(0, 0, 5000, 5000), shapely.box(5000, 5000, 9000, 9000))
    bg = border_graph(layer, tolerance=300)
    assert bg.islands == ["a", "b"]
    # ... but listed for a person to confirm.
    assert bg.left_out[["unit_a", "unit_b", "reason"]].values.tolist() == [["a", "b", "corner"]]
    assert bg.left_out["gap_m"].tolist() == [0.0]
    # Files declared to match exactly (zero tolerance): plain queen joins the point contact,
    # rook does not.
    assert pairs(border_graph(layer, tolerance=0)) == {frozenset("ab")}
    assert border_graph(layer, tolerance=0, rule="rook").islands == ["a", "b"]


@pytest.mark.parametrize("min_shared", [None, 500.0, 5000.0])
def test_true_line_contact_across_files_is_always_joined(min_shared):
    # b touches a's side exactly along 120 m (shorter than the tolerance and min_shared_m).
    layer = two_files(shapely.box(0, 0, 5000, 5000), shapely.box(5000, 4880, 9000, 9000))
    bg = border_graph(layer, tolerance=300, min_shared_m=min_shared)
    assert pairs(bg) == {frozenset("ab")}
    assert bg.edges["kind"].tolist() == ["shared-boundary"] * 2
    np.testing.assert_allclose(bg.edges["shared_m"], 120.0)
    assert len(bg.left_out) == 0


def test_near_corner_within_tolerance_is_not_joined():
    layer = two_files(shapely.box(0, 0, 5000, 5000), shapely.box(5150, 5150, 9000, 9000))
    assert border_graph(layer, tolerance=300).islands == ["a", "b"]


def test_far_end_of_a_sliver_is_not_joined():
    # A 100 m wide, 6 km long sliver whose tip comes within 50 m of a's side.
    sliver = shapely.box(5050, 2000, 11050, 2100)
    layer = two_files(shapely.box(0, 0, 5000, 5000), sliver)
    assert pairs(border_graph(layer, tolerance=300)) == set()
    # A sliver lying along a's side is a neighbour, with its length counted once, not twice.
    along = shapely.box(5050, 0, 5150, 5000)
    bg = border_graph(two_files(shapely.box(0, 0, 5000, 5000), along), tolerance=300)
    assert pairs(bg) == {frozenset("ab")}
    assert bg.edges["shared_m"].iloc[0] < 5000 + 1e-6


@pytest.mark.parametrize(("overlap", "joined"), [(100.0, False), (400.0, False), (900.0, True)])
def test_short_true_border_follows_min_shared(overlap, joined):
    # b's side faces a's side along ``overlap`` metres, 100 m apart; below min_shared_m (500 m)
    # the pair is not joined. Here the estimate is overlap - 117 m (the ends' buffer caps).
    layer = two_files(shapely.box(0, 0, 5000, 5000), shapely.box(5100, 5000 - overlap, 9000, 9000))
    bg = border_graph(layer, tolerance=300, min_shared_m=500)
    assert (pairs(bg) == {frozenset("ab")}) is joined
    if joined:
        assert 500 <= bg.edges["shared_m"].iloc[0] <= overlap + 1e-6


# --- mixed levels, islands, links --------------------------------------------------------------
def test_mixed_levels_province_next_to_districts():
    prov = shapely.box(0, 0, 6000, 6000)
    dists = [shapely.box(6100, y, 9000, y + 2000) for y in (0, 2000, 4000)]
    layer = gpd.GeoDataFrame(
        {
            "country": ["OOO", "TTT", "TTT", "TTT"],
            "level": [1, 2, 2, 2],
            "source": ["o1", "t2", "t2", "t2"],
        },
        geometry=[prov, *dists],
        index=pd.Index(["OOO-01", "TTT-01-01", "TTT-01-02", "TTT-01-03"], name="unit_id"),
        crs=CRS,
    )
    bg = border_graph(layer, tolerance=300)
    assert sorted(bg.edges.loc[bg.edges["focal"] == "OOO-01", "neighbor"]) == [
        "TTT-01-01",
        "TTT-01-02",
        "TTT-01-03",
    ]


def test_islands_are_reported_and_have_zero_self_weight():
    layer = grid(2, 1)
    far = gpd.GeoDataFrame(
        {"country": ["AAA"], "source": ["a.gpkg"]},
        geometry=[shapely.box(50_000, 0, 52_000, 2000)],
        index=pd.Index(["far"], name="unit_id"),
        crs=CRS,
    )
    bg = border_graph(pd.concat([layer, far]), tolerance=300)
    assert bg.islands == ["far"]
    w = bg.graph
    assert list(w.unique_ids) == ["U00", "U10", "far"]
    assert w.adjacency.loc[("far", "far")] == 0
    assert bg.hops_from(["U00"]).isna().tolist() == [False, False, True]


def links_table(*rows):
    return pd.DataFrame(rows, columns=["from_id", "to_id", "kind", "name"])


def test_links_add_edges_of_kind_link():
    layer = grid(4, 2, gap=5000, split=2)  # a 5 km lake between the countries
    bg = border_graph(
        layer, tolerance=300, links=links_table(("U10", "U20", "ferry", "Ivesse crossing"))
    )
    e = bg.edges[bg.edges["kind"] == "link"]
    assert set(zip(e["focal"], e["neighbor"], strict=True)) == {("U10", "U20"), ("U20", "U10")}
    assert e["link_kind"].tolist() == ["ferry", "ferry"]
    assert e["link_name"].tolist() == ["Ivesse crossing"] * 2
    np.testing.assert_allclose(e["gap_m"], 5000.0)
    assert e["cross_border"].all()
    assert e["shared_m"].isna().all()
    # Boundary edges carry no link kind.
    assert bg.edges.loc[bg.edges["kind"] != "link", "link_kind"].isna().all()


def test_link_over_an_existing_edge_keeps_its_boundary_kind():
    bg = border_graph(grid(2, 1), links=links_table(("U00", "U10", "bridge", "Senn bridge")))
    assert bg.edges["kind"].tolist() == ["shared-boundary"] * 2
    assert bg.edges["link_kind"].tolist() == ["bridge"] * 2


def test_link_csv_path(tmp_path):
    path = tmp_path / "links.csv"
    links_table(("U00", "U20", "road", "")).to_csv(path, index=False)
    bg = border_graph(grid(3, 1), links=path)
    assert frozenset({"U00", "U20"}) in pairs(bg)


@pytest.mark.parametrize(
    ("row", "column", "table"),
    [
        (2, "to_id", links_table(("U00", "U10", "road", "ok"), ("U00", "U99", "road", "bad"))),
        (1, "from_id", links_table(("nowhere", "U10", "ferry", "bad"))),
        (1, "to_id", links_table(("U00", "U00", "ferry", "self"))),
    ],
)
def test_bad_link_rows_name_the_row(row, column, table):
    with pytest.raises(InputError) as err:
        border_graph(grid(2, 1), links=table)
    assert err.value.row == row
    assert err.value.column == column


def test_link_naming_a_district_of_a_province_level_country_gets_a_hint():
    layer = grid(2, 1, prefix="OSK-0")
    table = links_table(("OSK-000-04", "OSK-010", "ferry", ""))
    with pytest.raises(InputError, match="name 'OSK-000' instead"):
        border_graph(layer, links=table)


def test_links_table_missing_column():
    with pytest.raises(InputError, match="'to_id' is missing"):
        border_graph(grid(2, 1), links=pd.DataFrame({"from_id": ["U00"]}))


# --- bad input, inputs unchanged ---------------------------------------------------------------
def test_bad_units_raise_input_error():
    layer = grid(2, 1)
    with pytest.raises(InputError, match="geographic CRS"):
        border_graph(layer.to_crs("EPSG:4326"), tolerance=300)
    with pytest.raises(InputError, match="no CRS"):
        border_graph(layer.set_crs(None, allow_override=True), tolerance=300)
    with pytest.raises(InputError, match="'country'"):
        border_graph(layer.drop(columns="country"))
    bow = shapely.Polygon([(0, 0), (10, 10), (10, 0), (0, 10)])
    bad = layer.copy()
    bad.loc["U10", "geometry"] = bow
    with pytest.raises(InputError, match="not valid") as err:
        border_graph(bad)
    assert err.value.value == "U10"
    dup = pd.concat([layer, layer.iloc[:1]])
    with pytest.raises(InputError, match="unique"):
        border_graph(dup)
    with pytest.raises(InputError, match="tolerance"):
        border_graph(layer, tolerance=-1)


def test_inputs_are_not_changed():
    layer = grid(4, 2, gap=100, split=2)
    links = links_table(("U00", "U30", "ferry", "x"))
    before, links_before = layer.copy(), links.copy()
    bg = border_graph(layer, tolerance=300, links=links)
    pd.testing.assert_frame_equal(layer, before)
    pd.testing.assert_frame_equal(links, links_before)
    e = bg.edges.copy()
    BorderGraph(e, bg.ids).higher_order(2)
    pd.testing.assert_frame_equal(e, bg.edges)


def test_without_source_column_each_country_is_one_file():
    layer = grid(4, 2, gap=100, split=2)
    bg = border_graph(layer.drop(columns="source"), tolerance=300)
    assert pairs(bg) == pairs(border_graph(layer, tolerance=300))


# --- order and ids do not matter (parametrised, as libpysal's contiguity tests) ----------------
def voronoi_layer(n, seed, countries=2):
    rng = np.random.default_rng(seed)
    frame = shapely.box(0, 0, 20_000, 20_000)
    pts = shapely.multipoints(rng.uniform(0, 20_000, (n, 2)))
    cells = shapely.intersection(
        shapely.get_parts(shapely.voronoi_polygons(pts, extend_to=frame)), frame
    )
    x = shapely.get_coordinates(shapely.centroid(cells))[:, 0]
    band = np.minimum((x / 20_000 * countries).astype(int), countries - 1)
    code = np.array(["AAA", "BBB", "CCC", "DDD"])[band]
    return gpd.GeoDataFrame(
        {"country": code, "source": [f"{c}.gpkg" for c in code]},
        geometry=cells,
        index=pd.Index([f"V{k:03d}" for k in range(len(cells))], name="unit_id"),
        crs=CRS,
    )


@pytest.mark.parametrize("rule", ["queen", "rook"])
def test_coordinate_hash_collisions_fall_back_to_an_exact_sort(monkeypatch, rule):
    # Vertices and segments are joined by sorting a 64-bit hash of their coordinates; two
    # different coordinates with one hash must not split a run of equal ones. With every
    # multiplier zero, all rows of a file share one hash: the exact lexsort must take over and
    # give the very same graph (edges, shared lengths, left-out pairs).
    from marchland.graph import _contiguity

    layer = voronoi_layer(80, seed=6)
    ref = border_graph(layer, tolerance=300, rule=rule)
    zero = tuple(np.uint64(0) for _ in _contiguity._HASH_MULTIPLIERS)
    monkeypatch.setattr(_contiguity, "_HASH_MULTIPLIERS", zero)
    calls = []
    lexsort = np.lexsort

    def spy(keys, *args, **kwargs):
        calls.append(sys._getframe(1).f_code.co_name)  # who sorted (pandas may too)
        return lexsort(keys, *args, **kwargs)

    monkeypatch.setattr(np, "lexsort", spy)
    bg = border_graph(layer, tolerance=300, rule=rule)
    # Once for the segments, and for the vertices under queen.
    assert calls.count("_sorted_runs") == (2 if rule == "queen" else 1)
    pd.testing.assert_frame_equal(bg.edges, ref.edges)
    pd.testing.assert_frame_equal(bg.left_out, ref.left_out)
    assert (ref.edges["kind"] == "shared-boundary").sum() > 100


@pytest.mark.parametrize("ids", ["string", "integer-like", "integer"])
@pytest.mark.parametrize("shuffle", [False, True])
@pytest.mark.parametrize("rule", ["queen", "rook"])
def test_order_and_id_type_do_not_change_the_graph(ids, shuffle, rule):
    base = voronoi_layer(60, seed=3)
    ref = pairs(border_graph(base, tolerance=300, rule=rule))
    layer = base.copy()
    rename = {u: u for u in layer.index}
    if ids != "string":
        rename = {u: (str(k) if ids == "integer-like" else k) for k, u in enumerate(layer.index)}
        layer.index = pd.Index([rename[u] for u in layer.index], name="unit_id")
    if shuffle:
        layer = layer.sample(frac=1, random_state=np.random.RandomState(7))
    bg = border_graph(layer, tolerance=300, rule=rule)
    back = {v: k for k, v in rename.items()}
    assert {frozenset(back[u] for u in p) for p in pairs(bg)} == ref
    assert list(bg.ids) == list(layer.index)


# --- hypothesis: perturbation below the tolerance, symmetry ------------------------------------
NX, NY = 6, 4  # grid of cells; columns >= 3 are country BBB in their own file


def perturbed(shift_b, shift_a=None):
    """The exact grid with every vertex of BBB's file moved by ``shift_b[col, row]`` (and of
    AAA's file by ``shift_a``).

    Moving each vertex consistently keeps each file topologically clean while their border no
    longer matches: the situation the tolerance is for.
    """
    layer = grid(NX, NY, split=3)
    geoms = layer.geometry.to_numpy().copy()
    for code, shift in (("BBB", shift_b), ("AAA", shift_a)):
        if shift is None:
            continue

        def move(xy, shift=shift):
            c = np.rint(xy[:, 0] / CELL).astype(int)
            r = np.rint(xy[:, 1] / CELL).astype(int)
            return xy + shift[c, r]

        sel = (layer["country"] == code).to_numpy()
        geoms[sel] = shapely.transform(geoms[sel], move)
    return layer.set_geometry(gpd.GeoSeries(geoms, index=layer.index, crs=CRS))


N_VERTICES = (NX + 1) * (NY + 1)


def shifts(scale):
    """Hypothesis strategy: one displacement per grid vertex, each shorter than ``scale``."""
    radius = st.lists(st.floats(0, 1), min_size=N_VERTICES, max_size=N_VERTICES)
    angle = st.lists(st.floats(0, 2 * np.pi), min_size=N_VERTICES, max_size=N_VERTICES)

    def build(r, a):
        r = np.asarray(r).reshape(NX + 1, NY + 1) * scale
        a = np.asarray(a).reshape(NX + 1, NY + 1)
        return np.stack([r * np.cos(a), r * np.sin(a)], axis=-1)

    return st.builds(build, radius, angle)


TOL = 300.0


SEAM = 3  # grid column of the vertices on the border between the files
FACING = {frozenset({f"U2{r}", f"U3{r}"}) for r in range(NY)}
DIAGONAL = {
    frozenset({f"U2{r}", f"U3{r + d}"}) for r in range(NY) for d in (-1, 1) if 0 <= r + d < NY
}


def across(shift, *, rigid=False):
    """Keep only the move across the border (x) of the seam's vertices (the same for all of
    them with ``rigid``); vertices off the seam keep their move in any direction."""
    shift = shift.copy()
    shift[SEAM, :, 1] = 0.0
    if rigid:
        shift[SEAM, :, 0] = shift[SEAM, 0, 0]
    return shift


# The graph is unchanged only by moves *across* the border. A seam vertex sliding *along* it
# (y) makes a cell face the next row's cell of the other file over up to the slide's length
# (up to 285 m here, or true contact along a line when the vertex stays on the line): the same
# geometry as a short true border, which is always joined (module docs of _contiguity). For
# slides the property that holds is that no neighbour is ever lost (next test).
@settings(max_examples=40, deadline=None)
@given(shift=shifts(0.95 * TOL))
def test_moving_one_files_border_across_it_below_tolerance_never_changes_the_graph(shift):
    ref = border_graph(grid(NX, NY, split=3), tolerance=TOL)
    bg = border_graph(perturbed(across(shift)), tolerance=TOL)
    assert pairs(bg) == pairs(ref)
    assert pairs(bg, cross=True) == FACING


@settings(max_examples=30, deadline=None)
@given(shift_b=shifts(0.47 * TOL), shift_a=shifts(0.47 * TOL))
def test_moving_files_in_any_direction_below_tolerance_never_loses_a_neighbour(shift_b, shift_a):
    # Each file moves by under half the tolerance, so the outlines stay within it of each other.
    layer = perturbed(shift_b, shift_a)
    bg = border_graph(layer, tolerance=TOL)
    ref = pairs(border_graph(grid(NX, NY, split=3), tolerance=TOL))
    found = pairs(bg)
    assert ref <= found
    # Anything added is a pair meeting at a corner before the move, and within the tolerance.
    assert found - ref <= DIAGONAL
    geo = layer.geometry
    d = shapely.distance(
        geo.loc[bg.edges["focal"]].to_numpy(), geo.loc[bg.edges["neighbor"]].to_numpy()
    )
    assert (d <= TOL + 1e-6).all()
    # Pairs within the tolerance left out are listed: together with the edges, every diagonal.
    lo = {frozenset(p) for p in zip(bg.left_out["unit_a"], bg.left_out["unit_b"], strict=True)}
    near = {
        p for p in DIAGONAL if geo.loc[list(p)].iloc[0].distance(geo.loc[list(p)].iloc[1]) <= TOL
    }
    assert near <= lo | found
    assert not lo & found


@settings(max_examples=25, deadline=None)
@given(shift_b=shifts(0.47 * TOL), shift_a=shifts(0.47 * TOL))
def test_perturbing_both_files_across_the_border_never_changes_the_graph(shift_b, shift_a):
    # One file's border moves vertex by vertex across itself, the other's as a whole (a file
    # pulled away); off the seam both move freely. Two seams bent independently can make a
    # corner pair face each other over a few tens of metres at a junction (the flat caps are
    # square to differently slanted ends), which is the slide case again.
    ref = border_graph(grid(NX, NY, split=3), tolerance=TOL)
    bg = border_graph(perturbed(across(shift_b), across(shift_a, rigid=True)), tolerance=TOL)
    assert pairs(bg) == pairs(ref)


@settings(max_examples=25, deadline=None)
@given(
    n=st.integers(5, 60),
    seed=st.integers(0, 10_000),
    tol=st.sampled_from([0.0, 50.0, 300.0, 1000.0]),
    countries=st.integers(1, 4),
)
def test_graph_is_always_symmetric_and_within_tolerance(n, seed, tol, countries):
    layer = voronoi_layer(n, seed, countries)
    bg = border_graph(layer, tolerance=tol)
    a = set(zip(bg.edges["focal"], bg.edges["neighbor"], strict=True))
    assert a == {(j, i) for i, j in a}
    geo = layer.geometry
    d = shapely.distance(
        geo.loc[bg.edges["focal"]].to_numpy(), geo.loc[bg.edges["neighbor"]].to_numpy()
    )
    assert (d <= tol + 1e-6).all()
    w = bg.weights("shared", row_standardise=True)
    sums = w.adjacency.groupby(level=0).sum()
    np.testing.assert_allclose(sums.drop(bg.islands), 1.0)


# --- weights, views, higher order, layer -------------------------------------------------------
def test_weights_shared_are_boundary_lengths():
    bg = border_graph(grid(3, 1))
    w = bg.weights("shared").adjacency
    assert w.loc[("U00", "U10")] == pytest.approx(CELL)
    with pytest.raises(ValueError, match="'weighting' needs to be one of"):
        bg.weights("inverse")


def test_as_border_graph_accepts_both_kinds():
    bg = border_graph(grid(3, 2))
    assert as_border_graph(bg) is bg
    wrapped = as_border_graph(bg.graph)
    assert pairs(wrapped) == pairs(bg)
    with pytest.raises(TypeError):
        as_border_graph("not a graph")


def test_higher_order_kinds_and_cross_border():
    layer = grid(4, 1, gap=100, split=2)
    links = links_table(("U00", "U30", "ferry", ""))
    bg = border_graph(layer, tolerance=300, links=links)
    h2 = bg.higher_order(2)
    e = h2.edges.set_index(["focal", "neighbor"])
    # U00 -> U20: shared (U00-U10) then gap-bridged (U10-U20); also via the ferry U00-U30-U20.
    assert e.loc[("U00", "U20"), "kind"] == "gap-bridged"
    assert bool(e.loc[("U00", "U20"), "cross_border"]) is True
    # U10 -> U30 needs no link either: U10-U20 gap-bridged, U20-U30 shared.
    assert e.loc[("U10", "U30"), "kind"] == "gap-bridged"
    # Without stored countries the cross-border mark comes from the first-order edges.
    plain = BorderGraph(bg.edges, bg.ids).higher_order(2)
    pd.testing.assert_series_equal(
        plain.edges["cross_border"], h2.edges["cross_border"], check_names=False
    )
    with pytest.raises(ValueError, match="'k' needs"):
        bg.higher_order(0)


def test_higher_order_link_kind_when_only_links_reach():
    layer = grid(1, 1)
    far = grid(1, 2, prefix="F").set_geometry(grid(1, 2, prefix="F").geometry.translate(50_000, 0))
    links = links_table(("U00", "F00", "ferry", ""))
    bg = border_graph(pd.concat([layer, far]), links=links)
    e = bg.higher_order(2).edges.set_index(["focal", "neighbor"])
    assert e.loc[("U00", "F01"), "kind"] == "link"


def test_edges_layer_one_line_per_pair_between_centroids():
    layer = grid(3, 2, gap=100, split=2)
    bg = border_graph(layer, tolerance=300)
    out = edges_layer(bg, layer)
    assert len(out) == len(bg.edges) // 2
    assert {frozenset(p) for p in zip(out["focal"], out["neighbor"], strict=True)} == pairs(bg)
    assert out.crs == layer.crs
    start = shapely.get_point(out.geometry.to_numpy(), 0)
    cent = layer.geometry.centroid.loc[out["focal"]].to_numpy()
    np.testing.assert_allclose(shapely.distance(start, cent), 0.0)
    with pytest.raises(InputError, match="cover"):
        edges_layer(bg, layer.iloc[:2])


def test_border_graph_validates_edges():
    e = pd.DataFrame(
        {
            "focal": ["a"],
            "neighbor": ["b"],
            "shared_m": 1.0,
            "gap_m": 0.0,
            "cross_border": False,
            "kind": "shared-boundary",
        }
    )
    with pytest.raises(ValueError, match="both directions"):
        BorderGraph(e, pd.Index(["a", "b"]))
    with pytest.raises(ValueError, match="not in ids"):
        BorderGraph(e, pd.Index(["a"]))


def test_links_naming_districts_climb_to_province_units():
    from marchland.errors import DataWarning

    layer = grid(2, 1, prefix="P")  # two province-level units P00, P10
    parents = pd.Series({"P00-01": "P00", "P00-02": "P00", "P10-07": "P10"})
    table = links_table(("P00-01", "P10-07", "ferry", "x"), ("P00-01", "P00-02", "road", "y"))
    with pytest.warns(DataWarning, match=r"rows \[2\]"):
        bg = border_graph(layer, links=table, parents=parents)
    # P00-P10 already share a boundary; the ferry is recorded on that edge.
    assert bg.edges["link_kind"].tolist() == ["ferry", "ferry"]
    with pytest.raises(InputError) as err:
        border_graph(layer, links=links_table(("P99-01", "P10", "ferry", "")), parents=parents)
    assert (err.value.row, err.value.column, err.value.value) == (1, "from_id", "P99-01")


def test_units_in_feet_or_empty_are_rejected():
    layer = grid(2, 1)
    with pytest.raises(InputError, match="measured in"):
        border_graph(layer.set_crs("EPSG:2263", allow_override=True), tolerance=300)
    with pytest.raises(InputError, match="no analysis units"):
        border_graph(layer.iloc[:0])


def test_single_unit_is_an_island():
    bg = border_graph(grid(1, 1), tolerance=300)
    assert bg.islands == ["U00"]
    assert len(bg.edges) == 0
    assert bg.hops_from(["U00"]).tolist() == [0]


def test_tiled_files_sliding_along_the_border_estimate_the_overlap():
    # The eastern file is 50 m east and 150 m north of the western one: facing cells overlap
    # along 1850 m, and the next row's cells along 150 m only (not joined).
    layer = grid(4, 3, split=2)
    east = (layer["country"] == "BBB").to_numpy()
    geoms = layer.geometry.to_numpy().copy()
    geoms[east] = shapely.transform(geoms[east], lambda xy: xy + [50.0, 150.0])
    layer = layer.set_geometry(gpd.GeoSeries(geoms, index=layer.index, crs=CRS))
    facing = {frozenset({f"U1{r}", f"U2{r}"}) for r in range(3)}
    next_row = {frozenset({f"U1{r + 1}", f"U2{r}"}) for r in range(2)}
    bg = border_graph(layer, tolerance=300, min_shared_m=500)
    assert pairs(bg, cross=True) == facing
    e = bg.edges.set_index(["focal", "neighbor"])
    # Middle row: the outlines end at the cell junctions, where the flat-capped buffers stop.
    assert e.loc[("U11", "U21"), "shared_m"] == pytest.approx(1850, abs=1e-6)
    assert e.loc[("U21", "U11"), "shared_m"] == pytest.approx(1850, abs=1e-6)
    # The next row's pairs face each other along 150 m: below min_shared_m, so listed.
    short = bg.left_out[bg.left_out["reason"] == "short"]
    assert {frozenset(p) for p in zip(short["unit_a"], short["unit_b"], strict=True)} == next_row
    np.testing.assert_allclose(short["near_shared_m"], 150.0, atol=1e-6)
    # By default any positive near-shared length joins: a slide along the border cannot be
    # told from a short true border (module docs), and a missed neighbour is the worse error.
    assert pairs(border_graph(layer, tolerance=300), cross=True) == facing | next_row


def test_strict_finds_neighbours_without_shared_vertices():
    a = shapely.box(0, 0, 10, 10)
    b = shapely.Polygon([(10, 2), (20, 2), (20, 8), (10, 8)])  # meets a's side mid-edge
    layer = gpd.GeoDataFrame(
        {"country": ["AAA", "AAA"], "source": ["one", "one"]},
        geometry=[a, b],
        index=pd.Index(["a", "b"], name="unit_id"),
        crs=CRS,
    )
    assert border_graph(layer).islands == ["a", "b"]  # vertex method: no shared vertex
    bg = border_graph(layer, strict=True)
    assert pairs(bg) == {frozenset("ab")}
    assert bg.edges["shared_m"].tolist() == [6.0, 6.0]


def test_nested_units_of_two_files_warn_of_mixed_levels():
    from marchland.errors import DataWarning

    layer = two_files(shapely.box(0, 0, 5000, 5000), shapely.box(0, 0, 2500, 5000))
    with pytest.warns(DataWarning, match="overlap by more than half"):
        border_graph(layer, tolerance=300)


def test_blank_link_kind_becomes_link():
    table = pd.DataFrame({"from_id": ["U00"], "to_id": ["U20"], "kind": [""], "name": ["x"]})
    bg = border_graph(grid(3, 1), links=table)
    e = bg.edges[bg.edges["kind"] == "link"]
    assert e["link_kind"].tolist() == ["link", "link"]


def test_hops_from_unknown_or_no_sources():
    bg = border_graph(grid(2, 1))
    with pytest.raises(KeyError, match="nowhere"):
        bg.hops_from(["U00", "nowhere"])
    assert bg.hops_from([]).isna().all()
