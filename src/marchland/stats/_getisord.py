"""The Getis-Ord Gi* kernel (private to :mod:`~marchland.stats.autocorrelation`: ``getis_ord``).

References
----------
Ord, J. K. & Getis, A. (1995). Local spatial autocorrelation statistics: distributional issues
and an application. Geographical Analysis 27, 286-306.
"""

from __future__ import annotations

import numpy as np
from scipy import sparse


def _gi_star_z(y: np.ndarray, w: sparse.csr_matrix) -> tuple[np.ndarray, np.ndarray]:
    """Gi* and its z-score for any non-negative weights with the self-weight included.

    z uses the general variance (Ord & Getis 1995, eq. 6), which does not change when a
    unit's weights are all multiplied by the same number; with binary weights it equals
    esda's ``G_Local(star=True, transform="B")`` z.
    """
    n = len(y)
    w_sum = np.asarray(w.sum(axis=1)).ravel()
    w_sq = np.asarray(w.multiply(w).sum(axis=1)).ravel()
    mean = y.mean()
    s = np.sqrt((y**2).mean() - mean**2)
    num = w @ y - mean * w_sum
    with np.errstate(divide="ignore", invalid="ignore"):
        z = num / (s * np.sqrt((n * w_sq - w_sum**2) / (n - 1)))
    g = (w @ y) / y.sum()
    return g, z
