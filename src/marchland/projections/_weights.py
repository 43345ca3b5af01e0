"""Power-law neighbourhood weights over graph order (Meyer & Held 2014).

Written here rather than taken from a library: no Python package we build on fits the
endemic-epidemic model, so the weights, their derivative in the decay ``d`` and the sparse
order matrix they rest on are ours. The order matrix comes from
:meth:`marchland.graph.BorderGraph.hop_pairs` (the pairs of ``higher_order``), so the graph's
own hop distances are used.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
import pandas as pd
from scipy import sparse


@dataclass(frozen=True)
class OrderMatrix:
    """Sparse graph orders ``o_ji`` (1..max_order) between units, in the model's unit order."""

    sender: np.ndarray  # j, position of the unit passing cases on
    receiver: np.ndarray  # i
    log_order: np.ndarray
    n: int

    @classmethod
    def from_graph(cls, border_graph, ids, max_order: int) -> OrderMatrix:
        """Orders between ``ids`` up to ``max_order`` steps, from a ``BorderGraph``."""
        if len(border_graph.edges) == 0:
            z = np.zeros(0, dtype=np.int64)
            return cls(z, z, np.zeros(0), len(ids))
        # Positions, not the unit ids of higher_order's edge table (about 1 GB at 50,000 units).
        focal, neighbor, steps = border_graph.hop_pairs(max_order, lower_order=True)
        pos = pd.Index(ids).get_indexer(border_graph.ids)  # graph position -> position in ids
        j, i = pos[focal], pos[neighbor]
        keep = (j >= 0) & (i >= 0)
        o = steps[keep].astype(float)
        return cls(j[keep].astype(np.int64), i[keep].astype(np.int64), np.log(o), len(ids))

    def __getstate__(self) -> dict:
        """Pickle without the last weights built (a worker builds its own)."""
        state = self.__dict__.copy()
        state.pop("_last", None)
        return state

    @property
    def empty(self) -> bool:
        """True when no unit has a neighbour."""
        return len(self.sender) == 0

    @cached_property
    def _csr(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Row-major order of the (receiver, sender) pairs and what the weights need in it.

        The sparsity pattern does not change with ``d``: sorting it once here spares the
        optimiser a sort per likelihood evaluation (the pairs are unique, one order each).
        Returns the CSR column indices (senders) and row pointers, and the pairs' order levels
        as codes into ``_levels``, in pair order and in CSR order. Indices are int32 and codes
        int8 when they fit (held for the whole fit: 160 MB in int64 at 50,000 units).
        """
        perm = np.lexsort((self.sender, self.receiver))
        small = max(self.n, len(self.sender)) < np.iinfo(np.int32).max
        index = np.int32 if small else np.int64
        indptr = np.zeros(self.n + 1, dtype=index)
        np.cumsum(np.bincount(self.receiver, minlength=self.n), out=indptr[1:])
        code = np.searchsorted(self._levels, self.log_order)  # np.unique's inverse, no sort
        code = code.astype(np.int8 if len(self._levels) < 127 else np.intp)
        return self.sender[perm].astype(index), indptr, code, code[perm]

    @cached_property
    def _levels(self) -> np.ndarray:
        """The distinct log orders (a handful: one per graph step up to ``max_order``)."""
        return np.unique(self.log_order)

    @cached_property
    def _level_counts(self) -> np.ndarray:
        """(n, levels) how many units each sender reaches at each order level.

        A sender's sum of ``o^-d`` over its neighbours is ``sum_k c_jk o_k^-d`` with ``c_jk``
        its count of neighbours at order ``o_k``: five terms per sender at each likelihood
        evaluation instead of one per pair (about a million at 10,000 units).
        """
        _, _, code, _ = self._csr
        k = len(self._levels)
        flat = np.bincount(self.sender * k + code, minlength=self.n * k)
        return flat.reshape(self.n, k).astype(float)

    def _matrix(self, values: np.ndarray):
        """CSR matrix of ``values`` given in CSR order (no per-call index checks or sort)."""
        indices, indptr, _, _ = self._csr
        m = sparse.csr_matrix((self.n, self.n), dtype=float)
        m.data, m.indices, m.indptr = values, indices, indptr
        m.has_sorted_indices = True
        return m

    def weights(self, d: float, *, derivative: bool = False):
        """Transposed weights ``W^T`` (receiver x sender) and, optionally, ``dW^T/dd``.

        ``w_ji = o_ji^-d / sum_k o_jk^-d``: what sender ``j`` passes on sums to one over its
        neighbours within ``max_order`` steps.
        """
        # The numerical Hessian moves one parameter at a time: a third of the optimiser's
        # calls ask for the decay of the call before (same numbers, built once).
        last = self.__dict__.get("_last")
        if last is not None and last[0] == d and (last[1] or not derivative):
            return last[2] if derivative else last[2][0]
        out = self._weights(d, derivative)
        self.__dict__["_last"] = (d, derivative, out if derivative else (out, None))
        return out

    def sender_sums(self, d: float) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Power ``o^-d`` per order level, each sender's sum of them and its mean log order.

        ``s_j = sum_k o_jk^-d`` and ``m_j = sum_k w_jk log o_jk``: the normaliser of the weights
        and what their derivative in ``d`` needs (``dw_ji/dd = w_ji (m_j - log o_ji)``).
        """
        levels = np.exp(-d * self._levels)
        counts = self._level_counts
        s = np.einsum("nk,k->n", counts, levels)  # einsum, not BLAS: see Problem.mean
        log_sum = np.einsum("nk,k->n", counts, levels * self._levels)
        mean_log = np.divide(log_sum, s, out=np.zeros(self.n), where=s > 0)
        return levels, s, mean_log

    def _weights(self, d: float, derivative: bool):
        indices, _, _, code_csr = self._csr
        levels, s, mean_log = self.sender_sums(d)
        # In place: one array per matrix, not three (each is 40 MB at 50,000 units).
        w = levels[code_csr]
        w /= s[indices]
        wt = self._matrix(w)
        if not derivative:
            return wt
        dw = mean_log[indices]
        dw -= self._levels[code_csr]
        dw *= w
        return wt, self._matrix(dw)

    def cell_sums(self, x: np.ndarray, ui: np.ndarray, ti: np.ndarray) -> CellSums:
        """Neighbour sums ``sum_j w_ji(d) x_jt`` at the cells ``(ui, ti)`` of ``x`` (n, T)."""
        return CellSums.build(self, x, ui, ti)


#: The sparse form of :class:`CellSums` is kept while its contributions are at most this share
#: of the dense product's (pairs x weeks); beyond, the weights are multiplied with ``x``.
SPARSE_SHARE = 0.25
#: Pairs listed at a time by :meth:`CellSums.build` (bounds its temporaries: 8 MB each).
CELL_BLOCK = 1_000_000


@dataclass(frozen=True, eq=False)
class CellSums:
    """``sum_j w_ji(d) x_jt`` and its derivative in ``d`` at fixed cells ``(i, t)`` of fixed ``x``.

    The likelihood needs the neighbour sums of the lagged counts at every observed unit-week,
    for a new decay ``d`` at each evaluation. Most lagged counts are 0 (93 % in the 10,000-unit
    world), so rather than multiplying the whole weight matrix with ``x`` every time, the
    products ``x_jt`` reaching each cell are listed once in a sparse matrix ``M`` (cells x
    (sender, order level)); an evaluation multiplies it with the weights per sender and order
    level, ``o_k^-d / s_j`` and their derivative (two columns, one product). Each cell adds the
    same products in the same order (senders ascending) as the row of ``W^T x``, so the sums
    are the same numbers to the last bit. When ``M`` would
    hold more than ``SPARSE_SHARE`` of the dense product's terms (pairs x weeks), the dense
    product ``W^T x`` is used instead (``contrib`` is then ``None``).
    """

    orders: OrderMatrix
    x: np.ndarray
    ui: np.ndarray
    ti: np.ndarray
    contrib: sparse.csr_matrix | None  # (cells, n x levels) x_jt of sender j at level k

    @classmethod
    def build(cls, orders: OrderMatrix, x, ui, ti) -> CellSums:
        """List the non-zero contributions, or choose the dense product if they are many."""
        n, t = x.shape
        jj, tt = np.nonzero(x)
        deg = np.bincount(orders.sender, minlength=n)
        reps = deg[jj]
        total = int(reps.sum())
        if total > SPARSE_SHARE * len(orders.sender) * t:
            return cls(orders, x, ui, ti, None)
        # Every pair (j -> i) of each non-zero x_jt, as the cell (i, t) it adds to, listed for
        # a block of x_jt at a time (about CELL_BLOCK pairs): each temporary of the listing is
        # one number per pair (4 million at 50,000 units, 0.4 GB together unblocked).
        by_sender = np.argsort(orders.sender, kind="stable")
        first = np.concatenate([[0], np.cumsum(deg)[:-1]])
        cell_of = np.full((n, t), -1, dtype=np.int64)
        cell_of[ui, ti] = np.arange(len(ui))
        _, _, code, _ = orders._csr
        k = len(orders._levels)
        xv = x[jj, tt]
        cuts = np.searchsorted(np.cumsum(reps), np.arange(CELL_BLOCK, total, CELL_BLOCK))
        bounds = np.concatenate([[0], cuts, [len(jj)]])  # an empty block is harmless
        cells, cols, vals = [], [], []
        for a, b in zip(bounds[:-1], bounds[1:], strict=True):
            r = reps[a:b]
            entry = np.repeat(np.arange(a, b), r)
            within = np.arange(len(entry)) - np.repeat(np.cumsum(r) - r, r)
            pair = by_sender[first[jj[entry]] + within]
            del within
            cell = cell_of[orders.receiver[pair], tt[entry]]
            keep = cell >= 0
            pair = pair[keep]
            cells.append(cell[keep].astype(np.int32 if len(ui) < 2**31 else np.int64))
            cols.append(orders.sender[pair] * k + code[pair])
            vals.append(xv[entry[keep]])
        del by_sender, cell_of
        cell, col, val = (np.concatenate(v) for v in (cells, cols, vals))
        del cells, cols, vals
        contrib = sparse.csr_matrix((val, (cell, col)), shape=(len(ui), n * k))
        return cls(orders, x, ui, ti, contrib)

    def __call__(self, d: float) -> tuple[np.ndarray, np.ndarray]:
        """Neighbour sums at the cells and their derivative in ``d`` (the last ``d`` cached)."""
        last = self.__dict__.get("_last")
        if last is not None and last[0] == d:
            return last[1]
        if self.contrib is None:
            wt, dwt = self.orders.weights(d, derivative=True)
            out = (wt @ self.x)[self.ui, self.ti], (dwt @ self.x)[self.ui, self.ti]
        else:
            levels, s, mean_log = self.orders.sender_sums(d)
            # w_ji = o_k^-d / s_j and dw_ji/dd = w_ji (m_j - log o_k), per sender and level.
            w = np.divide(
                levels, s[:, None], out=np.zeros((len(s), len(levels))), where=s[:, None] > 0
            )
            dw = w * (mean_log[:, None] - self.orders._levels)
            both = self.contrib @ np.column_stack([w.ravel(), dw.ravel()])
            out = both[:, 0], both[:, 1]
        self.__dict__["_last"] = (d, out)
        return out
