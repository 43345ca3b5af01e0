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
    def _csr(self) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
        """Row-major order of the (receiver, sender) pairs and what the weights need in it.

        The sparsity pattern does not change with ``d``: sorting it once here spares the
        optimiser a sort per likelihood evaluation (the pairs are unique, one order each).
        Returns the permutation, the CSR column indices (senders) and row pointers, and the
        pairs' order levels as codes into ``_levels``, in pair order and in CSR order.
        """
        perm = np.lexsort((self.sender, self.receiver))
        indptr = np.concatenate([[0], np.cumsum(np.bincount(self.receiver, minlength=self.n))])
        code = np.unique(self.log_order, return_inverse=True)[1].astype(np.intp)
        return perm, self.sender[perm], indptr, code, code[perm]

    @cached_property
    def _levels(self) -> np.ndarray:
        """The distinct log orders (a handful: one per graph step up to ``max_order``)."""
        return np.unique(self.log_order)

    def _matrix(self, values: np.ndarray):
        """CSR matrix of ``values`` given in CSR order (no per-call index checks or sort)."""
        _, indices, indptr, _, _ = self._csr
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

    def _weights(self, d: float, derivative: bool):
        n = self.n
        perm, indices, _, code, code_csr = self._csr
        # o^-d for each distinct order, looked up per pair: the same numbers as exp over every
        # pair (one exp per order, not one per pair); sums stay in pair order.
        levels = np.exp(-d * self._levels)
        u = levels[code]
        s = np.bincount(self.sender, weights=u, minlength=n)
        wt = self._matrix(levels[code_csr] / s[indices])
        if not derivative:
            return wt
        w = u / s[self.sender]
        mean_log = np.bincount(self.sender, weights=w * self.log_order, minlength=n)
        lo = self._levels[code_csr]
        dwt = self._matrix(wt.data * (mean_log[indices] - lo))
        return wt, dwt
