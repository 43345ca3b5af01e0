"""Tests of the forecast stage (marchland.projections).

Covered: parameter recovery on simulated lattices (coverage of the 95 % intervals), shape and
contents of the forecast table and its aggregation, the seed, no mutation of inputs, both graph
kinds, the panel= input, and bad input (unit with no history, all-zero history, islands, too
few weeks, units missing from the graph). The demo backtest checks that the model beats the
naive baselines (simulated data and the demo month's own backtest), and that the backtest
gives the same scores whatever order its origins run in; outside references are in
tests/reference/test_forecast_reference.py.
"""

from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest

from marchland.errors import DataWarning, InputError
from marchland.graph import BorderGraph, as_border_graph
from marchland.projections import Forecast, backtest_forecast, forecast
from marchland.projections._model import ModelSpec, Problem
from marchland.projections._setup import MIN_FIT_WEEKS, week_angles
from marchland.projections._synthetic import lattice, simulate_outbreak
from marchland.projections._weights import OrderMatrix

TRUE = {"intercept": -1.0, "lambda": 0.5, "phi": 0.3, "d": 1.5, "psi": 3.0}


def _as_of(sim, weeks_after=0):
    return sim.panel.columns[-1] + pd.Timedelta(days=9 + 7 * weeks_after)


@pytest.fixture(scope="module")
def sim():
    return simulate_outbreak(10, 30, seed=7, **{k: v for k, v in TRUE.items() if k != "lambda"})


# --- parameter recovery ------------------------------------------------------------------------
TRUE_BY_COUNTRY = {**{k: v for k, v in TRUE.items() if k != "psi"}, "psi_C0": 1.5, "psi_C1": 6.0}


@pytest.mark.parametrize(
    ("dispersion", "truth"),
    [("shared", TRUE), ("country", TRUE_BY_COUNTRY)],
    ids=["shared", "country"],
)
def test_parameter_recovery_interval_coverage(dispersion, truth):
    # 50 seeded outbreaks on a 10 x 10 lattice (100 units, 16 weeks): the 95 % Wald intervals
    # from the Hessian must cover the true values in 90-98 % of fits, pooled over the
    # parameters (one size shared by all units, or one per country of the lattice).
    units, g = lattice(10)
    bg = as_border_graph(g, countries=units["country"])
    ids = units.index
    orders = OrderMatrix.from_graph(bg, ids, 5)
    e = units["population"].to_numpy() / 100_000
    psi = truth["psi"] if dispersion == "shared" else {"C0": 1.5, "C1": 6.0}
    spec = ModelSpec(dispersion=dispersion)
    covered = []
    for seed in range(50):
        s = simulate_outbreak(
            10,
            16,
            seed=seed,
            lam=truth["lambda"],
            intercept=truth["intercept"],
            phi=truth["phi"],
            d=truth["d"],
            psi=psi,
        )
        assert s.truth == truth
        block = s.panel.to_numpy(dtype=float)
        angles = week_angles(s.panel.columns[1:])
        groups = units["country"].to_numpy()
        prob = Problem.build(block, e, np.zeros((100, 0)), angles, orders, spec, (), groups)
        table = prob.fit().table(0.95)
        assert set(table.index) == set(truth)
        covered.append(
            [table.loc[k, "lower"] <= v <= table.loc[k, "upper"] for k, v in truth.items()]
        )
    covered = np.array(covered)
    print("recovery coverage per parameter:", dict(zip(truth, covered.mean(axis=0), strict=True)))
    assert 0.90 <= covered.mean() <= 0.98
    assert (covered.mean(axis=0) >= 0.8).all()


def test_small_countries_share_one_size():
    # A country with fewer than MIN_NONZERO_PER_SIZE non-zero counts in the window shares one
    # size with the other such countries; if together they still have too few, they join the
    # busiest country; when none has enough, all units share one size.
    from marchland.projections._model import MIN_NONZERO_PER_SIZE, size_groups

    n = MIN_NONZERO_PER_SIZE
    labels = np.array(["A", "A", "B", "C", "D"])
    unit = np.repeat(np.arange(5), n)
    y = np.ones(len(unit))
    y[np.flatnonzero(unit == 2)[n // 2 :]] = 0  # B: n/2 non-zero
    y[np.flatnonzero(unit == 3)[n // 2 :]] = 0  # C: n/2 non-zero, B+C: n
    codes, names = size_groups(labels, y, unit)
    assert names == ("A", "D", "B+C") and codes.tolist() == [0, 0, 2, 2, 1]
    y[unit == 3] = 0  # B+C: n/2, too few together: they join A (2n non-zero, the busiest)
    codes, names = size_groups(labels, y, unit)
    assert names == ("A+B+C", "D") and codes.tolist() == [0, 0, 0, 0, 1]
    codes, names = size_groups(labels, np.where(unit == 2, y, 0.0), unit)  # only B has any
    assert names == ("all",) and codes.tolist() == [0, 0, 0, 0, 0]


@pytest.mark.parametrize("zero_share", [0.5, 0.97])
def test_sparse_and_dense_neighbour_sums_give_the_same_likelihood(monkeypatch, zero_share):
    # Our own check of the two ways CellSums adds the neighbourhood part (the statistic itself
    # is checked against scipy/statsmodels in tests/reference): listing the non-zero lagged
    # counts once, or multiplying the whole weight matrix, must give the same log-likelihood
    # and gradient to the last bit, with few or many zeros among the counts.
    from marchland.projections import _weights

    units, g = lattice(10)
    bg = as_border_graph(g, countries=units["country"])
    orders = OrderMatrix.from_graph(bg, units.index, 5)
    s = simulate_outbreak(10, 12, seed=4, **{k: v for k, v in TRUE.items() if k != "lambda"})
    block = s.panel.to_numpy(dtype=float, copy=True)
    block[np.random.default_rng(1).uniform(size=block.shape) < zero_share] = 0.0
    block[0, -1] = np.nan  # an unknown count: no row, and no lag beyond the carried one
    e = units["population"].to_numpy() / 100_000
    args = (block, e, np.zeros((100, 0)), week_angles(s.panel.columns[1:]), orders)
    spec = ModelSpec(dispersion="country")
    out = []
    for share in (np.inf, 0.0):  # sparse list always, then never
        monkeypatch.setattr(_weights, "SPARSE_SHARE", share)
        prob = Problem.build(*args, spec, (), units["country"].to_numpy())
        assert (prob.neighbour_sums.contrib is None) == (share == 0.0)
        theta = prob.start() + np.random.default_rng(2).normal(0, 0.3, len(prob.names))
        out.append(prob.nll_grad(theta))
    assert out[0][0] == out[1][0]
    np.testing.assert_array_equal(out[0][1], out[1][1])


def test_order_matrix_is_higher_orders_pairs():
    # Property check against the earlier formulation: the order matrix read from
    # higher_order's edge table (unit ids mapped back to positions) must be the one built from
    # the graph's positional pairs, pair for pair and in the same order, also when the model's
    # units come in another order than the graph's and the graph holds a unit they lack.
    units, g = lattice(8)
    bg = as_border_graph(g, countries=units["country"])
    ids = pd.Index(np.random.default_rng(3).permutation(units.index)[1:], name="unit_id")
    e = bg.higher_order(5, lower_order=True).edges
    j, i = ids.get_indexer(e["focal"]), ids.get_indexer(e["neighbor"])
    keep = (j >= 0) & (i >= 0)
    orders = OrderMatrix.from_graph(bg, ids, 5)
    np.testing.assert_array_equal(orders.sender, j[keep])
    np.testing.assert_array_equal(orders.receiver, i[keep])
    np.testing.assert_array_equal(orders.log_order, np.log(e["order"].to_numpy(float)[keep]))
    assert orders.n == len(ids) and keep.sum() < len(keep) and orders.log_order.max() > 0


def test_neighbour_contributions_listed_in_blocks(monkeypatch):
    # Property check against the unblocked listing: the contributions of the sparse neighbour
    # sums listed a few pairs at a time (blocks cutting through senders' lists) are the same
    # matrix, entry for entry, and give the same sums as the weight matrix times the counts.
    from marchland.projections import _weights

    units, g = lattice(8)
    orders = OrderMatrix.from_graph(as_border_graph(g), units.index, 3)
    x = np.random.default_rng(5).poisson(0.05, (64, 6)).astype(float)
    ui, ti = np.nonzero(np.random.default_rng(6).uniform(size=(64, 6)) < 0.8)
    whole = _weights.CellSums.build(orders, x, ui, ti).contrib
    monkeypatch.setattr(_weights, "CELL_BLOCK", 7)
    blocked = _weights.CellSums.build(orders, x, ui, ti)
    assert whole.nnz > 10 * 7 and (blocked.contrib != whole).nnz == 0
    np.testing.assert_array_equal(blocked.contrib.indices, whole.indices)
    np.testing.assert_array_equal(blocked(1.3)[0], (orders.weights(1.3) @ x)[ui, ti])


# --- the forecast object -----------------------------------------------------------------------
def _ring_orders(n: int) -> OrderMatrix:
    """A ring of ``n`` units: neighbours one and two steps either side (orders 1 and 2)."""
    j, i = np.divmod(np.arange(n * n), n)
    hop = np.minimum((i - j) % n, (j - i) % n)
    keep = (hop >= 1) & (hop <= 2)
    return OrderMatrix(j[keep], i[keep], np.log(hop[keep].astype(float)), n)


def test_paths_drawn_in_blocks(monkeypatch):
    """Blocks of paths are consecutive draws of one stream; one-step means match the model."""
    from scipy import stats

    from marchland.projections import _simulate

    # A ring of 6 units, neighbours one step either side (orders 1 and 2 within the ring).
    n = 6
    orders = _ring_orders(n)
    start = np.array([0.0, 3.0, 10.0, 0.0, 1.0, 25.0])
    endemic = np.tile(np.array([0.5, 1.0, 0.2, 2.0, 0.1, 1.5]), (3, 1))
    kw = dict(lam=0.4, phi=0.3, d=1.2, psi=np.full(n, 2.5), orders=orders)

    monkeypatch.setattr(_simulate, "PATH_BLOCK_CELLS", n * 7)  # blocks of 7 paths
    rng = np.random.default_rng(3)
    blocked = _simulate.simulate_paths(start, endemic, n_paths=20, rng=rng, **kw)
    rng = np.random.default_rng(3)
    parts = [_simulate.simulate_paths(start, endemic, n_paths=k, rng=rng, **kw) for k in (7, 7, 6)]
    np.testing.assert_array_equal(blocked, np.concatenate(parts, axis=2))

    # First week: negative binomial around lambda y + phi W^T y + endemic (scipy's nbinom as
    # the reference for its spread; 4 standard errors of the mean).
    many = _simulate.simulate_paths(
        start, endemic, n_paths=40_000, rng=np.random.default_rng(4), **kw
    )
    mu = endemic[0] + kw["lam"] * start + kw["phi"] * (orders.weights(kw["d"]) @ start)
    size = kw["psi"]
    sd = stats.nbinom(size, size / (size + mu)).std()
    assert np.all(np.abs(many[0].mean(axis=1) - mu) < 4 * sd / np.sqrt(40_000))


def test_path_store_holds_the_drawn_paths(monkeypatch):
    """The compact store gives back the dense simulation exactly: per unit block, group sums."""
    from scipy import sparse

    from marchland.projections import _paths, _simulate

    n = 6
    orders = _ring_orders(n)
    start = np.array([0.0, 3.0, 10.0, 0.0, 1.0, 25.0])
    endemic = np.tile(np.array([0.5, 1.0, 0.2, 0.0, 0.1, 1.5]), (5, 1))
    kw = dict(lam=0.4, phi=0.3, d=1.2, psi=np.full(n, 2.5), orders=orders, n_paths=20)
    monkeypatch.setattr(_simulate, "PATH_BLOCK_CELLS", n * 7)  # blocks of 7 paths
    dense = _simulate.simulate_paths(start, endemic, rng=np.random.default_rng(3), **kw)
    blocks = _simulate.path_blocks(start, endemic, rng=np.random.default_rng(3), **kw)
    store = _paths.PathStore.from_blocks(
        ((lo, hi, p[1:]) for lo, hi, p, _ in blocks), n_paths=20
    )  # a lead week dropped, as run_origin does
    np.testing.assert_array_equal(store.toarray(), dense[1:])
    assert store.toarray().dtype == np.int32 and store.shape == dense[1:].shape
    np.testing.assert_array_equal(store.units(2, 5), dense[1:, 2:5])
    g = sparse.csr_matrix(np.array([[1.0, 0, 1, 0, 0, 1], [0, 1.0, 0, 1, 1, 0]]))
    np.testing.assert_array_equal(store.group_sums(g), np.stack([g @ d for d in dense[1:]]))

    # Each week takes the narrowest type holding its counts; mostly-zero weeks stay sparse,
    # full ones dense, and a count above 65,535 keeps int32.
    p = np.zeros((3, 50, 40), dtype=np.int32)
    p[0, 3, 5] = 7
    p[1] = 300
    p[2, 1, 2] = 70_000
    s = _paths.PathStore.from_blocks([(0, 40, p)], n_paths=40)
    kinds = [(type(m).__name__, m.dtype) for m in s._steps]
    assert kinds[0][1] == np.uint8 and sparse.issparse(s._steps[0])
    assert kinds[1] == ("ndarray", np.uint16)
    assert kinds[2][1] == np.int32 and sparse.issparse(s._steps[2])
    np.testing.assert_array_equal(s.toarray(), p)
    h, u = np.array([2, 0, 1, 2, 0, 2]), np.array([1, 3, 9, 1, 0, 49])  # sparse and dense weeks
    np.testing.assert_array_equal(s.cells(h, u), p[h, u])
    np.testing.assert_array_equal(
        store.cells(np.array([3, 0]), np.array([5, 2])), dense[1:][[3, 0], [5, 2]]
    )
    with pytest.raises(ValueError, match="in order"):
        _paths.PathStore.from_blocks([(0, 10, p[:, :, :10]), (20, 40, p[:, :, 20:])], n_paths=40)


def test_forecast_table_and_parameters(sim):
    f = forecast(
        sim.counts, sim.units, sim.graph, as_of=_as_of(sim), seed=3, n_paths=400, window_weeks=20
    )
    assert isinstance(f, Forecast)
    t = f.table
    assert list(t.columns) == [
        "week",
        "horizon",
        "mean",
        "median",
        "lower",
        "upper",
        "p_any",
        "note",
    ]
    assert len(t) == 4 * len(sim.units)
    assert t.index.name == "unit_id" and set(t.index) == set(sim.units.index)
    assert (t["lower"] <= t["median"]).all() and (t["median"] <= t["upper"]).all()
    assert t["p_any"].between(0, 1).all()
    assert (
        t["week"].unique()
        == pd.date_range(f.origin_week + pd.Timedelta(days=7), periods=4, freq="7D")
    ).all()
    assert f.paths.shape == (4, len(sim.units), 400)
    np.testing.assert_allclose(t["mean"], f.paths.mean(axis=2).ravel())
    assert list(f.parameters.columns[:4]) == ["estimate", "lower", "upper", "se"]
    # True values inside the 95 % intervals on this seed (a single fit; recovery test above
    # checks the rate). One size per country by default; both countries' true size is 3.
    truth = {k: v for k, v in TRUE.items() if k not in ("lambda", "psi")}
    truth.update(psi_C0=TRUE["psi"], psi_C1=TRUE["psi"])
    assert set(truth) <= set(f.parameters.index)
    for k, v in truth.items():
        assert f.parameters.loc[k, "lower"] <= v <= f.parameters.loc[k, "upper"], k


def test_aggregate_sums_paths_not_intervals(sim):
    f = forecast(sim.counts, sim.units, sim.graph, as_of=_as_of(sim), seed=3, n_paths=400)
    agg = f.aggregate("country")
    by_hand = f.paths[0][(sim.units["country"] == "C0").to_numpy()].sum(axis=0)
    row = agg[(agg.index == "C0") & (agg["horizon"] == 1)].iloc[0]
    assert row["mean"] == pytest.approx(by_hand.mean())
    assert row["upper"] == np.quantile(by_hand, 0.95, method="inverted_cdf")
    unit_upper = (
        f.table[f.table["horizon"] == 1]
        .loc[sim.units.index[sim.units.country == "C0"], "upper"]
        .sum()
    )
    assert row["upper"] < unit_upper  # summing unit intervals would overstate the spread
    region = f.aggregate("region")
    assert len(region) == 4 and (region["n_units"] == 100).all()
    with pytest.raises(ValueError, match="'by' needs to be one of"):
        f.aggregate("planet")


def test_seed_repeats_and_inputs_unchanged(sim):
    counts, units = sim.counts.copy(), sim.units.copy()
    a = forecast(sim.counts, sim.units, sim.graph, as_of=_as_of(sim), seed=5, n_paths=50)
    b = forecast(sim.counts, sim.units, sim.graph, as_of=_as_of(sim), seed=5, n_paths=50)
    pd.testing.assert_frame_equal(a.table, b.table)
    pd.testing.assert_frame_equal(sim.counts, counts)
    pd.testing.assert_frame_equal(sim.units, units)


def test_border_graph_and_libpysal_graph_agree(sim):
    bg = as_border_graph(sim.graph, countries=sim.units["country"])
    a = forecast(sim.counts, sim.units, sim.graph, as_of=_as_of(sim), seed=5, n_paths=50)
    b = forecast(sim.counts, sim.units, bg, as_of=_as_of(sim), seed=5, n_paths=50)
    pd.testing.assert_frame_equal(a.table, b.table)


def test_panel_input_is_used(sim):
    a = forecast(sim.counts, sim.units, sim.graph, as_of=_as_of(sim), seed=5, n_paths=50)
    b = forecast(
        sim.counts, sim.units, sim.graph, as_of=_as_of(sim), seed=5, n_paths=50, panel=sim.panel
    )
    pd.testing.assert_frame_equal(a.table, b.table)
    doubled = forecast(
        sim.counts, sim.units, sim.graph, as_of=_as_of(sim), seed=5, n_paths=50, panel=sim.panel * 2
    )
    assert doubled.table["mean"].sum() > 1.5 * a.table["mean"].sum()


# --- bad input ---------------------------------------------------------------------------------
def test_unit_with_no_history_is_nan_with_note(sim):
    gone = sim.units.index[0]
    counts = sim.counts[sim.counts["unit_id"] != gone]
    f = forecast(counts, sim.units, sim.graph, as_of=_as_of(sim), seed=1, n_paths=50)
    rows = f.table.loc[[gone]]
    assert rows["mean"].isna().all() and rows["note"].str.contains("no report").all()
    assert f.table.drop(index=gone)["mean"].notna().all()
    assert f.aggregate("region")["n_unknown"].eq(1).all()
    assert any("no recent report" in n for n in f.notes)


def test_all_zero_history_unit_and_all_zero_region(sim):
    quiet = sim.units.index[5]
    counts = sim.counts.copy()
    counts.loc[counts["unit_id"] == quiet, "cases"] = 0
    f = forecast(counts, sim.units, sim.graph, as_of=_as_of(sim), seed=1, n_paths=200)
    assert f.table.loc[quiet, "mean"].notna().all()
    counts["cases"] = 0
    with pytest.raises(InputError, match="no cases reported"):
        forecast(counts, sim.units, sim.graph, as_of=_as_of(sim), seed=1)


def test_islands_warn_and_get_no_neighbourhood_part(sim):
    bg = as_border_graph(sim.graph, countries=sim.units["country"])
    lone = sim.units.index[0]
    cut = bg.subgraph([u for u in bg.ids if u != lone])
    edges = cut.edges

    with_island = BorderGraph(edges, bg.ids, bg.countries)
    with pytest.warns(DataWarning, match=r"islands: \['U00000'\].*neighbourhood part is 0"):
        f = forecast(sim.counts, sim.units, with_island, as_of=_as_of(sim), seed=1, n_paths=50)
    assert f.table["mean"].notna().all()


def test_too_few_weeks_names_the_minimum(sim):
    early = sim.panel.columns[4] + pd.Timedelta(days=9)
    with pytest.raises(InputError, match=f"at least {MIN_FIT_WEEKS} are needed"):
        forecast(sim.counts, sim.units, sim.graph, as_of=early)
    with pytest.raises(ValueError, match="'window_weeks' needs to be at least"):
        forecast(sim.counts, sim.units, sim.graph, as_of=_as_of(sim), window_weeks=3)


def test_dispersion_option(sim):
    shared = forecast(
        sim.counts, sim.units, sim.graph, as_of=_as_of(sim), n_paths=50, dispersion="shared"
    )
    assert [p for p in shared.parameters.index if p.startswith("psi")] == ["psi"]
    with pytest.raises(ValueError, match="'dispersion' needs to be one of"):
        forecast(sim.counts, sim.units, sim.graph, as_of=_as_of(sim), dispersion="unit")
    with pytest.raises(ValueError, match="'dispersion' needs to be one of"):
        backtest_forecast(sim.counts, sim.units, sim.graph, dispersion="Country")


def test_unit_missing_from_graph_and_bad_population(sim):
    extra = sim.units.iloc[:1].rename(index={sim.units.index[0]: "ZZZ"})
    with pytest.raises(ValueError, match="graph must hold every unit"):
        forecast(sim.counts, pd.concat([sim.units, extra]), sim.graph, as_of=_as_of(sim))
    bad = sim.units.copy()
    bad.iloc[3, bad.columns.get_loc("population")] = 0
    with pytest.raises(InputError, match="population must be a positive number"):
        forecast(sim.counts, bad, sim.graph, as_of=_as_of(sim))


# --- backtest ----------------------------------------------------------------------------------
def test_backtest_on_simulated_outbreak_beats_baselines():
    s = simulate_outbreak(10, 40, seed=11, lam=0.6, phi=0.3)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        bt = backtest_forecast(
            s.counts, s.units, s.graph, window_weeks=12, step_weeks=3, n_paths=300, seed=2
        )
    a = bt[bt["country"] == "all"]
    print(a.round(3).to_string())
    assert set(a.index) == {"endemic-epidemic", "last-week", "mean-4-weeks"}
    for h in range(1, 5):
        at = a[a["horizon"] == h]["crps"]
        assert (
            at["endemic-epidemic"] < at["last-week"] and at["endemic-epidemic"] < at["mean-4-weeks"]
        ), h
    cov = a.loc["endemic-epidemic", ["coverage", "coverage_pit"]]
    assert cov["coverage"].between(0.85, 0.95).all()
    assert cov["coverage_pit"].between(0.85, 0.95).all()


def test_backtest_same_for_any_number_of_workers():
    # One seed per origin (compute.Executor.map_seeded): a result must not depend on which
    # task ran first. Worker processes run tasks in any order; an executor that runs them in
    # reverse stands in for them here (no process start-up in a unit test) and would expose any
    # random state shared between origins.
    from marchland.compute import Executor

    class Reversed(Executor):
        def map(self, fn, items, *args):
            return [fn(i, *args) for i in list(items)[::-1]][::-1]

    s = simulate_outbreak(5, 20, seed=4)
    kw = dict(window_weeks=8, step_weeks=4, n_paths=50, seed=9, details=True)
    serial = backtest_forecast(s.counts, s.units, s.graph, **kw)
    backwards = backtest_forecast(s.counts, s.units, s.graph, executor=Reversed(), **kw)
    assert serial["origin"].nunique() >= 2
    pd.testing.assert_frame_equal(serial, backwards)


def test_demo_month_backtest_beats_both_baselines_and_is_calibrated():
    # The month's own backtest (pack._outlooksteps.backtest_summary: 13 origins every 2 weeks,
    # 200 paths, the config's seed) on the demo as known for 2026-10: the model's mean CRPS is
    # below the last week carried forward and the 4-week mean at 1 to 4 weeks ahead (with one
    # size per country; one shared size lost nothing at 2-4 weeks but was within 2 % of the
    # last week at 1). The 90 % intervals hold 85-95 % of the randomised PIT (the
    # discreteness-free coverage of Czado, Gneiting and Held 2009). Raw coverage is higher
    # (about 96 % at 1-2 weeks: two outcomes in three are 0, and a central interval of a
    # count forecast with much mass at 0 holds over 90 % by construction; the forecasts' own
    # samples put 97 % in these intervals), so only its lower side is asserted.
    import types

    import marchland.demo as demo
    import marchland.pack as region
    import marchland.projections as pj
    from marchland.pack._outlooksteps import backtest_summary
    from marchland.pack.monthly import default_as_of

    with warnings.catch_warnings():
        warnings.simplefilter("ignore", DataWarning)  # the demo graph has one island
        r = region.open_region(demo.scenario_path())
        as_of = default_as_of(r.config, "2026-10")
        counts = r.counts[r.counts["received"] <= as_of].reset_index(drop=True)
        ctx = types.SimpleNamespace(
            counts=counts, units=r.units, graph=r.graph, cfg=r.config, seed=r.config.region.seed
        )
        bt = backtest_summary(ctx, pj)
    assert bt.attrs["origins"].startswith("13 origins")
    a = (
        bt[bt["country"] == "all"]
        .reset_index()
        .pivot(index="horizon", columns="model", values="crps")
    )
    print(a.round(3).to_string())
    for h in (1, 2, 3, 4):
        assert a.loc[h, "endemic-epidemic"] < a.loc[h, "last-week"], h
        assert a.loc[h, "endemic-epidemic"] < a.loc[h, "mean-4-weeks"], h
    model = bt.loc["endemic-epidemic"].query("country == 'all'").set_index("horizon")
    print(model[["coverage", "coverage_expected", "coverage_pit"]].round(3).to_string())
    assert model["coverage_pit"].between(0.85, 0.95).all()
    assert (model["coverage"] >= 0.85).all()
