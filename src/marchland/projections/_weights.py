"""Power-law neighbourhood weights over graph order (Meyer & Held 2014).

Written here rather than taken from a library: no Python package we build on fits the
endemic-epidemic model, so the weights, their derivative in the decay ``d`` and the sparse
order matrix they rest on are ours. The order matrix comes from
:meth:`marchland.graph.BorderGraph.higher_order`, so the graph's own hop distances are used.
"""

from __future__ import annotations

from dataclasses import dataclass
from functools import cached_property

import numpy as np
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
        e = border_graph.higher_order(max_order, lower_order=True).edges
        j = ids.get_indexer(e["focal"])
        i = ids.get_indexer(e["neighbor"])
        keep = (j >= 0) & (i >= 0)
        o = e["order"].to_numpy(dtype=float)[keep]
        return cls(j[keep].astype(np.int64), i[keep].astype(np.int64), np.log(o), len(ids))

    @property
    def empty(self) -> bool:
        """True when no unit has a neighbour."""
        return len(self.sender) == 0

    @cached_property
    def _csr(self) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
        """Row-major order of the (receiver, sender) pairs, CSR column indices and row pointers.

        The sparsity pattern does not change with ``d``: sorting it once here spares the
        optimiser a sort per likelihood evaluation (the pairs are unique, one order each).
        """
        perm = np.lexsort((self.sender, self.receiver))
        indptr = np.concatenate([[0], np.cumsum(np.bincount(self.receiver, minlength=self.n))])
        return perm, self.sender[perm], indptr

    def _matrix(self, values: np.ndarray):
        perm, indices, indptr = self._csr
        m = sparse.csr_matrix((values[perm], indices, indptr), shape=(self.n, self.n))
        m.has_sorted_indices = True
        return m

    def weights(self, d: float, *, derivative: bool = False):
        """Transposed weights ``W^T`` (receiver x sender) and, optionally, ``dW^T/dd``.

        ``w_ji = o_ji^-d / sum_k o_jk^-d``: what sender ``j`` passes on sums to one over its
        neighbours within ``max_order`` steps.
        """
        n = self.n
        u = np.exp(-d * self.log_order)
        s = np.bincount(self.sender, weights=u, minlength=n)
        w = u / s[self.sender]
        wt = self._matrix(w)
        if not derivative:
            return wt
        mean_log = np.bincount(self.sender, weights=w * self.log_order, minlength=n)
        dw = w * (mean_log[self.sender] - self.log_order)
        dwt = self._matrix(dw)
        return wt, dwt
