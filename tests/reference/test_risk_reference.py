"""Border-risk statistics checked against outside sources.

- The cloglog fit against statsmodels' ``GLM(family=Binomial(link=CLogLog()))``: on the
  Spector & Mazzeo (1980) grade data that statsmodels ships (``statsmodels.datasets.spector``,
  32 rows, no download), unpenalised and ridge-penalised (statsmodels ``fit_regularized`` with
  ``L1_wt=0``), and on the risk-set table our pipeline builds.
- The AUC against scipy's Mann-Whitney U (AUC = U / (n1 n0), Hanley & McNeil 1982), ties
  included.
- The Brier score against its definition (Brier 1950): mean squared forecast error.
"""

from __future__ import annotations

import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import stats
from statsmodels.genmod.families import Binomial
from statsmodels.genmod.families.links import CLogLog

from marchland.risk import _features as rf
from marchland.risk import _hazard, _sim
from marchland.risk._model import _panel_at, _risk_sets
from marchland.risk.score import fit_risk_model

RTOL = 1e-6


@pytest.fixture(scope="module")
def spector():
    # Spector & Mazzeo (1980) data as shipped by statsmodels (offline).
    d = sm.datasets.spector.load_pandas().data
    return d[["GPA", "TUCE", "PSI"]].to_numpy(), d["GRADE"].to_numpy()


def test_unpenalised_fit_equals_statsmodels_glm(spector):
    x, y = spector
    ref = sm.GLM(y, sm.add_constant(x), family=Binomial(link=CLogLog())).fit(tol=1e-13)
    ours = _hazard.fit_cloglog(x, y, penalty=0.0)
    assert ours.converged
    np.testing.assert_allclose(ours.coef_raw, ref.params, rtol=RTOL, atol=1e-8)
    np.testing.assert_allclose(np.sqrt(np.diag(ours.cov_raw)), ref.bse, rtol=1e-5)
    assert ours.deviance == pytest.approx(ref.deviance, rel=RTOL)


def test_standardising_does_not_change_the_unpenalised_fit(spector):
    x, y = spector
    a = _hazard.fit_cloglog(x, y, penalty=0.0, standardise=True)
    b = _hazard.fit_cloglog(x, y, penalty=0.0, standardise=False)
    np.testing.assert_allclose(a.coef_raw, b.coef_raw, rtol=RTOL)


def test_ridge_fit_equals_statsmodels_fit_regularized(spector):
    x, y = spector
    n = len(y)
    alpha = 0.02
    # statsmodels minimises -loglik / n + alpha / 2 * |b|^2 (L1_wt=0); the intercept is left
    # unpenalised by a zero in the alpha vector. Our penalty is on the log-likelihood scale.
    ref = sm.GLM(y, sm.add_constant(x), family=Binomial(link=CLogLog())).fit_regularized(
        alpha=np.array([0.0, alpha, alpha, alpha]), L1_wt=0.0, maxiter=2000, cnvrg_tol=1e-12
    )
    ours = _hazard.fit_cloglog(x, y, penalty=n * alpha, standardise=False)
    np.testing.assert_allclose(ours.coef_raw, ref.params, rtol=1e-4, atol=1e-5)


def test_pipeline_fit_equals_statsmodels_on_its_risk_sets():
    sim = _sim.simulate(12, 12, weeks=30, seed=7, stripe=3)
    as_of = sim.counts["received"].max()
    model = fit_risk_model(
        sim.counts, sim.units, sim.graph, as_of=as_of, horizon_weeks=2, penalty=0.0, min_events=0
    )
    static = rf.build_static(sim.units, sim.graph)
    panel, _ = _panel_at(
        sim.counts,
        static,
        as_of,
        week0=None,
        recent_weeks=3,
        reintroduction_weeks=None,
        min_cases=1,
    )
    x, y, _, _ = _risk_sets(panel, rf.FEATURES, 2, 1)
    ref = sm.GLM(y.astype(float), sm.add_constant(x), family=Binomial(link=CLogLog())).fit(
        tol=1e-13
    )
    assert model.kind == "fitted"
    np.testing.assert_allclose(model.coefficients.to_numpy(), ref.params, rtol=1e-5, atol=1e-7)
    np.testing.assert_allclose(model.std_errors_model.to_numpy(), ref.bse, rtol=1e-4)
    # Clustered by unit: statsmodels GLM(Binomial, CLogLog) with cov_type="cluster" (its default
    # small-sample correction G/(G-1) (n-1)/(n-k)) on the same design is the reference.
    _, _, rows, _ = _risk_sets(panel, rf.FEATURES, 2, 1)
    ref_cl = sm.GLM(y.astype(float), sm.add_constant(x), family=Binomial(link=CLogLog())).fit(
        tol=1e-13, cov_type="cluster", cov_kwds={"groups": rows}
    )
    np.testing.assert_allclose(model.std_errors.to_numpy(), ref_cl.bse, rtol=1e-4)
    # Overlapping windows: the clustered errors are larger than the model-based ones.
    assert (model.std_errors > model.std_errors_model).sum() >= len(model.std_errors) - 1


def test_clustered_covariance_equals_statsmodels_on_spector(spector):
    x, y = spector
    groups = np.arange(len(y)) // 4  # eight clusters of four rows (an arbitrary grouping)
    ref = sm.GLM(y, sm.add_constant(x), family=Binomial(link=CLogLog())).fit(
        tol=1e-13, cov_type="cluster", cov_kwds={"groups": groups}
    )
    ours = _hazard.fit_cloglog(x, y, penalty=0.0, groups=groups)
    np.testing.assert_allclose(ours.cov_cluster_raw, ref.cov_params(), rtol=1e-4, atol=1e-10)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_auc_equals_mann_whitney_u(seed):
    rng = np.random.default_rng(seed)
    score = rng.integers(0, 6, 80).astype(float)  # many ties
    outcome = rng.random(80) < 0.3 + 0.08 * score
    n1 = outcome.sum()
    n0 = (~outcome).sum()
    u = stats.mannwhitneyu(score[outcome], score[~outcome], alternative="two-sided").statistic
    assert _hazard.auc(score, outcome) == pytest.approx(u / (n1 * n0), rel=1e-12)


def test_auc_of_a_perfect_and_a_reversed_score():
    y = np.array([0, 0, 1, 1], dtype=bool)
    # By the definition (Hanley & McNeil 1982): full separation gives 1, reversed gives 0.
    assert _hazard.auc(np.array([1.0, 2, 3, 4]), y) == 1.0
    assert _hazard.auc(np.array([4.0, 3, 2, 1]), y) == 0.0
    assert np.isnan(_hazard.auc(np.array([1.0, 2]), np.array([True, True])))


def test_brier_score_by_definition():
    # Brier (1950): mean of (forecast - outcome)^2.
    p = np.array([0.9, 0.2, 0.5, 0.0])
    y = np.array([1, 0, 1, 0])
    assert _hazard.brier(p, y) == pytest.approx(np.mean((p - y) ** 2))
    assert _hazard.brier(np.full(4, 0.5), y) == pytest.approx(0.25)


def test_inverse_cloglog_matches_statsmodels_link():
    eta = np.linspace(-8, 3, 23)
    np.testing.assert_allclose(_hazard.inverse_cloglog(eta), CLogLog().inverse(eta), rtol=1e-12)
    assert pd.notna(_hazard.inverse_cloglog(np.array([50.0]))).all()
