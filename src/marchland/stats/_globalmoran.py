"""Global Moran's I: the statistic, its randomisation variance and the permutation test.

Private to :mod:`marchland.stats.autocorrelation`, which holds the public front (``global_moran``,
``global_moran_rate``, ``GlobalMoran``) and prepares the values and weights.

References
----------
Moran, P. A. P. (1950). Notes on continuous stochastic phenomena. Biometrika 37, 17-23.
Cliff, A. D. & Ord, J. K. (1981). Spatial Processes. Pion, London.
"""

from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import sparse, stats

from ..errors import InputError
from . import _permute


@dataclass(frozen=True)
class GlobalMoran:
    """Global Moran's I for the report's headline.

    Attributes
    ----------
    I : float
        Moran's I (row-standardised weights).
    expected : float
        ``-1 / (n - 1)``, its expectation under no spatial autocorrelation.
    variance : float
        Variance under the randomisation assumption (Cliff & Ord).
    z : float
        ``(I - expected) / sqrt(variance)``.
    p_norm : float
        Two-sided normal p-value of ``z``.
    p_sim : float
        Folded permutation p-value, ``(min(M, P - M) + 1) / (P + 1)``.
    permutations : int
        ``P``.
    n : int
        Units with a value.
    """

    I: float  # noqa: E741 - the statistic's name
    expected: float
    variance: float
    z: float
    p_norm: float
    p_sim: float
    permutations: int
    n: int

    def as_series(self) -> pd.Series:
        """Return the fields as a pandas Series (for tables)."""
        return pd.Series({k: getattr(self, k) for k in self.__dataclass_fields__})


def _global_moran_sims(z: np.ndarray, w: sparse.csr_matrix, permutations: int,
                       rng: np.random.Generator) -> np.ndarray:  # fmt: skip
    """Moran's I of ``permutations`` total (not conditional) permutations of ``z``."""
    n = len(z)
    s0, z2ss = w.sum(), (z * z).sum()
    batch = max(1, min(permutations, (1 << 22) // max(n, 1)))  # whole permutations per batch
    sims = np.empty(permutations)
    for start in range(0, permutations, batch):
        m = min(batch, permutations - start)
        zp = rng.permuted(np.broadcast_to(z, (m, n)), axis=1)
        sims[start : start + m] = n / s0 * (zp * (w @ zp.T).T).sum(axis=1) / z2ss
    return sims


def global_moran_arrays(
    y: np.ndarray, w: sparse.csr_matrix, permutations: int, rng: np.random.Generator
) -> GlobalMoran:
    """Global Moran's I of ``y`` on row-standardised ``w`` (no missing values, zero diagonal)."""
    n = len(y)
    if n < 4 or y.std() == 0:
        raise InputError("global Moran's I needs at least 4 units with differing values")
    z = y - y.mean()
    z2ss = (z * z).sum()
    s0 = w.sum()
    wt = w.T.tocsr()
    s1 = 0.5 * (w + wt).multiply(w + wt).sum()
    s2 = ((np.asarray(w.sum(axis=1)).ravel() + np.asarray(w.sum(axis=0)).ravel()) ** 2).sum()
    moran_i = n / s0 * (z * (w @ z)).sum() / z2ss
    expected = -1.0 / (n - 1)
    n2, s02 = n * n, s0 * s0
    k = ((z**4).sum() / n) / ((z**2).sum() / n) ** 2
    a = n * ((n2 - 3 * n + 3) * s1 - n * s2 + 3 * s02)
    b = k * ((n2 - n) * s1 - 2 * n * s2 + 6 * s02)
    variance = (a - b) / ((n - 1) * (n - 2) * (n - 3) * s02) - expected**2
    z_score = (moran_i - expected) / np.sqrt(variance)
    sims = _global_moran_sims(z, w, permutations, rng)
    tol = _permute.TIE_TOLERANCE * (abs(moran_i) + sims.std())
    at_least, at_most = (sims >= moran_i - tol).sum(), (sims <= moran_i + tol).sum()
    return GlobalMoran(
        I=float(moran_i),
        expected=float(expected),
        variance=float(variance),
        z=float(z_score),
        p_norm=float(2 * stats.norm.sf(abs(z_score))),
        p_sim=float(_permute.folded_pvalues(at_least, at_most, permutations)),
        permutations=int(permutations),
        n=int(n),
    )
