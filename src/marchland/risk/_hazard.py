"""The numerical core of the border-risk model: a ridge-penalised cloglog GLM and its scores.

Plain numpy on arrays; :mod:`marchland.risk.score` gives it names and meaning.

Why our own penalised IRLS rather than statsmodels' ``GLM.fit_regularized(L1_wt=0)``: that
routine solves the ridge problem by coordinate descent, one ``scipy.optimize`` call per
coefficient per sweep, returns no covariance and takes seconds on the ~10^5-row risk sets a
10,000-unit region gives; the ridge problem is smooth, so Fisher scoring with the penalty
added to the information matrix solves it in a handful of matrix products and gives the usual
penalised-likelihood covariance. With no penalty it is exactly the IRLS statsmodels' ``GLM.fit``
runs, and ``tests/reference/test_risk_reference.py`` checks both paths against statsmodels.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

# Probabilities are kept this far from 0 and 1 so the IRLS weights stay finite
# (statsmodels clips the same way in its Binomial family).
_EPS = 1e-10
_ETA_MAX = 4.0  # 1 - exp(-exp(4)) is 1 - 2e-24: beyond this the cloglog is flat


def inverse_cloglog(eta: np.ndarray) -> np.ndarray:
    """P(event) = 1 - exp(-exp(eta)), evaluated without overflow."""
    return -np.expm1(-np.exp(np.minimum(eta, _ETA_MAX)))


@dataclass(frozen=True)
class Fit:
    """A fitted cloglog GLM on standardised columns (intercept first)."""

    coef: np.ndarray  # on the standardised scale, intercept first
    cov: np.ndarray  # covariance of ``coef`` (inverse penalised information)
    cov_cluster: np.ndarray | None  # sandwich covariance clustered by ``groups`` (if given)
    center: np.ndarray  # column means used to standardise
    scale: np.ndarray  # column standard deviations used to standardise (1 for constants)
    converged: bool
    iterations: int
    deviance: float

    @property
    def coef_raw(self) -> np.ndarray:
        """Coefficients on the columns' own scale (intercept first)."""
        b = self.coef[1:] / self.scale
        return np.concatenate([[self.coef[0] - b @ self.center], b])

    @property
    def cov_raw(self) -> np.ndarray:
        """Covariance of :attr:`coef_raw` (the standardisation is a fixed linear map)."""
        j = self._jacobian()
        return j @ self.cov @ j.T

    @property
    def cov_cluster_raw(self) -> np.ndarray | None:
        """Cluster-robust covariance of :attr:`coef_raw` (None without groups)."""
        if self.cov_cluster is None:
            return None
        j = self._jacobian()
        return j @ self.cov_cluster @ j.T

    def _jacobian(self) -> np.ndarray:
        k = len(self.coef)
        j = np.zeros((k, k))
        j[0, 0] = 1.0
        j[0, 1:] = -self.center / self.scale
        j[1:, 1:] = np.diag(1.0 / self.scale)
        return j


def fit_cloglog(
    x: np.ndarray,
    y: np.ndarray,
    *,
    penalty: float = 1.0,
    prior: np.ndarray | None = None,
    groups: np.ndarray | None = None,
    standardise: bool = True,
    tol: float = 1e-9,
    max_iter: int = 100,
) -> Fit:
    """Ridge-penalised binomial GLM with complementary log-log link, by Fisher scoring.

    Maximises ``loglik(b) - penalty / 2 * sum((b[1:] - prior) ** 2)`` over coefficients on the
    standardised columns; the intercept is not penalised. ``penalty=0`` is the plain maximum
    likelihood fit. Columns without variation get their coefficient fixed at 0. Converged
    when no standardised coefficient moves by more than ``tol`` in a step.

    With ``groups`` (one label per row, e.g. the unit of each unit-week) the fit also carries
    the cluster-robust sandwich covariance ``H^-1 (sum_g s_g s_g') H^-1 * c``: ``H`` the
    penalised observed information, ``s_g`` the per-group sums of the log-likelihood scores and
    ``c = G / (G - 1) * (n - 1) / (n - k)`` the small-sample factor statsmodels applies with
    ``cov_type="cluster"`` (Liang & Zeger 1986). Rows of one unit overlap in their outcome
    windows (a case in week t + 2 is an event for the risk sets of t and t + 1), so they are
    not independent and the model-based covariance is too small.
    """
    x = np.asarray(x, dtype=float)
    y = np.asarray(y, dtype=float)
    n, k = x.shape
    if standardise and n > 0:
        center = x.mean(axis=0)
        scale = x.std(axis=0)
    else:
        center, scale = np.zeros(k), np.ones(k)
    constant = ~(scale > 1e-12)
    scale = np.where(constant, 1.0, scale)
    z = np.column_stack([np.ones(n), (x - center) / scale])
    pen = np.concatenate([[0.0], np.full(k, float(penalty))])
    # A column that does not vary cannot be told apart from the intercept: pin it at 0.
    pen[1:][constant] = 1e12
    b0 = np.zeros(k + 1)
    if prior is not None:
        b0[1:] = np.where(constant, 0.0, prior)
    ybar = min(max(y.mean(), 1e-3), 1 - 1e-3) if n else 0.5
    b = b0.copy()
    b[0] = np.log(-np.log1p(-ybar))
    dev_old, eta, mu = _penalised_deviance(z, y, b, pen, b0)
    converged = False
    for it in range(1, max_iter + 1):  # noqa: B007 - the count is reported
        if eta is None:
            eta = z @ b
            mu = np.clip(inverse_cloglog(eta), _EPS, 1 - _EPS)
        # d mu / d eta for the cloglog link: exp(eta - exp(eta)).
        e = np.exp(np.minimum(eta, _ETA_MAX))
        dmu = np.maximum(e * np.exp(-e), _EPS)
        w = dmu**2 / (mu * (1 - mu))
        work = eta + (y - mu) / dmu
        zw = z * w[:, None]
        step = np.linalg.solve(zw.T @ z + np.diag(pen), zw.T @ work + pen * b0) - b
        # Step halving keeps the penalised deviance falling (it can rise far from the optimum).
        # The accepted step's linear predictor and means are the next iteration's (the same
        # numbers: they were computed from the same coefficients), not computed twice.
        eta = mu = None
        for _ in range(30):
            dev, eta_new, mu_new = _penalised_deviance(z, y, b + step, pen, b0)
            if np.isfinite(dev) and dev <= dev_old + 1e-9 * (abs(dev_old) + 1):
                eta, mu = eta_new, mu_new
                break
            step = step / 2
        b = b + step
        dev_old = dev
        if np.max(np.abs(step)) <= tol:
            converged = True
            break
    if eta is None:
        eta = z @ b
        mu = np.clip(inverse_cloglog(eta), _EPS, 1 - _EPS)
    e = np.exp(np.minimum(eta, _ETA_MAX))
    dmu = np.maximum(e * np.exp(-e), _EPS)
    w = dmu**2 / (mu * (1 - mu))
    info = (z * w[:, None]).T @ z + np.diag(pen)
    cov = np.linalg.inv(info)
    cov[:, 1:][:, constant] = 0.0
    cov[1:, :][constant, :] = 0.0
    cov_cluster = None
    if groups is not None:
        # Score of each row: z * (y - mu) * dmu / (mu (1 - mu)); summed within groups.
        codes, uniq = pd.factorize(np.asarray(groups))
        s = z * ((y - mu) * dmu / (mu * (1 - mu)))[:, None]
        sg = np.zeros((len(uniq), k + 1))
        np.add.at(sg, codes, s)
        g_n = len(uniq)
        n_free = k + 1 - int(constant.sum())
        c = g_n / max(g_n - 1, 1) * (n - 1) / max(n - n_free, 1)
        # The bread is the observed (not expected) information, as statsmodels uses: with
        # a = exp(eta), -d2 loglik / d eta2 = a^2 (1 - mu) / mu - (y - mu) (a / mu - a^2 (1 - mu)
        # / mu^2); its expectation is the IRLS weight ``w`` above.
        w_obs = e**2 * (1 - mu) / mu - (y - mu) * (e / mu - e**2 * (1 - mu) / mu**2)
        bread = np.linalg.inv((z * w_obs[:, None]).T @ z + np.diag(pen))
        cov_cluster = c * bread @ (sg.T @ sg) @ bread
        cov_cluster[:, 1:][:, constant] = 0.0
        cov_cluster[1:, :][constant, :] = 0.0
    deviance = float(-2 * np.sum(y * np.log(mu) + (1 - y) * np.log1p(-mu)))
    return Fit(b, cov, cov_cluster, center, scale, converged, it, deviance)


def _penalised_deviance(z, y, b, pen, b0) -> tuple[float, np.ndarray, np.ndarray]:
    """Penalised deviance at ``b``, with the linear predictor and the means it used."""
    eta = z @ b
    mu = np.clip(inverse_cloglog(eta), _EPS, 1 - _EPS)
    dev = -2 * np.sum(y * np.log(mu) + (1 - y) * np.log1p(-mu))
    return float(dev + np.sum(pen * (b - b0) ** 2)), eta, mu


def auc(score: np.ndarray, outcome: np.ndarray) -> float:
    """Area under the ROC curve: P(score of a random event > score of a random non-event).

    Ties count one half. This is the Mann-Whitney U of the events divided by
    ``n_events * n_non_events`` (Hanley & McNeil 1982), computed from mid-ranks.
    NaN when either class is empty.
    """
    score = np.asarray(score, dtype=float)
    outcome = np.asarray(outcome, dtype=bool)
    n1 = int(outcome.sum())
    n0 = outcome.size - n1
    if n1 == 0 or n0 == 0:
        return float("nan")
    ranks = stats.rankdata(score)
    u = ranks[outcome].sum() - n1 * (n1 + 1) / 2
    return float(u / (n1 * n0))


def brier(probability: np.ndarray, outcome: np.ndarray) -> float:
    """Mean squared difference between forecast probability and outcome (Brier 1950)."""
    probability = np.asarray(probability, dtype=float)
    if probability.size == 0:
        return float("nan")
    return float(np.mean((probability - np.asarray(outcome, dtype=float)) ** 2))
