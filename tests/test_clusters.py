"""Tests for marchland.clusters (emerging_clusters): properties, simulation, bad input, demo.

Must cover: power and size by simulation on a lattice (own simulator, several seeds); the
counts path and the panel path giving the same answer; unknown unit-weeks left out, never
read as zero; both graph kinds for graph-ordered bases; shuffled unit order; non-overlapping
secondary clusters; the base cap; the Poisson variant; inputs never changed; bad input with
clear messages (too few weeks, all zero, one unit, as_of before the data); the demo scenario.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
from libpysal.graph import Graph

from marchland.clusters import CLUSTER_COLUMNS, emerging_clusters
from marchland.clusters._clustersim import lattice_units, long_counts, planted_panel
from marchland.errors import DataWarning, InputError
from marchland.graph import as_border_graph

AS_OF = "2026-12-31"


@pytest.fixture(scope="module")
def lattice():
    return lattice_units(10)


def _rook(side: int) -> Graph:
    k = np.arange(side * side)
    pairs = [(a, a + 1) for a in k if a % side < side - 1] + [(a, a + side) for a in k[:-side]]
    f = [f"u{a:04d}" for a, b in pairs] + [f"u{b:04d}" for a, b in pairs]
    n = [f"u{b:04d}" for a, b in pairs] + [f"u{a:04d}" for a, b in pairs]
    return Graph.from_adjacency(pd.DataFrame({"focal": f, "neighbor": n, "weight": 1.0}))


def _found(out, planted) -> bool:
    return (
        len(out) > 0 and out["p"].iloc[0] < 0.05 and bool(set(out["units"].iloc[0]) & set(planted))
    )


# --- simulation: power and size (simulator: marchland.clusters._clustersim) --------------------
def test_power_planted_excess_is_found(lattice):
    # RR=3 in 5 adjacent units over the last 2 weeks; 99 permutations to stay fast.
    hits = 0
    for s in range(20):
        panel, planted = planted_panel(10, rate=2.0, rr=3.0, seed=s)
        out = emerging_clusters(None, lattice, as_of=AS_OF, panel=panel, permutations=99, seed=s)
        hits += _found(out, planted)
    assert hits / 20 >= 0.8


def test_size_without_excess(lattice):
    # No planted excess: a level-0.05 test should flag about 5% of runs; we allow 7%.
    flagged = 0
    for s in range(60):
        panel, _ = planted_panel(10, rate=2.0, rr=1.0, seed=1000 + s)
        out = emerging_clusters(None, lattice, as_of=AS_OF, panel=panel, permutations=99, seed=s)
        flagged += len(out) > 0 and out["p"].iloc[0] < 0.05
    assert flagged <= 4  # 7% of 60 runs; benchmarks/bench_clusters.py --runs runs more


# --- properties --------------------------------------------------------------------------------
@pytest.fixture(scope="module")
def planted(lattice):
    return planted_panel(10, rate=2.0, rr=3.0, seed=3)


def test_output_columns_and_secondary_clusters(lattice, planted):
    panel, units_planted = planted
    out = emerging_clusters(None, lattice, as_of=AS_OF, panel=panel, permutations=99, seed=1)
    assert list(out.columns) == list(CLUSTER_COLUMNS)
    assert out.index.name == "cluster" and out.index[0] == 1
    assert (out["method"] == "space-time permutation").all()
    assert (out["end"] == panel.columns[-1]).all()
    members = [set(u) for u in out["units"]]
    for a in range(len(members)):
        for b in range(a + 1, len(members)):
            assert not members[a] & members[b]
    assert out["llr"].is_monotonic_decreasing and out["p"].is_monotonic_increasing
    np.testing.assert_allclose(out["recurrence_weeks"], 1 / out["p"])
    assert (out["n_units"] == out["units"].map(len)).all()
    # Bases hold at most half of the window's cases.
    per_unit = panel.sum(axis=1)
    assert all(per_unit[list(u)].sum() <= 0.5 * per_unit.sum() for u in out["units"])
    # Observed and expected as a direct count and margin product.
    row = out.iloc[0]
    weeks = panel.columns[panel.columns >= row["start"]]
    sub = panel.loc[list(row["units"])]
    assert row["observed"] == sub[weeks].to_numpy().sum()
    margins = np.outer(sub.to_numpy().sum(axis=1), panel[weeks].to_numpy().sum(axis=0))
    expected = margins.sum() / panel.to_numpy().sum()
    assert row["expected"] == pytest.approx(expected)


def test_seed_reproducible_and_inputs_unchanged(lattice, planted):
    panel, _ = planted
    before_p, before_u = panel.copy(), lattice.copy()
    a = emerging_clusters(None, lattice, as_of=AS_OF, panel=panel, permutations=49, seed=5)
    b = emerging_clusters(None, lattice, as_of=AS_OF, panel=panel, permutations=49, seed=5)
    pd.testing.assert_frame_equal(a, b)
    pd.testing.assert_frame_equal(panel, before_p)
    pd.testing.assert_frame_equal(lattice, before_u)


def test_shuffled_units_give_the_same_clusters(lattice, planted):
    panel, _ = planted
    rng = np.random.default_rng(0)
    a = emerging_clusters(None, lattice, as_of=AS_OF, panel=panel, permutations=19, seed=1)
    b = emerging_clusters(
        None,
        lattice.iloc[rng.permutation(100)],
        as_of=AS_OF,
        panel=panel.iloc[rng.permutation(100)],
        permutations=19,
        seed=1,
    )
    pd.testing.assert_frame_equal(a, b)


def test_counts_path_equals_panel_path(lattice, planted):
    panel, _ = planted
    counts = long_counts(panel)
    a = emerging_clusters(None, lattice, as_of=AS_OF, panel=panel, permutations=49, seed=2)
    b = emerging_clusters(counts, lattice, as_of=AS_OF, permutations=49, seed=2)
    pd.testing.assert_frame_equal(a, b, check_like=False)
    assert b.attrs["window"] == (panel.columns[0], panel.columns[-1])
    # Known on an earlier date: the window ends earlier.
    c = emerging_clusters(
        counts, lattice, as_of="2026-03-10", permutations=19, seed=2, window_weeks=6, max_weeks=2
    )
    assert c.attrs["window"][1] == pd.Timestamp("2026-03-02")


def test_unknown_unit_week_is_not_zero(lattice, planted):
    panel, _ = planted
    counts = long_counts(panel)
    gap = (counts["unit_id"] == "u0000") & (counts["week"] == panel.columns[-3])
    with pytest.warns(DataWarning, match="1 unit.*u0000"):
        out = emerging_clusters(counts[~gap], lattice, as_of=AS_OF, permutations=19, seed=2)
    assert out.attrs["dropped_units"] == ["u0000"]
    assert not any("u0000" in u for u in out["units"])
    # A filled panel (e.g. a nowcast) keeps the unit; a panel with a gap is refused.
    gappy = panel.astype(float)
    gappy.iloc[0, -3] = np.nan
    with pytest.raises(InputError, match="unknown unit-weeks"):
        emerging_clusters(None, lattice, as_of=AS_OF, panel=gappy)


@pytest.mark.parametrize("kind", ["libpysal", "border"])
def test_graph_ordered_bases(lattice, planted, kind):
    panel, units_planted = planted
    graph = _rook(10) if kind == "libpysal" else as_border_graph(_rook(10))
    out = emerging_clusters(
        None,
        lattice,
        as_of=AS_OF,
        panel=panel,
        permutations=99,
        seed=1,
        neighbours="graph",
        graph=graph,
    )
    assert _found(out, units_planted)
    # Every base is connected in the graph: each member after the centre touches an earlier one.
    adj = _rook(10).adjacency
    for members in out["units"]:
        for j, u in enumerate(members[1:], start=1):
            assert set(adj.loc[u].index) & set(members[:j])


def test_poisson_variant_finds_the_planted_excess(lattice, planted):
    panel, units_planted = planted
    out = emerging_clusters(
        None, lattice, as_of=AS_OF, panel=panel, permutations=99, seed=1, method="poisson"
    )
    assert (out["method"] == "poisson").all()
    assert _found(out, units_planted)


# --- bad input ---------------------------------------------------------------------------------
def test_too_few_weeks(lattice, planted):
    panel, _ = planted
    with pytest.raises(InputError, match="3 week.*max_weeks=4 needs at least 5"):
        emerging_clusters(None, lattice, as_of=AS_OF, panel=panel.iloc[:, -3:])


def test_all_zero_counts_give_no_clusters(lattice, planted):
    panel, _ = planted
    with pytest.warns(DataWarning, match="no cases in the study window"):
        out = emerging_clusters(None, lattice, as_of=AS_OF, panel=panel * 0)
    assert out.empty and list(out.columns) == list(CLUSTER_COLUMNS)
    assert "no cases" in out.attrs["note"]


def test_single_unit(lattice, planted):
    panel, _ = planted
    with pytest.raises(InputError, match="at least 2 units"):
        emerging_clusters(None, lattice, as_of=AS_OF, panel=panel.iloc[:1])


def test_as_of_before_the_data(lattice, planted):
    counts = long_counts(planted[0])
    with pytest.raises(InputError, match="no counts had been received by as_of=2025-01-01"):
        emerging_clusters(counts, lattice, as_of="2025-01-01")


@pytest.mark.parametrize(
    ("kwargs", "message"),
    [
        ({"method": "kernel"}, "'method' needs to be one of"),
        ({"neighbours": "hops"}, "'neighbours' needs to be one of"),
        ({"neighbours": "graph"}, "needs a 'graph'"),
        ({"max_share": 0.0}, "'max_share' needs to be in"),
        ({"max_weeks": 0}, "'max_weeks' needs to be a whole number"),
        ({"permutations": 0}, "'permutations' needs to be >= 1"),
    ],
)
def test_api_misuse(lattice, planted, kwargs, message):
    with pytest.raises(ValueError, match=message):
        emerging_clusters(None, lattice, as_of=AS_OF, panel=planted[0], **kwargs)


@pytest.mark.parametrize("method", ["space-time permutation", "poisson"])
def test_null_maxima_equal_every_cylinder_evaluated(method):
    """The kernel's pruning and its walk over live units only change no maximum (any bit).

    Reference: every cylinder of every simulated table scored with ``poisson_llr`` (the
    formula of Kulldorff et al. 2005), no pruning, every unit walked; most units empty.
    """
    from marchland.clusters import _scan

    rng = np.random.default_rng(5)
    n, weeks, h = 150, 6, 3
    table = np.zeros((n, weeks))
    busy = rng.choice(n, 25, replace=False)
    table[busy] = rng.poisson(2.0, (25, weeks))
    table[busy[:4], -2:] += 6  # an excess, so the maxima run over a range
    total = float(table.sum())
    xy = rng.uniform(0, 100, (n, 2))
    if method == "poisson":
        size = rng.uniform(1e3, 1e5, n)
        cell = np.outer(size / size.sum(), np.full(weeks, 1 / weeks)) * total
    else:
        size = table.sum(axis=1)
        cell = np.outer(size, table.sum(axis=0)) / total
    order, valid, _, mu, _ = _scan.candidates(table, cell, xy, size, 0.5 * size.sum(), h)
    live = cell[:, -h:].sum(axis=1) > 0
    assert 0 < live.sum() < n if method != "poisson" else live.all()  # population: all live

    def draws(seed):
        g = np.random.default_rng(seed)
        if method == "poisson":
            return _scan.multinomial_draw(int(total), cell, g)
        return _scan.permutation_draw(table, g)

    recent_mu = _scan.recent_sums(cell, h)
    got = _scan.null_maxima(
        draws(9), 40, order, recent_mu, valid, total, h, n_weeks=weeks, live=live
    )
    tables = draws(9)(40)
    want = [
        np.where(
            valid,
            _scan.poisson_llr(_scan.cylinder_counts(_scan.recent_sums(t, h), order), mu, total),
            0,
        ).max()
        for t in tables
    ]
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-12)
    # Walking every unit gives the same maxima to the bit.
    every = _scan.null_maxima(draws(9), 40, order, recent_mu, valid, total, h, n_weeks=weeks)
    assert np.array_equal(got, every)


def _first_largest_cylinders(llr, valid, order, max_clusters):
    """Selection over the whole (H, n, K) block: the first largest cylinder sharing no unit."""
    used = np.zeros(order.shape[0], dtype=bool)
    score = np.where(valid, llr, 0.0)
    picks = []
    for _ in range(max_clusters):
        overlap = np.logical_or.accumulate(used[order], axis=1)
        s = np.where(overlap[None, :, :], 0.0, score)
        best = int(np.argmax(s))
        if s.flat[best] <= 0:
            break
        h, i, k = np.unravel_index(best, s.shape)
        picks.append((int(h), int(i), int(k)))
        used[order[i, : k + 1]] = True
    return picks


@pytest.mark.parametrize("seed", range(40))
def test_selection_from_each_bases_best_height_equals_the_whole_block(seed):
    """Keeping each base's best height picks the same cylinders, ties included.

    Reference: the first largest of every (height, centre, base) cylinder, the selection
    before the heights were folded; LLRs from a few small whole numbers, so ties are common
    across heights, centres and base sizes.
    """
    from marchland.clusters import _scan

    rng = np.random.default_rng(seed)
    n_h, n, n_k = 4, 25, 6
    order = np.array(
        [np.r_[i, rng.permutation(np.delete(np.arange(n), i))[: n_k - 1]] for i in range(n)]
    )
    valid = np.arange(n_k)[None, :] < rng.integers(1, n_k + 1, n)[:, None]
    llr = rng.choice([0.0, 0.0, 1.5, 2.0, 3.0], size=(n_h, n, n_k))
    llr[:, ~valid] = 0.0
    want = _first_largest_cylinders(llr, valid, order, 10)
    assert want
    got = _scan.select_clusters(llr.max(axis=0), llr.argmax(axis=0), order, 10)
    assert got == want


@pytest.mark.parametrize("chunk", [None, 1, 5000])
@pytest.mark.parametrize("method", ["space-time permutation", "poisson"])
def test_best_cylinders_are_the_largest_over_heights(method, chunk, monkeypatch):
    """The heights scored one at a time (centres in chunks: all, one, a few with a rest) give
    each base's largest LLR of the whole block, bit for bit, and the first height reaching it
    (reference: ``candidates``' (H, n, K) block)."""
    from marchland.clusters import _scan

    if chunk is not None:
        monkeypatch.setattr(_scan, "CHUNK_BYTES", chunk)

    panel, _ = planted_panel(8, weeks=8, seed=3)
    table = panel.to_numpy(dtype=float, copy=True)
    table[:, -2] = 0.0  # a week without cases: (permutation) heights 1 and 2 tie
    total = float(table.sum())
    rng = np.random.default_rng(2)
    xy = rng.uniform(0, 100, (len(table), 2))
    if method == "poisson":
        size = rng.uniform(1e3, 1e5, len(table))
        cell = np.outer(size / size.sum(), np.full(8, 1 / 8)) * total
    else:
        size = table.sum(axis=1)
        cell = np.outer(size, table.sum(axis=0)) / total
    args = (table, cell, xy, size, 0.3 * size.sum(), 4)
    order, valid, _, _, llr = _scan.candidates(*args)
    order2, valid2, best, best_h = _scan.best_cylinders(*args)
    assert np.array_equal(order, order2) and np.array_equal(valid, valid2)
    assert np.array_equal(best, llr.max(axis=0))
    pos = best > 0
    assert pos.any()
    assert np.array_equal(best_h[pos], llr.argmax(axis=0)[pos])
    if method != "poisson":
        assert (llr[1][pos] == best[pos]).any()  # the tie is there, and goes to the first
