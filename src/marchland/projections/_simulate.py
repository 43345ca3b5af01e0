"""Simulated count paths from a fitted endemic-epidemic model, vectorised over units and paths.

Only the horizon steps are looped over: each step is one sparse product for the neighbourhood
part and one negative binomial draw (gamma-Poisson mixture) for every unit and path at once.
"""

from __future__ import annotations

import numpy as np

from ._weights import OrderMatrix

#: Units x paths drawn at once (about 16 MB per working array of float64).
PATH_BLOCK_CELLS = 2_000_000


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
    paths = np.empty((steps, n, n_paths), dtype=np.int32)
    means = np.empty((steps, n, n_paths), dtype=np.float32) if keep_means else None
    for lo, hi, y, mu in path_blocks(
        start,
        endemic,
        lam=lam,
        phi=phi,
        d=d,
        psi=psi,
        orders=orders,
        n_paths=n_paths,
        rng=rng,
        keep_means=keep_means,
    ):
        paths[:, :, lo:hi] = y
        if keep_means:
            means[:, :, lo:hi] = mu
    return (paths, means) if keep_means else paths


def path_blocks(
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
    """Yield ``(lo, hi, paths, means)`` for paths ``lo`` to ``hi``, as :func:`simulate_paths`.

    ``paths`` is (steps, n, hi - lo) int32, ``means`` (steps, n, hi - lo) float32 or None.
    The blocks come in order; together they are exactly :func:`simulate_paths`' arrays.
    """
    steps, n = endemic.shape
    start = np.asarray(start, dtype=float).reshape(n, -1)
    wt = orders.weights(d) if (phi > 0 and not orders.empty) else None
    size = np.asarray(psi, dtype=float)
    size = size.reshape(n, 1) if size.ndim else size
    # Paths are independent of each other: they are drawn a block at a time, so the working
    # arrays (counts, means, draws: units x block each) stay small however many units there
    # are (at 50,000 units and 1,000 paths each was 0.4 GB). The block depends only on the
    # number of units, so a run gives the same paths on any machine and with any workers; up
    # to PATH_BLOCK_CELLS / n_paths units (the demo's size) there is one block, as before.
    block = max(1, PATH_BLOCK_CELLS // max(n, 1))
    for lo in range(0, n_paths, block):
        hi = min(lo + block, n_paths)
        paths = np.empty((steps, n, hi - lo), dtype=np.int32)
        means = np.empty((steps, n, hi - lo), dtype=np.float32) if keep_means else None
        first = start if start.shape[1] == 1 else start[:, lo:hi]
        y = np.broadcast_to(first, (n, hi - lo)).copy()
        for s in range(steps):
            mu = endemic[s][:, None] + lam * y
            if wt is not None:
                mu += phi * (wt @ y)
            if keep_means:
                means[s] = mu
            g = rng.gamma(size, np.divide(mu, size, out=mu))
            del mu
            y = rng.poisson(g).astype(float)
            del g
            paths[s] = y
        yield lo, hi, paths, means
