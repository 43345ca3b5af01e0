"""Unit and property tests for marchland.stats.autocorrelation on small invented graphs.

Covered, each over both graph kinds (BorderGraph and plain libpysal Graph) where a graph is
involved: islands and units without a value (NaN with a reason, not tested, their own label),
units whose only neighbours have no value, string ids in shuffled order (values aligned by
id, statistics unchanged), fixed seeds (same seed same result; a Generator works), inputs left
unchanged, labels set only where q < fdr, the two permutation paths agreeing, shared-boundary
weighting, the palette covering every label, Gi* labels by sign, and clear errors for bad
input. Outside checks (esda, statsmodels, published values) are in
tests/reference/test_hotspots_reference.py.
"""

from __future__ import annotations

import re

import numpy as np
import pandas as pd
import pytest
from hypothesis import given, settings
from hypothesis import strategies as st
from libpysal.graph import Graph
from scipy import sparse

from marchland.errors import InputError
from marchland.graph import BorderGraph
from marchland.stats import _permute, eb_standardised
from marchland.stats.autocorrelation import (
    CLUSTER_COLOURS,
    CLUSTER_LEGEND,
    HOTSPOT_COLOURS,
    LOCAL_COLUMNS,
    NO_NEIGHBOURS,
    NO_VALUE,
    NOT_SIGNIFICANT,
    QUADRANTS,
    GlobalMoran,
    getis_ord,
    global_moran,
    hotspots,
    local_moran,
)

KINDS = ["BorderGraph", "Graph"]


def _grid(rows: int, cols: int, *, island: bool = False) -> BorderGraph:
    """Rook grid with ids like 'TVR-r-c' (plus one unit with no neighbour)."""
    ids = [f"TVR-{r:02d}-{c:02d}" for r in range(rows) for c in range(cols)]
    focal, neigh = [], []
    for r in range(rows):
        for c in range(cols):
            for dr, dc in ((0, 1), (1, 0)):
                if r + dr < rows and c + dc < cols:
                    a, b = ids[r * cols + c], ids[(r + dr) * cols + c + dc]
                    focal += [a, b]
                    neigh += [b, a]
    if island:
        ids.append("QLN-99-01")
    edges = pd.DataFrame(
        {
            "focal": focal,
            "neighbor": neigh,
            "shared_m": np.linspace(100, 900, len(focal)),
            "gap_m": 0.0,
            "cross_border": False,
            "kind": "shared-boundary",
        }
    )
    return BorderGraph(edges=edges, ids=pd.Index(ids))


def _as(bg: BorderGraph, kind: str):
    return bg if kind == "BorderGraph" else bg.weights("binary")


def _values(bg: BorderGraph, seed: int = 0) -> pd.Series:
    rng = np.random.default_rng(seed)
    n = len(bg.ids)
    base = np.where(np.arange(n) < n // 4, 10.0, 2.0)
    return pd.Series(base + rng.normal(0, 0.5, n), index=bg.ids)


@pytest.mark.parametrize("kind", KINDS)
def test_columns_index_and_labels(kind):
    bg = _grid(8, 8)
    # 16 high units of 64: a two-sided conditional p cannot fall far below (15/63)^3, so
    # q stays near 0.07 on this small grid; test the labelling rule at fdr = 0.1.
    res = local_moran(_values(bg), _as(bg, kind), permutations=199, seed=1, fdr=0.1)
    assert tuple(res.columns) == LOCAL_COLUMNS
    assert res.index.name == "unit_id" and list(res.index) == list(bg.ids)
    assert set(res["quadrant"]) <= set(QUADRANTS)
    labelled = res["label"] != NOT_SIGNIFICANT
    assert labelled.any()
    assert (res.loc[labelled, "q"] < 0.1).all() and (res.loc[~labelled, "q"] >= 0.1).all()
    assert (res.loc[labelled, "label"] == res.loc[labelled, "quadrant"]).all()
    assert res["reason"].isna().all()
    assert (res["q"] >= res["p"]).all()


@pytest.mark.parametrize("kind", KINDS)
def test_islands_and_missing_values_are_not_tested(kind):
    bg = _grid(6, 6, island=True)
    values = _values(bg)
    values["TVR-00-01"] = np.nan
    values["TVR-01-00"] = np.nan  # now TVR-00-00 has no neighbour with a value
    res = local_moran(values, _as(bg, kind), permutations=99, seed=2)
    isl = res.loc["QLN-99-01"]
    assert np.isnan(isl["I"]) and np.isnan(isl["p"]) and np.isnan(isl["q"])
    assert isl["label"] == NO_NEIGHBOURS and isl["reason"] == "no neighbours in the graph"
    assert res.loc["TVR-00-01", "label"] == NO_VALUE
    assert "not reported" in res.loc["TVR-00-01", "reason"]
    assert res.loc["TVR-00-00", "reason"] == "no neighbour with a value"
    assert res.loc["TVR-00-00", "label"] == NO_NEIGHBOURS
    tested = res["reason"].isna()
    assert tested.sum() == len(bg.ids) - 4
    assert res.loc[tested, "p"].notna().all()
    # q-values are adjusted over the tested units only
    assert res.loc[tested, "q"].notna().all() and res.loc[~tested, "q"].isna().all()


@pytest.mark.parametrize("kind", KINDS)
def test_values_aligned_by_id_not_position(kind):
    bg = _grid(6, 7)
    values = _values(bg)
    shuffled = values.sample(frac=1, random_state=np.random.RandomState(3))
    a = local_moran(values, _as(bg, kind), permutations=99, seed=4)
    b = local_moran(shuffled, _as(bg, kind), permutations=99, seed=4)
    pd.testing.assert_frame_equal(a, b)


def test_statistic_unchanged_when_graph_order_changes():
    bg = _grid(5, 6)
    values = _values(bg)
    rev = BorderGraph(edges=bg.edges, ids=bg.ids[::-1])
    a = local_moran(values, bg, permutations=99, seed=5)
    b = local_moran(values, rev, permutations=99, seed=5).loc[a.index]
    np.testing.assert_allclose(a["I"], b["I"], rtol=1e-12)
    assert (a["quadrant"] == b["quadrant"]).all()


def test_seeds_reproduce_and_generators_work():
    bg = _grid(6, 6)
    v = _values(bg)
    a = local_moran(v, bg, permutations=99, seed=11)
    pd.testing.assert_frame_equal(a, local_moran(v, bg, permutations=99, seed=11))
    b = local_moran(v, bg, permutations=99, seed=12)
    assert not np.array_equal(a["p"], b["p"])
    c = local_moran(v, bg, permutations=99, seed=np.random.default_rng(11))
    pd.testing.assert_frame_equal(a, c)


def test_inputs_not_changed():
    bg = _grid(5, 5)
    edges0 = bg.edges.copy()
    v = _values(bg)
    v0 = v.copy()
    cases = pd.Series(np.arange(25), index=bg.ids)
    pop = pd.Series(np.full(25, 1000.0), index=bg.ids)
    local_moran(v, bg, permutations=9, seed=1)
    hotspots(cases, pop, bg, permutations=9, seed=1)
    getis_ord(v, bg, permutations=9, seed=1)
    pd.testing.assert_series_equal(v, v0)
    pd.testing.assert_frame_equal(bg.edges, edges0)


def test_hotspots_is_local_moran_of_eb_standardised_rates():
    bg = _grid(7, 7)
    rng = np.random.default_rng(8)
    pop = pd.Series(rng.integers(500, 50_000, 49), index=bg.ids)
    cases = pd.Series(rng.poisson(pop * 0.002), index=bg.ids)
    cases.iloc[[3, 4]] = pd.NA
    a = hotspots(cases.astype("Int64"), pop, bg, permutations=99, seed=9)
    b = local_moran(eb_standardised(cases.astype("Int64"), pop), bg, permutations=99, seed=9)
    pd.testing.assert_frame_equal(a, b)
    assert (a["label"].iloc[[3, 4]] == NO_VALUE).all()


def test_step_and_gather_paths_agree():
    bg = _grid(9, 9)
    z = _values(bg).to_numpy()
    z = (z - z.mean()) / z.std()
    w = sparse.csr_matrix(bg.weights("binary", row_standardise=True).sparse)
    w.eliminate_zeros()
    obs = z * (w @ z)
    table = _permute.permutation_table(len(z), 4, 199, np.random.default_rng(0))
    stat = lambda u, lag: z[u][None, :] * lag  # noqa: E731
    a = _permute.tail_counts(z, w, obs, table, stat, method="gather")
    b = _permute.tail_counts(z, w, obs, table, stat, method="step")
    for x, y in zip(a, b, strict=True):
        np.testing.assert_allclose(x, y, rtol=1e-9)


def test_shared_weighting_uses_boundary_lengths():
    bg = _grid(6, 6)
    v = _values(bg)
    binary = local_moran(v, bg, permutations=99, seed=1)
    shared = local_moran(v, bg, permutations=99, seed=1, weighting="shared")
    assert not np.allclose(binary["I"], shared["I"])
    w = bg.weights("shared", row_standardise=True)
    z = (v - v.mean()) / v.std(ddof=0)
    np.testing.assert_allclose(shared["lag"], w.lag(z.to_numpy()), rtol=1e-12)


def test_palette_and_legend_cover_every_label():
    labels = {*QUADRANTS, NOT_SIGNIFICANT, NO_NEIGHBOURS, NO_VALUE}
    assert set(CLUSTER_COLOURS) == labels == set(CLUSTER_LEGEND)
    assert set(HOTSPOT_COLOURS) == {"Hot spot", "Cold spot", NOT_SIGNIFICANT, NO_NEIGHBOURS,
                                    NO_VALUE}  # fmt: skip
    colours = list(CLUSTER_COLOURS.values())
    assert len(set(colours)) == len(colours)
    assert all(re.fullmatch(r"#[0-9a-f]{6}", c) for c in colours)


@pytest.mark.parametrize("kind", KINDS)
def test_gi_star_labels_follow_the_sign_of_z(kind):
    bg = _grid(12, 12, island=True)
    rng = np.random.default_rng(4)
    r, c = np.divmod(np.arange(len(bg.ids)), 12)
    v = pd.Series(np.where((r < 4) & (c < 4), 20.0, 2.0) + rng.uniform(0, 1, len(r)), bg.ids)
    res = getis_ord(v, _as(bg, kind), permutations=999, seed=3)
    assert list(res.columns) == ["G", "z", "p_norm", "p", "q", "label", "draws", "reason"]
    assert (res["draws"] >= 999).sum() == 144 and res.loc["QLN-99-01", "draws"] == 0
    hot, cold = res["label"] == "Hot spot", res["label"] == "Cold spot"
    assert hot.sum() >= 8  # the raised 4 x 4 block
    assert (res.loc[hot, "z"] > 0).all() and (res.loc[cold, "z"] < 0).all()
    assert res.loc["QLN-99-01", "label"] == NO_NEIGHBOURS
    with pytest.raises(InputError, match="values >= 0"):
        getis_ord(v - 5, bg, permutations=9)


@pytest.mark.parametrize("kind", KINDS)
def test_global_moran_is_frozen_and_detects_clustering(kind):
    bg = _grid(8, 8)
    gm = global_moran(_values(bg), _as(bg, kind), permutations=199, seed=1)
    assert isinstance(gm, GlobalMoran)
    assert gm.I > 0.3 and gm.p_sim == pytest.approx(1 / 200) and gm.n == 64
    with pytest.raises(AttributeError):
        gm.I = 0  # type: ignore[misc]
    assert gm.as_series()["I"] == gm.I


def test_bad_input_is_named():
    bg = _grid(4, 4)
    v = _values(bg)
    with pytest.raises(InputError, match="same unit_ids"):
        local_moran(v.iloc[:-1], bg)
    with pytest.raises(TypeError, match="pandas Series"):
        local_moran(v.to_numpy(), bg)
    with pytest.raises(TypeError, match="BorderGraph or a libpysal"):
        local_moran(v, {"a": "b"})
    with pytest.raises(ValueError, match="'permutations'"):
        local_moran(v, bg, permutations=0)
    with pytest.raises(ValueError, match="'fdr'"):
        local_moran(v, bg, fdr=5)
    with pytest.raises(ValueError, match="'weighting'"):
        local_moran(v, bg, weighting="queen")
    with pytest.raises(InputError, match="finite"):
        local_moran(v.replace(v.iloc[0], np.inf), bg)
    flat = local_moran(pd.Series(1.0, index=bg.ids), bg, permutations=9)
    assert (flat["reason"] == "all values equal").all() and flat["I"].isna().all()


@settings(max_examples=25, deadline=None)
@given(n=st.integers(3, 60), k=st.integers(1, 2), perms=st.integers(1, 40), seed=st.integers(0, 99))
def test_permutation_table_draws_distinct_other_units(n, k, perms, seed):
    k = min(k, n - 1)
    table = _permute.permutation_table(n, k, perms, np.random.default_rng(seed))
    assert table.shape == (perms, k)
    assert table.min() >= 0 and table.max() <= n - 2  # drawn from the n - 1 others
    assert all(len(set(row)) == k for row in table)


@settings(max_examples=50, deadline=None)
@given(st.integers(0, 999), st.integers(0, 999))
def test_folded_p_is_a_valid_pseudo_p_value(at_least, ties):
    at_least = min(at_least, 999)
    at_most = min(999 - at_least + ties, 999)
    p = _permute.folded_pvalues(np.array([at_least]), np.array([at_most]), 999)[0]
    assert 1 / 1000 <= p <= 1
    if ties == 0:  # esda's definition
        assert p == (min(at_least, 999 - at_least) + 1) / 1000


def test_plain_graph_ids_and_islands_kept():
    adj = pd.DataFrame(
        {
            "focal": ["a", "b", "b", "c", "d"],
            "neighbor": ["b", "a", "c", "b", "d"],
            "weight": [1.0, 1.0, 1.0, 1.0, 0.0],  # d: libpysal's island convention
        }
    )
    g = Graph.from_adjacency(adj)
    res = local_moran(pd.Series([1.0, 5.0, 2.0, 3.0], index=list("dcba")), g, permutations=9)
    assert list(res.index) == list(g.unique_ids)
    assert res.loc["d", "label"] == NO_NEIGHBOURS


# --- the demo scenario: the simulated hot area is found --------------------------------------
@pytest.fixture(scope="module")
def demo_region():
    import warnings

    from marchland.demo import scenario_path
    from marchland.pack.region import open_region

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # the demo's deliberate input problems warn
        region = open_region(scenario_path())
        _ = region.graph
    return region


def test_demo_hot_area_is_high_high_in_its_hot_months(demo_region):
    # Run as the monthly run does (its as-of date, seed, permutations, FDR and weighting).
    # The first hot month is the onset: the raised transmission starts on its first day and
    # the counts known 3 days after month end do not yet make a cluster at FDR 0.05, so the
    # check starts with the second hot month (and records the onset month's q-values).
    from marchland.demo import scenario_path
    from marchland.pack.monthly import default_as_of
    from marchland.stats import window_counts

    region, cfg = demo_region, demo_region.config
    truth = pd.read_csv(scenario_path().parent / "truth" / "hot.csv")
    pop = region.units["population"].astype(float)
    area = sorted(set(truth["unit_id"]))
    near = set(area) | set(region.graph.edges.loc[region.graph.edges["focal"].isin(area),
                                                  "neighbor"])  # fmt: skip
    months = sorted(truth["month"].unique())
    assert len(months) >= 3
    found = []
    for month in months[1:]:
        wc = window_counts(region.counts, default_as_of(cfg, month), windows_weeks=(),
                           month=month, units=region.units.index)  # fmt: skip
        res = hotspots(wc["cases"]["month"], pop, region.graph,
                       permutations=cfg.analysis.permutations, seed=cfg.region.seed,
                       fdr=cfg.analysis.fdr, weighting=cfg.graph.weighting)  # fmt: skip
        hot = truth.loc[truth["month"] == month, "unit_id"]
        is_hh = res.loc[hot, "label"] == "High-High"
        assert is_hh.mean() >= 0.5, (month, res.loc[hot, ["label", "q"]])
        # and the High-High units of a hot month are the hot area or its neighbours
        assert set(res.index[res["label"] == "High-High"]) <= near, month
        found.append(is_hh)
    # Across hot months at least half the hot area is labelled. (This asked for 70% while p was
    # esda's folded one-sided value, which roughly doubles the labels of a null map; with the
    # two-sided p, 2 of the 4 hot units reach q < 0.05 among the 196 tested, the others'
    # p-values, ~0.02 and ~0.002, are too large for BH at that m.)
    assert pd.concat(found).mean() >= 0.5
