"""The scan kernel: zones by nearest neighbours, cylinder counts, LLR, Monte Carlo maxima.

Plain arrays in, plain arrays out. A candidate cylinder is (height ``h``, centre ``i``, size
``k``): the centre and its ``k - 1`` nearest units, over the last ``h`` weeks of the window.
Counts for every cylinder come from cumulative sums over each centre's ordered neighbour list,
so no Python loop runs over cylinders. Written here rather than taken from a library because no
well-kept Python library offers a prospective space-time scan (scipy gives the random tables).
"""

from __future__ import annotations

import math

import numba
import numpy as np
from scipy import sparse
from scipy.sparse import csgraph
from scipy.spatial import cKDTree
from scipy.stats import random_table

# Memory for one batch of simulated cylinder counts (float64), in bytes.
BATCH_BYTES = 64 * 2**20
# Memory for the cylinders of one height scored at a time (float64, per array), in bytes.
CHUNK_BYTES = 4 * 2**20


def neighbour_order(
    xy: np.ndarray, k: int, adjacency: sparse.csr_matrix | None = None
) -> tuple[np.ndarray, np.ndarray]:
    """Order each unit's ``k`` nearest units (itself first): by centroid distance, or by hops.

    Returns ``order`` (n, k) unit positions and ``ok`` (n, k), False where a unit cannot be
    reached (graph order beyond the unit's connected component).
    """
    n = len(xy)
    k = min(k, n)
    if adjacency is None:
        order = cKDTree(xy).query(xy, k=k)[1]  # the distances go at once
        order = np.asarray(order, dtype=np.int64).reshape(n, k)
        # A tie at distance 0 (shared centroids) could put another unit first; the centre leads.
        return _centre_first(order), np.ones((n, k), dtype=bool)
    hops = csgraph.shortest_path(adjacency, unweighted=True, directed=False)
    dist = np.sqrt(((xy[:, None, :] - xy[None, :, :]) ** 2).sum(-1))
    # Hops first, centroid distance breaks ties within a ring.
    key = np.where(np.isfinite(hops), hops, n + 1) * (dist.max() + 1.0) + dist
    order = np.argsort(key, axis=1, kind="stable")[:, :k]
    ok = np.isfinite(np.take_along_axis(hops, order, axis=1))
    return _centre_first(order), ok


def _centre_first(order: np.ndarray) -> np.ndarray:
    n = order.shape[0]
    centre = np.arange(n)
    if (order[:, 0] == centre).all():
        return order
    out = order.copy()
    pos = np.argmax(order == centre[:, None], axis=1)
    out[centre, pos] = order[:, 0]
    out[:, 0] = centre
    return out


def zone_limits(
    order: np.ndarray, ok: np.ndarray, size: np.ndarray, cap: float
) -> tuple[np.ndarray, np.ndarray]:
    """Cumulative zone size and the mask of zones no larger than ``cap`` (a prefix per row)."""
    # In place: one (n, K) float block, not three.
    zsize = np.asarray(size, dtype=np.float64)[order]
    zsize[~ok] = 0.0
    np.cumsum(zsize, axis=1, out=zsize)
    valid = np.logical_and.accumulate(ok & (zsize <= cap * (1 + 1e-12)), axis=1)
    return zsize, valid


def recent_sums(table: np.ndarray, max_weeks: int) -> np.ndarray:
    """Cases per unit in the last 1..max_weeks weeks: ``(..., n, T) -> (..., H, n)``."""
    tail = table[..., ::-1][..., :max_weeks]
    return np.moveaxis(np.cumsum(tail, axis=-1), -1, -2)


def cylinder_counts(recent: np.ndarray, order: np.ndarray) -> np.ndarray:
    """Observed cases of every cylinder: ``(..., H, n) -> (..., H, n, K)``."""
    out = recent[..., order]
    return np.cumsum(out, axis=-1, out=out)  # in place: one (..., H, n, K) block, not two


def poisson_llr(c: np.ndarray, mu: np.ndarray, total: float) -> np.ndarray:
    """Log of the Poisson generalised likelihood ratio; 0 unless ``c > mu`` (excess only).

    Kulldorff et al. (2005), eq. for the space-time permutation scan:
    ``(c/mu)^c ((C-c)/(C-mu))^(C-c)``, with ``C`` the total number of cases.
    """
    c = np.asarray(c, dtype=float)
    mu = np.broadcast_to(mu, c.shape)
    if c.ndim == 3:
        # One height at a time: the temporaries below (up to six arrays as large as the
        # cylinders with an excess) are then a quarter of the (H, n, K) block each.
        out = np.empty(c.shape)
        for h in range(c.shape[0]):  # a loop over heights only
            out[h] = poisson_llr(c[h], mu[h], total)
        return out
    up = (c > mu) & (mu > 0)
    out = np.zeros(c.shape)
    cc, mm = c[up], mu[up]
    rest = total - cc
    inside = cc * np.log(cc / mm)
    # (C - c) log((C - c)/(C - mu)) -> 0 when every case is inside the cylinder.
    outside = np.where(rest > 0, rest * np.log(np.where(rest > 0, rest, 1.0) / (total - mm)), 0.0)
    out[up] = inside + outside
    return out


def null_maxima(
    draw,
    n_sims: int,
    order: np.ndarray,
    recent_mu: np.ndarray,
    valid: np.ndarray,
    total: float,
    max_weeks: int,
    n_weeks: int = 64,
    live: np.ndarray | None = None,
) -> np.ndarray:
    """Largest LLR of each simulated table, drawn in batches so memory stays bounded.

    ``draw(b)`` returns ``b`` tables of shape (n, ``n_weeks``) with the null distribution.
    ``recent_mu`` (H, n) holds each unit's expected cases over the last 1..H weeks
    (:func:`recent_sums` of the cell expectations); the cylinders' expectations are summed
    from it one height at a time. The cylinder loop runs in a compiled kernel
    (:func:`_batch_maxima`) that computes a log only for cylinders whose cheap upper bound can
    beat the table's current maximum.

    ``live`` (n,) marks the units with an expected case in the last ``max_weeks`` weeks; the
    others get none in any simulated table (a cell with no expectation draws no case, under
    the permutation and the multinomial alike). Adding such a unit to a base changes neither
    its count nor its expectation (both add exactly 0), so that cylinder repeats the one
    before it and cannot raise the maximum: the kernel walks the live units of each base
    only (at 10,000 units, 86 % of them had no case in the window), with the same maxima.
    The walked cylinders are stored one after another, centre by centre (``start`` marks where
    each centre's begin), not in an (H, n, K) block: at 50,000 units 0.6 of 5 million.
    """
    n, n_k = order.shape
    batch = int(max(1, min(n_sims, BATCH_BYTES // (n * n_weeks * 8 * 2))))
    # Bases are prefixes of each centre's neighbour list: only their length is needed.
    width = valid.sum(axis=1).astype(np.int64)
    within = np.arange(n_k)[None, :] < width[:, None]
    if live is None:
        live = np.ones(n, dtype=bool)
    # Each base's live units, centre by centre, numbered among the live units.
    walk = within & live[order]
    start = np.zeros(n + 1, dtype=np.int64)
    np.cumsum(walk.sum(axis=1), out=start[1:])
    rows, cols = np.nonzero(walk)  # row by row: each centre's cylinders in order of size
    del walk, within
    number = np.cumsum(live) - 1
    packed = number[order[rows, cols]]
    mu_c = np.empty((max_weeks, len(rows)))
    for h in range(max_weeks):  # one height at a time: one (n, K) block of expectations
        mu_c[h] = cylinder_counts(recent_mu[h], order)[rows, cols]
    del rows, cols
    # LLR = c log c - c log mu + (C-c) log(C-c) - (C-c) log(C-mu): the mu parts once, here.
    # In place (log 1 = 0 exactly where mu is 0): no temporaries the size of mu_c.
    log_mu = np.zeros_like(mu_c)
    np.log(mu_c, out=log_mu, where=mu_c > 0)
    log_rest = np.subtract(total, mu_c)
    np.maximum(log_rest, 1e-300, out=log_rest)
    np.log(log_rest, out=log_rest)
    blocks = max(1, numba.get_num_threads())
    out = np.empty(n_sims)
    done = 0
    while done < n_sims:
        b = min(batch, n_sims - done)
        tables = draw(b)[:, live, -max_weeks:]
        # (H, live units, b): the tables of a batch side by side, so the kernel reads each
        # cylinder's expectation once for all of them (sums of whole counts: exact).
        recent = np.ascontiguousarray(
            np.moveaxis(recent_sums(tables.astype(np.float64), max_weeks), 0, -1)
        )
        out[done : done + b] = _batch_maxima(
            recent, packed, start, mu_c, log_mu, log_rest, total, min(blocks, b)
        )
        done += b
    return out


@numba.njit(parallel=True, cache=True, nogil=True)
def _batch_maxima(recent, packed, start, mu, log_mu, log_rest, total, n_blocks):  # pragma: no cover
    """Largest LLR over every valid cylinder of each table; ``recent`` is (H, units, B).

    Centre ``i``'s cylinders are ``start[i]:start[i + 1]`` of ``packed`` (the unit each adds)
    and of the (H, cylinders) expectations ``mu``, ``log_mu`` and ``log_rest``.

    Pruning: with log x <= x - 1 on both terms, LLR <= (c - mu) (c/mu - (C-c)/(C-mu)); a
    cylinder whose bound is below the current maximum cannot be the maximum, so its logs are
    skipped. The result equals the full evaluation.

    The tables are shared out in ``n_blocks`` blocks (one per thread), and a block walks the
    cylinders once for all its tables: the expectations (``mu``, tens of MB at 50,000 units)
    are read once per block rather than once per table, which made the kernel
    bound by memory. Each table's counts are summed and compared in the same order as one by
    one, so every maximum is the same to the bit.
    """
    n_h, _, n_b = recent.shape
    n = len(start) - 1  # centres (``recent`` may hold fewer units: those that can have cases)
    out = np.zeros(n_b)
    size = (n_b + n_blocks - 1) // n_blocks
    for blk in numba.prange(n_blocks):
        b0 = blk * size
        b1 = min(n_b, b0 + size)
        nb = b1 - b0
        if nb <= 0:
            continue
        best = np.zeros(nb)
        low = 0.0  # the smallest maximum of the block's tables so far
        c = np.empty(nb)
        for h in range(n_h):
            for i in range(n):
                c[:] = 0.0
                for z in range(start[i], start[i + 1]):
                    j = packed[z]
                    m = mu[h, z]
                    # The bound is C (c - mu)^2 / (mu (C - mu)): below ``low`` (so below
                    # every table's maximum) while c <= mu + sqrt(low mu (C - mu) / C). A
                    # count up to that (less a margin far above rounding) is passed over with
                    # one comparison; the tests below decide the rest, as one by one.
                    if m > 0.0:
                        cut = m + math.sqrt(low * m * max(total - m, 0.0) / total) * (1 - 1e-6)
                    else:
                        cut = math.inf
                    for q in range(nb):
                        cq = c[q] + recent[h, j, b0 + q]
                        c[q] = cq
                        if cq <= cut:
                            continue
                        if cq <= m or m <= 0.0:
                            continue
                        rest = total - cq
                        bound = (cq - m) * (cq / m - rest / (total - m))
                        if bound * (1.0 + 1e-9) + 1e-12 <= best[q]:
                            continue
                        v = cq * np.log(cq) - cq * log_mu[h, z] - rest * log_rest[h, z]
                        if rest > 0.0:
                            v += rest * np.log(rest)
                        if v > best[q]:
                            best[q] = v
                            low = best.min()
        for q in range(nb):
            out[b0 + q] = best[q]
    return out


def permutation_draw(table: np.ndarray, rng: np.random.Generator):
    """Random tables with the unit and week margins of ``table`` (the case-time permutation)."""
    rows = table.sum(axis=1).astype(np.int64)
    cols = table.sum(axis=0).astype(np.int64)
    keep = rows > 0
    dist = random_table(rows[keep], cols, seed=rng)

    def draw(b: int) -> np.ndarray:
        out = np.zeros((b, *table.shape))
        out[:, keep, :] = dist.rvs(size=b)
        return out

    return draw


def multinomial_draw(total: int, prob: np.ndarray, rng: np.random.Generator):
    """Tables of ``total`` cases spread over cells with probabilities ``prob`` (Poisson null)."""
    flat = prob.ravel() / prob.sum()

    def draw(b: int) -> np.ndarray:
        return rng.multinomial(total, flat, size=b).reshape(b, *prob.shape)

    return draw


def select_clusters(
    best: np.ndarray, best_h: np.ndarray, order: np.ndarray, max_clusters: int
) -> list[tuple[int, int, int]]:
    """Most likely cylinder, then the best ones sharing no unit with those already chosen.

    ``best`` (n, K) is each base's largest LLR over the heights (0 for invalid bases) and
    ``best_h`` the first height index reaching it (:func:`best_cylinders`). Ties go, as in
    the first largest of the (H, n, K) cylinders, to the shortest height, then the first
    centre, then the smallest base. Returns ``(h_index, centre, k_index)`` triples, best
    first; only cylinders with LLR > 0.
    """
    n = order.shape[0]
    used = np.zeros(n, dtype=bool)
    picks: list[tuple[int, int, int]] = []
    for _ in range(max_clusters):  # one pass per reported cluster, vectorised over bases
        overlap = np.logical_or.accumulate(used[order], axis=1)
        s = np.where(overlap, 0.0, best)
        top = s.max()
        if not top > 0:
            break
        tied = s == top
        h = best_h[tied].min()
        i, k = np.unravel_index(int(np.argmax(tied & (best_h == h))), s.shape)
        picks.append((int(h), int(i), int(k)))
        used[order[i, : k + 1]] = True
    return picks


def zones(xy, adjacency, size, cap, max_units):
    """Neighbour order wide enough for every base under the cap (grown by doubling)."""
    n = len(xy)
    limit = n if max_units is None else min(n, int(max_units))
    k = min(limit, 32)
    while True:
        order, ok = neighbour_order(xy, k, adjacency)
        valid = zone_limits(order, ok, size, cap)[1]
        if k >= limit or not valid[:, -1].any():
            break
        del order, ok, valid  # before the wider order is made
        k = min(limit, 2 * k)
    width = max(1, int(valid.sum(axis=1).max()))
    return order[:, :width], valid[:, :width]


def height_cylinders(
    recent_obs: np.ndarray,
    recent_mu: np.ndarray,
    order: np.ndarray,
    valid: np.ndarray,
    total: float,
    h: int,
) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Observed, expected and LLR (0 for invalid bases) of every cylinder of height index ``h``.

    ``recent_obs`` and ``recent_mu`` are (H, n) :func:`recent_sums` of the cases and of the
    cell expectations; the three arrays returned are (n, K).
    """
    obs = cylinder_counts(recent_obs[h], order)
    mu = cylinder_counts(recent_mu[h], order)
    llr = poisson_llr(obs, mu, total)
    llr[~valid] = 0.0
    return obs, mu, llr


def candidates(table, cell, xy, size, cap, max_weeks, *, adjacency=None, max_units=None):
    """Every candidate cylinder at once: ``order, valid, observed, expected, llr``.

    ``observed``, ``expected`` and ``llr`` have shape (H, n, K): height index ``h`` (last
    ``h + 1`` weeks), centre, base size index ``k`` (``k + 1`` units, ``order[i, :k + 1]``).
    ``cell`` holds the expected count of every unit-week under the null. Three blocks of
    H x n x K: for small regions and checks; the scan keeps less (:func:`best_cylinders`).
    """
    order, valid = zones(xy, adjacency, size, cap, max_units)
    total = float(table.sum())
    recent_obs, recent_mu = recent_sums(table, max_weeks), recent_sums(cell, max_weeks)
    heights = [
        height_cylinders(recent_obs, recent_mu, order, valid, total, h) for h in range(max_weeks)
    ]
    obs, mu, llr = (np.stack(a) for a in zip(*heights, strict=True))
    return order, valid, obs, mu, llr


def best_cylinders(table, cell, xy, size, cap, max_weeks, *, adjacency=None, max_units=None):
    """Each base's best height: ``order, valid, best, best_h`` (see :func:`select_clusters`).

    ``best`` (n, K) is the largest LLR of the base over the heights and ``best_h`` the first
    height index reaching it (the smallest unsigned integer type that holds it). The heights
    are scored one at a time, for ``CHUNK_BYTES`` of centres at a time, so (H, n, K) blocks
    of counts and ratios are never held (at 50,000 units 0.16 GB each).
    """
    order, valid = zones(xy, adjacency, size, cap, max_units)
    total = float(table.sum())
    recent_obs, recent_mu = recent_sums(table, max_weeks), recent_sums(cell, max_weeks)
    n, n_k = order.shape
    best = np.zeros((n, n_k))
    best_h = np.zeros((n, n_k), dtype=np.min_scalar_type(max_weeks - 1))
    step = max(1, CHUNK_BYTES // (8 * n_k))
    for a in range(0, n, step):  # centres a chunk at a time: a few chunks, not a loop over units
        part = slice(a, a + step)
        for h in range(max_weeks):
            llr = height_cylinders(recent_obs, recent_mu, order[part], valid[part], total, h)[2]
            up = llr > best[part]  # strictly: a tie keeps the shorter height
            best[part][up] = llr[up]
            best_h[part][up] = h
    return order, valid, best, best_h


def cylinder_at(recent: np.ndarray, order: np.ndarray, h: int, i: int, k: int) -> float:
    """Cases (or expectation) of cylinder ``(h, i, k)`` from (H, n) :func:`recent_sums`.

    Summed in the order :func:`cylinder_counts` sums, so the value is the same to the bit.
    """
    return float(np.cumsum(recent[h, order[i, : k + 1]])[-1])
