"""Delay patterns on group triangles: chain-ladder factors, point nowcasts, NB dispersion.

All arrays are (groups, weeks, delays); nothing loops over groups or weeks. We write the
factors ourselves because chainladder works on one triangle object at a time and has no
notion of as-of offsets; tests/reference checks the factors against it.
"""

from __future__ import annotations

import numpy as np
from scipy import special, stats

# Candidate negative-binomial sizes; the top end is practically Poisson.
PHI_GRID = np.logspace(-1, 4, 41)
MIN_POINTS = 4  # fewer past errors than this at a delay: use the group's pooled estimate


def factors(
    C: np.ndarray, age: np.ndarray, offset: int, window: int, weeks: np.ndarray | None = None
) -> np.ndarray:
    """Volume-weighted development factors (Mack 1993) as known ``offset`` weeks earlier.

    ``f[g, d]`` = sum C[d+1] / sum C[d] over the ``window`` most recent weeks that had both
    delays by then (only the weeks where ``weeks`` is True, if given). 0/0 gives 1 (nothing
    ever reported: nothing to grow); x/0 gives inf (the pattern cannot be estimated from d).
    """
    n_d = C.shape[2] - 1
    a = age - offset
    d = np.arange(n_d)
    use = (a[:, None] >= d + 1) & (a[:, None] <= d + window)  # (T, D)
    if weeks is not None:
        use &= weeks[:, None]
    filled = np.nan_to_num(C)
    num = np.einsum("gtd,td->gd", filled[:, :, 1:], use)
    den = np.einsum("gtd,td->gd", filled[:, :, :-1], use)
    with np.errstate(divide="ignore", invalid="ignore"):
        f = np.where(den > 0, num / np.where(den > 0, den, 1), np.where(num > 0, np.inf, 1.0))
    return f


def to_final(f: np.ndarray) -> np.ndarray:
    """Cumulative factors F[g, k] = prod_{d >= k} f[g, d]; F[:, D] = 1; NaN-free (inf kept)."""
    with np.errstate(invalid="ignore"):
        F = np.cumprod(f[:, ::-1], axis=1)[:, ::-1]
    F = np.where(np.isnan(F), np.inf, F)
    return np.concatenate([F, np.ones((f.shape[0], 1))], axis=1)


def point(C: np.ndarray, age: np.ndarray, F: np.ndarray, offset: int) -> dict[str, np.ndarray]:
    """Give the reported value and chain-ladder estimate of weeks younger than D at the offset.

    ``F`` is (G, D+1), one pattern for every week, or a tuple ``(F_other, F_end, end)`` of two
    such patterns and a (T,) mask of the weeks that take ``F_end`` (see ``_calendar``).
    """
    n_d = C.shape[2] - 1
    a = age - offset
    live = (a >= 0) & (a < n_d)
    k = np.clip(a, 0, n_d)
    R = np.take_along_axis(C, np.broadcast_to(k[None, :, None], (C.shape[0], len(k), 1)), 2)[..., 0]
    if isinstance(F, tuple):
        F_other, F_end, end = F
        Fk = np.where(end[None, :], F_end[:, k], F_other[:, k])
    else:
        Fk = F[:, k]
    with np.errstate(invalid="ignore"):
        N = np.where(np.isinf(Fk), np.nan, R * Fk)
    return {"live": live, "k": k, "R": R, "N": N}


def _nb_loglik(z: np.ndarray, mu: np.ndarray) -> np.ndarray:
    """NB log-likelihood of z with means mu per size in PHI_GRID, less terms free of size."""
    phi = PHI_GRID
    z, mu = z[..., None], mu[..., None]
    # The four terms added in the same order as ``a - b + c + d``, in place: the expression
    # held five (groups x weeks x sizes) temporaries at once (0.7 GB at 2,500 provinces).
    out = special.gammaln(z + phi)
    out -= special.gammaln(phi)
    tmp = np.add(phi, mu)
    np.divide(phi, tmp, out=tmp)
    np.log(tmp, out=tmp)
    np.multiply(phi, tmp, out=tmp)
    out += tmp
    np.add(phi, mu, out=tmp)
    np.divide(mu, tmp, out=tmp)
    np.log(tmp, out=tmp)
    np.multiply(z, tmp, out=tmp)
    out += tmp
    return out


def calibrate(
    C: np.ndarray, age: np.ndarray, window: int, n_past: int, F_of=None
) -> tuple[np.ndarray, np.ndarray]:
    """Size parameter per (group, delay) from retrospective nowcasts' errors.

    For each earlier as-of date ``A - 7m`` (m = 1..n_past) the factors are re-estimated from
    what was known then, each young week is nowcast, and the part still to come is compared with
    the week's value at delay D as known now (weeks that have reached D). The NB size maximising
    the likelihood of those remainders is kept per delay (Wolffram et al. 2023, "KIT" baseline).
    Returns ``phi`` (G, D) and the number of past errors behind each value.
    """
    n_g, _, n_dp = C.shape
    n_d = n_dp - 1
    ll = np.zeros((n_g, n_d, len(PHI_GRID)))
    npts = np.zeros((n_g, n_d))
    truth_known = age >= n_d
    for m in range(1, n_past + 1):  # a loop over past as-of dates, not over groups or weeks
        F = to_final(factors(C, age, m, window)) if F_of is None else F_of(m)
        p = point(C, age, F, m)
        sel = p["live"] & truth_known
        if not sel.any():
            continue
        k = p["k"][sel]
        R, N = p["R"][:, sel], p["N"][:, sel]
        Y = C[:, sel, n_d]
        mu = N - R
        z = np.where(mu >= 0, Y - R, R - Y)
        z = np.maximum(np.nan_to_num(z), 0)
        amu = np.abs(mu)
        # A zero mean says nothing about dispersion (the model puts all mass on 0).
        ok = np.isfinite(amu) & (amu > 0)
        lik = _nb_loglik(z, np.where(ok, amu, 1.0))
        lik *= ok[..., None]
        onehot = (k[:, None] == np.arange(n_d)).astype(float)  # (S, D)
        ll += np.einsum("gsp,sd->gdp", lik, onehot)
        npts += ok.astype(float) @ onehot
    phi_k = PHI_GRID[np.argmax(ll, axis=2)]
    pooled = PHI_GRID[np.argmax(ll.sum(axis=1), axis=1)]
    phi = np.where(npts >= MIN_POINTS, phi_k, pooled[:, None])
    phi = np.where(npts.sum(axis=1, keepdims=True) >= MIN_POINTS, phi, PHI_GRID[-1])
    return phi, npts


def nb_bounds(
    R: np.ndarray, N: np.ndarray, phi: np.ndarray, conf: float
) -> tuple[np.ndarray, np.ndarray]:
    """Interval for the final value: reported plus (or minus) an NB remainder with mean N - R."""
    mu = N - R
    amu = np.abs(np.nan_to_num(mu))
    lo_q, hi_q = (1 - conf) / 2, (1 + conf) / 2
    p = phi / (phi + np.where(amu > 0, amu, 1.0))
    q_lo = np.where(amu > 0, stats.nbinom.ppf(lo_q, phi, p), 0.0)
    q_hi = np.where(amu > 0, stats.nbinom.ppf(hi_q, phi, p), 0.0)
    up = mu >= 0
    lower = np.where(up, R + q_lo, np.maximum(R - q_hi, 0))
    upper = np.where(up, R + q_hi, np.maximum(R - q_lo, 0))
    bad = np.isnan(N)
    return np.where(bad, np.nan, lower), np.where(bad, np.nan, upper)


def nb_draws(
    R: np.ndarray, N: np.ndarray, phi: np.ndarray, n_draws: int, rng: np.random.Generator
) -> np.ndarray:
    """Draws of the final value (n_draws, *R.shape) under the same NB remainder model."""
    mu = np.nan_to_num(N - R)
    amu = np.abs(mu)
    p = phi / (phi + np.where(amu > 0, amu, 1.0))
    rem = rng.negative_binomial(np.broadcast_to(phi, R.shape), p, size=(n_draws, *R.shape))
    rem = np.where(amu > 0, rem, 0)
    return np.maximum(np.where(mu >= 0, R + rem, R - rem), 0)
