"""Outside checks of the forecast stage: scipy, statsmodels and scoringrules.

- the model's log-likelihood equals scipy.stats.nbinom.logpmf summed by hand, with the means
  (power-law weights included) rebuilt independently from scipy's shortest paths;
- with no autoregressive and no neighbourhood part the fit is statsmodels' NB2 regression;
- our sample CRPS equals scoringrules' ``crps_ensemble`` (ties, zeros, small and large
  ensembles), and on a large negative binomial sample matches the closed-form CRPS of that
  distribution (numeric sum);
- randomised PIT of forecasts of data drawn from the model itself is uniform.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import sparse, stats
from scipy.sparse import csgraph

from marchland.graph import as_border_graph
from marchland.projections import backtest_forecast
from marchland.projections._model import ModelSpec, Problem, endemic_design
from marchland.projections._scores import crps
from marchland.projections._setup import week_angles
from marchland.projections._synthetic import lattice, simulate_outbreak
from marchland.projections._weights import OrderMatrix


def _problem(sim, spec, z=None, groups=None):
    bg = as_border_graph(sim.graph, countries=sim.units["country"])
    ids = sim.units.index
    e = sim.units["population"].to_numpy() / 100_000
    z = np.zeros((len(ids), 0)) if z is None else z
    names = tuple(f"z{k}" for k in range(z.shape[1]))
    angles = week_angles(sim.panel.columns[1:])
    prob = Problem.build(
        sim.panel.to_numpy(float),
        e,
        z,
        angles,
        OrderMatrix.from_graph(bg, ids, 5),
        spec,
        names,
        groups,
    )
    return prob, e, z, angles


@pytest.mark.parametrize("dispersion", ["shared", "country"])
def test_loglik_equals_scipy_nbinom_with_means_by_hand(dispersion):
    # One size for all units, or one per country (C0 left half of the lattice, C1 right half).
    sim = simulate_outbreak(8, 20, seed=3, psi={"C0": 1.5, "C1": 6.0})
    country = sim.units["country"].to_numpy()
    prob, e, _, _ = _problem(sim, ModelSpec(dispersion=dispersion), groups=country)
    fit = prob.fit()
    lam, phi, d = (fit.value(k) for k in ("log_lambda", "log_phi", "log_d"))
    if dispersion == "shared":
        psi = np.full(len(country), fit.value("log_psi"))
    else:
        psi = np.where(country == "C0", fit.value("log_psi_C0"), fit.value("log_psi_C1"))
        assert fit.value("log_psi_C0") < fit.value("log_psi_C1")  # truth 1.5 < 6
    psi = psi[:, None]
    # Graph orders from scipy's all-pairs shortest paths on the libpysal adjacency (dense: small).
    adj = sim.graph.sparse
    order = csgraph.shortest_path(adj, unweighted=True, directed=False)
    u = np.where((order >= 1) & (order <= 5), order, np.inf) ** (-d)
    w = u / u.sum(axis=1, keepdims=True)  # row j: what unit j passes on, sums to 1
    y = sim.panel.to_numpy(float)
    mu = (e * np.exp(fit.beta[0]))[:, None] + lam * y[:, :-1] + phi * (w.T @ y[:, :-1])
    by_hand = stats.nbinom.logpmf(y[:, 1:], psi, psi / (psi + mu)).sum()  # scipy.stats.nbinom
    np.testing.assert_allclose(fit.loglik, by_hand, rtol=1e-10)
    assert isinstance(adj, sparse.sparray | sparse.spmatrix)


def test_endemic_only_fit_equals_statsmodels_negative_binomial():
    # statsmodels.discrete.discrete_model.NegativeBinomial (NB2) with offset log e: one size
    # shared by all units (the "shared" dispersion), as statsmodels has.
    sim = simulate_outbreak(8, 20, seed=5, lam=0.4, phi=0.2)
    rng = np.random.default_rng(0)
    z = rng.normal(size=(len(sim.units), 1))
    spec = ModelSpec(autoregressive=False, neighbourhood=False, seasonal=True, dispersion="shared")
    prob, e, z, angles = _problem(sim, spec, z, groups=sim.units["country"].to_numpy())
    fit = prob.fit(("z0",))
    y = sim.panel.to_numpy(float)[:, 1:]
    x = endemic_design(angles, z, True)
    n, t, p = x.shape
    xs, off = x.reshape(n * t, p), np.repeat(np.log(e), t)
    # Newton from a statsmodels Poisson GLM start: all statsmodels' own, none of our estimates.
    pois = sm.GLM(y.ravel(), xs, family=sm.families.Poisson(), offset=off).fit()
    ref = sm.NegativeBinomial(y.ravel(), xs, offset=off, loglike_method="nb2").fit(
        start_params=[*pois.params, 0.5], method="newton", maxiter=200, tol=1e-12, disp=False
    )
    np.testing.assert_allclose(fit.beta, ref.params[:p], atol=1e-4)
    np.testing.assert_allclose(1 / fit.value("log_psi"), ref.params[p], atol=1e-4)  # alpha
    np.testing.assert_allclose(fit.loglik, ref.llf, rtol=1e-8)


def test_sample_crps_matches_closed_form_negative_binomial():
    # Closed form for a count distribution: CRPS(F, y) = sum_k (F(k) - 1{y <= k})^2
    # (Gneiting & Raftery 2007, eq. 20 for integer support); scoringrules.crps_ensemble on
    # 40,000 draws must agree within Monte Carlo error.
    rng = np.random.default_rng(1)
    mu, psi = 6.0, 2.5
    k = np.arange(0, 400)
    cdf = stats.nbinom.cdf(k, psi, psi / (psi + mu))
    ys = np.array([0, 3, 6, 15])
    exact = np.array([np.sum((cdf - (y <= k)) ** 2) for y in ys])
    draws = stats.nbinom.rvs(psi, psi / (psi + mu), size=(len(ys), 40_000), random_state=rng)
    np.testing.assert_allclose(crps(ys, draws), exact, rtol=0.02)


def test_sample_crps_equals_scoringrules():
    # scoringrules.crps_ensemble (default estimator) on count ensembles with ties and zeros;
    # imported here only: importing it compiles numba kernels (slow), which is why we do not.
    import scoringrules as sr

    rng = np.random.default_rng(4)
    for m in (1, 2, 7, 200):
        draws = rng.negative_binomial(1.5, 0.2, size=(300, m)).astype(float)
        ys = np.concatenate([[0.0, draws[1, 0]], rng.poisson(5, size=298).astype(float)])
        ref = sr.crps_ensemble(ys, draws, backend="numpy")
        np.testing.assert_allclose(crps(ys, draws), ref, rtol=1e-12, atol=1e-12)


def test_pit_is_uniform_for_data_from_the_model():
    # Czado, Gneiting & Held (2009): randomised PIT of calibrated count forecasts is U(0, 1).
    # Data with one size per country, forecast with the default per-country sizes.
    sim = simulate_outbreak(10, 34, seed=21, psi={"C0": 1.5, "C1": 6.0})
    det = backtest_forecast(
        sim.counts,
        sim.units,
        sim.graph,
        window_weeks=16,
        step_weeks=3,
        n_paths=200,
        seed=4,
        details=True,
    )
    pit = det.loc[(det["model"] == "endemic-epidemic") & (det["horizon"] == 1), "pit"]
    assert len(pit) >= 300
    assert stats.kstest(pit, "uniform").pvalue > 0.01


def test_lattice_graph_is_queen_contiguity():
    # libpysal's own lattice weights give the same neighbours as our lattice helper.
    from libpysal.weights import lat2W

    units, g = lattice(6)
    ref = lat2W(6, 6, rook=False)
    ours = {i: sorted(units.index.get_indexer(g[u].index)) for i, u in enumerate(units.index)}
    assert all(ours[i] == sorted(ref.neighbors[i]) for i in range(36))
    assert pd.Index(units.index).is_unique


def test_pit_interval_share_has_expectation_conf_under_the_true_distribution():
    # Czado, Gneiting & Held (2009): the non-randomised PIT of y drawn from F is uniform, so the
    # share of it in [0.05, 0.95], averaged over y with scipy.stats.nbinom's pmf, is exactly 0.9,
    # whereas the central 90 % interval of the same distribution covers more (its mass at 0).
    from marchland.projections._scores import pit_interval_share

    k = np.arange(0, 2000)
    for mu, psi in ((0.2, 0.5), (1.5, 3.0), (40.0, 1.2)):
        dist = stats.nbinom(psi, psi / (psi + mu))
        share = pit_interval_share(dist.cdf(k - 1), dist.cdf(k), 0.9)
        np.testing.assert_allclose(np.sum(dist.pmf(k) * share), 0.9, atol=1e-9)
        lo, hi = dist.ppf(0.05), dist.ppf(0.95)
        raw = dist.cdf(hi) - dist.cdf(lo - 1)
        assert raw >= 0.9
    # A point mass of the PIT (F(y - 1) = F(y)) counts as inside or outside, nothing between.
    np.testing.assert_array_equal(
        pit_interval_share(np.array([0.5, 0.99]), np.array([0.5, 0.99]), 0.9), [1.0, 0.0]
    )


@pytest.mark.parametrize("dispersion", ["shared", "country"])
def test_analytic_gradient_equals_scipy_finite_differences(dispersion):
    # scipy.optimize.approx_fprime (central differences of the log-likelihood) against the
    # analytic gradient, away from the optimum, with one size or one per country.
    from scipy import optimize

    sim = simulate_outbreak(8, 20, seed=3, psi={"C0": 1.5, "C1": 6.0})
    spec = ModelSpec(dispersion=dispersion)
    prob, _, _, _ = _problem(sim, spec, groups=sim.units["country"].to_numpy())
    theta = prob.start() + np.random.default_rng(2).normal(0, 0.2, len(prob.names))
    analytic = prob.nll_grad(theta)[1]
    numeric = optimize.approx_fprime(theta, lambda t: -prob.loglik(t), 1e-6)
    np.testing.assert_allclose(analytic, numeric, rtol=1e-4, atol=1e-3)
    assert len(prob.names) == (5 if dispersion == "shared" else 6)
