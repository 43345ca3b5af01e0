"""Simulated count paths from a fitted endemic-epidemic model, vectorised over units and paths.

Only the horizon steps are looped over: each step is one sparse product for the neighbourhood
part and one negative binomial draw (gamma-Poisson mixture) for every unit and path at once.
"""

from __future__ import annotations

import numpy as np

from ._weights import OrderMatrix


def simulate_paths(
    start: np.ndarray,
    endemic: np.ndarray,
    *,
    lam: float,
    phi: float,
    d: float,
    psi,
    orders: OrderMatrix,
    n_paths: int,
    rng: np.random.Generator,
    keep_means: bool = False,
):
    """Draw ``n_paths`` paths of ``len(endemic)`` weeks following ``start``.

    Parameters
    ----------
    start : (n,) or (n, n_paths) array
        Counts in the week before the first simulated week.
    endemic : (steps, n) array
        Endemic mean ``e_i nu_it`` for every simulated week.
    lam, phi, d : float
        Autoregressive and neighbourhood rates, power-law decay.
    psi : float or (n,) array
        Negative binomial size, shared or per unit.

    Returns
    -------
    paths : (steps, n, n_paths) int32 array
    means : (steps, n, n_paths) float32 array, only when ``keep_means``
        The conditional mean of each draw (used for exact predictive probabilities).
    """
    steps, n = endemic.shape
    y = np.broadcast_to(np.asarray(start, dtype=float).reshape(n, -1), (n, n_paths)).copy()
    wt = orders.weights(d) if (phi > 0 and not orders.empty) else None
    paths = np.empty((steps, n, n_paths), dtype=np.int32)
    means = np.empty((steps, n, n_paths), dtype=np.float32) if keep_means else None
    size = np.asarray(psi, dtype=float)
    size = size.reshape(n, 1) if size.ndim else size
    for s in range(steps):
        mu = endemic[s][:, None] + lam * y
        if wt is not None:
            mu += phi * (wt @ y)
        if keep_means:
            means[s] = mu
        # Each (units x paths) array is 0.4 GB at 50,000 units and 1,000 paths: the scale
        # reuses the mean's buffer and the draws land in the previous counts' buffer (the
        # same numbers and the same random stream as building new arrays).
        g = rng.gamma(size, np.divide(mu, size, out=mu))
        del mu
        k = rng.poisson(g)
        del g
        np.copyto(y, k)
        del k
        paths[s] = y
    return (paths, means) if keep_means else paths
