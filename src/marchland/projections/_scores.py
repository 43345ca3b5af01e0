"""Proper scores for count forecasts, and the negative binomial noise of the naive baselines.

CRPS (from samples), log score, randomised PIT and interval coverage.

The CRPS is the quantile-decomposition form of the sample CRPS, the estimator that
scoringrules' ``crps_ensemble`` uses by default. It is written here (a few lines of numpy)
rather than imported because importing scoringrules compiles its numba kernels at import, about
10 s per process: more than the whole monthly backtest, and paid again in every worker process.
tests/reference/test_forecast_reference.py checks it against ``scoringrules.crps_ensemble``.
The log score and the PIT use the exact predictive
distribution where we have it: for the model, the mixture over paths of the negative binomial
given each path's state (Rao-Blackwellised, so no zero-probability artefacts of finite samples).
"""

from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import optimize, special, stats

from ._model import nb_logpmf

BASELINE_FLOOR = 0.1  # a baseline predicting 0 gets this mean, so a case is not impossible


def nb_cdf(y: np.ndarray, mu: np.ndarray, psi: float) -> np.ndarray:
    """NB2 cdf at ``y`` (``y < 0`` gives 0); mean ``mu``, size ``psi``.

    The regularised incomplete beta ``I_p(psi, floor(y) + 1)``, ``p = psi / (psi + mu)``:
    the closed form ``scipy.stats.nbinom.cdf`` evaluates (the same numbers), without its
    argument checks, which cost as much again on millions of (observation, path) pairs.
    """
    y = np.asarray(y, dtype=float)
    k = np.floor(np.maximum(y, 0.0)) + 1  # y < 0 is 0 below
    return np.where(y < 0, 0.0, special.betainc(psi, k, psi / (psi + mu)))


def mixture_scores(y, means, psi, rng):
    """Log score, randomised PIT and ``F(y - 1)``, ``F(y)`` under a mixture of NB2.

    The mixture is over the last axis of ``means``; ``psi`` is one size or one per observation.
    For one-dimensional ``y``, ``means`` may also be anything whose row slices ``means[i:j]``
    give those rows as an array (:class:`Rows`): it is read ``MIXTURE_BLOCK`` rows at a time.
    """
    y = np.asarray(y, dtype=float)
    size = np.asarray(psi, dtype=float)
    if y.ndim != 1:
        log_score, lo, hi = _mixture_parts(y, means, size)
    else:
        # A block of observations at a time: each holds (observations x paths) temporaries,
        # several GB at 50,000 units x 4 weeks x 200 paths. Every row's numbers are its own.
        parts = [
            _mixture_parts(
                y[i : i + MIXTURE_BLOCK],
                np.asarray(means[i : i + MIXTURE_BLOCK], dtype=float),
                size[i : i + MIXTURE_BLOCK] if size.ndim else size,
            )
            for i in range(0, max(len(y), 1), MIXTURE_BLOCK)
        ]
        log_score, lo, hi = (np.concatenate(p) for p in zip(*parts, strict=True))
    return log_score, lo + rng.uniform(size=hi.shape) * (hi - lo), lo, hi


class Rows:
    """Rows ``(h[k], u[k])`` of a (week, unit, path) array, taken a slice of ``k`` at a time.

    Stands for ``array[h, u]`` (observations x paths) without making that copy whole.
    ``array`` may also be a :class:`~marchland.projections._paths.PathStore` (its ``cells``).
    """

    def __init__(self, array: np.ndarray, h: np.ndarray, u: np.ndarray):
        self.array, self.h, self.u = array, h, u
        self.shape = (len(h), array.shape[-1])

    def __len__(self) -> int:
        return len(self.h)

    def __getitem__(self, rows: slice) -> np.ndarray:
        cells = getattr(self.array, "cells", None)
        if cells is not None:
            return cells(self.h[rows], self.u[rows])
        return self.array[self.h[rows], self.u[rows]]


#: Observations scored at a time by :func:`mixture_scores` (bounds its temporaries).
MIXTURE_BLOCK = 20_000


def _mixture_parts(y, means, size):
    yy = y[..., None]
    size = size[..., None] if size.ndim else size
    logp = nb_logpmf(yy, means, size)
    log_score = -(np.logaddexp.reduce(logp, axis=-1) - np.log(means.shape[-1]))
    hi = nb_cdf(yy, means, size).mean(axis=-1)
    lo = np.zeros(y.shape)
    c = y > 0  # F(y - 1) = 0 for a zero count (most of them): evaluated for the others only
    lo[c] = nb_cdf(yy[c] - 1, means[c], size[c] if np.ndim(size) else size).mean(axis=-1)
    return log_score, lo, hi


def nb_scores(y, mu, psi, rng):
    """Log score, randomised PIT and ``F(y - 1)``, ``F(y)`` under one NB2 per observation."""
    log_score = -nb_logpmf(y, mu, psi)
    hi, lo = nb_cdf(y, mu, psi), nb_cdf(y - 1, mu, psi)
    return log_score, lo + rng.uniform(size=np.shape(y)) * (hi - lo), lo, hi


def pit_interval_share(lo, hi, conf: float) -> np.ndarray:
    """Chance that the randomised PIT falls in ``[(1 - conf) / 2, (1 + conf) / 2]``.

    Given ``F(y - 1) = lo`` and ``F(y) = hi`` the randomised PIT is uniform on ``[lo, hi]``
    (its distribution is the non-randomised PIT of Czado, Gneiting and Held 2009), so the share
    is the length of the overlap over ``hi - lo``. Averaged over outcomes it is the coverage of
    a central interval with the discreteness of counts taken out: for a calibrated forecast its
    expectation is exactly ``conf``, whereas a central interval of a count distribution with
    much mass at 0 covers more than ``conf`` by construction.
    """
    a = (1 - conf) / 2
    lo, hi = np.asarray(lo, dtype=float), np.asarray(hi, dtype=float)
    width = hi - lo
    overlap = np.clip(np.minimum(hi, 1 - a) - np.maximum(lo, a), 0.0, None)
    point = ((lo >= a) & (lo <= 1 - a)).astype(float)  # a point mass of the PIT (width 0)
    return np.where(width > 0, overlap / np.where(width > 0, width, 1.0), point)


def crps(y: np.ndarray, samples: np.ndarray) -> np.ndarray:
    """Sample CRPS per observation (samples on the last axis).

    ``2 / m^2 sum_i (1{y < x_(i)} - (i - 1/2) / m) (x_(i) - y) m`` over the sorted samples
    ``x_(1) <= ... <= x_(m)``: the CRPS of the samples' empirical distribution (Gneiting and
    Raftery 2007; scoringrules' "qd" estimator).
    """
    x = np.sort(np.asarray(samples, dtype=float), axis=-1)
    m = x.shape[-1]
    alpha = np.arange(1, m + 1) - 0.5
    diff = x - np.asarray(y, dtype=float)[..., None]
    w = np.where(diff < 0, -alpha, m - alpha)  # x <= y: alpha (y - x); x > y: (m - alpha)(x - y)
    w = np.where(diff == 0, 0.0, w)
    return 2.0 * np.sum(w * diff, axis=-1) / m**2


def fit_size(y: np.ndarray, mu: np.ndarray) -> float:
    """Maximum-likelihood NB2 size for counts ``y`` with known means ``mu`` (1-D search)."""
    ok = np.isfinite(y) & np.isfinite(mu)
    y, mu = y[ok], mu[ok]
    if len(y) == 0:
        return 1.0
    res = optimize.minimize_scalar(
        lambda t: -nb_logpmf(y, mu, np.exp(t)).sum(), bounds=(-6, 12), method="bounded"
    )
    return float(np.exp(res.x))


def summarise_scores(detail: pd.DataFrame) -> pd.DataFrame:
    """Mean scores, coverage and PIT uniformity by model, horizon and country ("all" pooled)."""

    def agg(g: pd.DataFrame) -> pd.Series:
        ks = stats.kstest(g["pit"], "uniform") if len(g) > 1 else None
        return pd.Series(
            {
                "crps": g["crps"].mean(),
                "log_score": g["log_score"].mean(),
                "coverage": g["covered"].mean(),
                "coverage_expected": g["covered_expected"].mean(),
                "coverage_pit": g["covered_pit"].mean(),
                "pit_ks": np.nan if ks is None else ks.statistic,
                "pit_p": np.nan if ks is None else ks.pvalue,
                "n": len(g),
            }
        )

    cols = [
        "crps",
        "log_score",
        "coverage",
        "coverage_expected",
        "coverage_pit",
        "pit_ks",
        "pit_p",
        "n",
    ]
    keys = ["model", "horizon", "country"]
    if (detail["country"] == "all").any():  # units without countries: "all" is their label
        both = pd.concat([detail.assign(country="all"), detail], ignore_index=True)
        groups = list(both.groupby(keys, sort=False))
    else:
        # The pooled groups first, then by country: the groups of the pooled and per-country
        # rows stacked, without the two copies of every row (5 GB at 50,000 units).
        groups = [((m, h, "all"), g) for (m, h), g in detail.groupby(keys[:2], sort=False)]
        groups += list(detail.groupby(keys, sort=False))
    rows = [{"model": m, "horizon": h, "country": c, **agg(g).to_dict()} for (m, h, c), g in groups]
    out = pd.DataFrame(rows, columns=["model", "horizon", "country", *cols])
    out["n"] = out["n"].astype(int)
    return out.set_index("model")
