"""Empirical Bayes smoothing kernels, global and spatial.

Private to :mod:`marchland.stats.rates`, which holds ``smooth_rates`` and checks the inputs.

References
----------
Marshall, R. J. (1991). Mapping disease and mortality rates using empirical Bayes estimators.
Journal of the Royal Statistical Society C 40, 283-294.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..graph.border import BorderGraph


def global_eb(e: np.ndarray, b: np.ndarray) -> np.ndarray:
    r_mean = e.sum() / b.sum()
    rate = e / b
    # Method-of-moments prior variance (Marshall 1991, eq. 8); truncated at 0 as Marshall
    # advises, where esda's Empirical_Bayes lets it go negative.
    r_var = max((b * (rate - r_mean) ** 2).sum() / b.sum() - r_mean / b.mean(), 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        weight = r_var / (r_var + r_mean / b)
    weight = np.where(np.isfinite(weight), weight, 0.0)
    return weight * rate + (1.0 - weight) * r_mean


def spatial_eb(
    e: np.ndarray, b: np.ndarray, valid: np.ndarray, graph: BorderGraph
) -> tuple[np.ndarray, np.ndarray]:
    """Return spatial EB rates (NaN where not valid) and the mask of islands shrunk globally."""
    # Each unit's prior is the rate of its neighbourhood, itself included (binary weights),
    # as in esda's Spatial_Empirical_Bayes; written on the edge list so it is vectorised and
    # units without a usable population are left out of their neighbours' sums.
    n = len(graph.ids)
    pos = pd.Series(np.arange(n), index=graph.ids)
    rows = np.concatenate([pos.loc[graph.edges["focal"]].to_numpy(), np.arange(n)])
    cols = np.concatenate([pos.loc[graph.edges["neighbor"]].to_numpy(), np.arange(n)])
    keep = valid[cols]
    rows, cols = rows[keep], cols[keep]
    e0 = np.where(valid, e, 0.0)
    b0 = np.where(valid, b, 0.0)
    sum_e = np.bincount(rows, weights=e0[cols], minlength=n)
    sum_b = np.bincount(rows, weights=b0[cols], minlength=n)
    count = np.bincount(rows, minlength=n)
    with np.errstate(invalid="ignore", divide="ignore"):
        r_mean = sum_e / sum_b
        rate = e0 / b0
        dev = b0[cols] * (rate[cols] - r_mean[rows]) ** 2
        r_var = np.bincount(rows, weights=dev, minlength=n) / sum_b - r_mean / (sum_b / count)
        r_var = np.where(r_var < 0, 0.0, r_var)
        smooth = r_mean + (rate - r_mean) * (r_var / (r_var + r_mean / b0))
        # A neighbourhood with no cases at all shrinks to its (zero) mean.
        smooth = np.where((r_var == 0) & np.isfinite(r_mean), r_mean, smooth)
    # An island (no neighbour with a usable population) is its own neighbourhood: prior mean
    # = its own rate, so nothing is smoothed and a small island keeps a wild raw rate. It is
    # shrunk by the global estimator instead (prior: the region's mean and variance).
    island = valid & (count == 1)
    if island.any():
        smooth = np.where(island, global_all(e, b, valid), smooth)
    return np.where(valid, smooth, np.nan), island


def global_all(e: np.ndarray, b: np.ndarray, valid: np.ndarray) -> np.ndarray:
    """Global EB over the valid units, NaN elsewhere."""
    out = np.full(len(e), np.nan)
    out[valid] = global_eb(e[valid], b[valid])
    return out
