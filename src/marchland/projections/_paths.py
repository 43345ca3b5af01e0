"""Simulated count paths held compactly: one sparse unit x path matrix per simulated week.

A forecast keeps its paths so that any grouping of units can be summed later (intervals of a
sum come from summed paths). Held dense as int32 they are horizon x units x paths x 4 bytes:
0.8 GB at 50,000 units, 4 weeks and 1,000 paths, most of them zeros (89 % in the 10,000-unit
world). Each week is kept as a CSR matrix with the narrowest unsigned integer type that holds
its largest count (uint8 or uint16, int32 beyond), or as a dense array of that type when that
is smaller (an outbreak with cases nearly everywhere). The counts are integers, so every sum
and summary made from the store is the one made from the dense int32 array.

Written here because scipy.sparse has no 3-d array; each week is a scipy sparse matrix.
"""

from __future__ import annotations

from collections.abc import Iterable

import numpy as np
from scipy import sparse


def narrow_dtype(top: int) -> np.dtype:
    """Narrowest of uint8, uint16 and int32 that holds 0 ... ``top`` (``top`` < 2**31)."""
    for dt in (np.uint8, np.uint16):
        if top <= np.iinfo(dt).max:
            return np.dtype(dt)
    if top > np.iinfo(np.int32).max:
        raise OverflowError(f"a simulated count of {top} does not fit in int32")
    return np.dtype(np.int32)


class PathStore:
    """Simulated counts of shape (steps, units, paths), one compact matrix per step.

    Read it with :meth:`units` (a dense int32 block of units), :meth:`group_sums` (sums over
    groups of units, per step and path) or :meth:`toarray` (everything, dense int32).

    Examples
    --------
    >>> p = np.array([[[0, 0, 3], [0, 1, 0]], [[0, 300, 0], [0, 0, 0]]], dtype=np.int32)
    >>> s = PathStore.from_blocks([(0, 2, p[:, :, :2]), (2, 3, p[:, :, 2:])], n_paths=3)
    >>> bool((s.toarray() == p).all()), s.units(1, 2)[:, 0].tolist()
    (True, [[0, 1, 0], [0, 0, 0]])
    """

    def __init__(self, steps: list, n_units: int, n_paths: int):
        self._steps = steps
        self.shape = (len(steps), n_units, n_paths)
        self.dtype = np.dtype(np.int32)

    @classmethod
    def from_blocks(
        cls, blocks: Iterable[tuple[int, int, np.ndarray]], *, n_paths: int
    ) -> PathStore:
        """Build from ``(lo, hi, counts)`` blocks of consecutive paths, ``counts`` (steps, n, b).

        Each block is compressed as it comes, so the dense paths are never all held.
        """
        cols: list[list[sparse.csc_array]] = []
        n = 0
        for lo, _hi, b in blocks:
            if not cols:
                cols = [[] for _ in range(b.shape[0])]
            if len(cols[0]) and sum(c.shape[1] for c in cols[0]) != lo:
                raise ValueError("path blocks must come in order, without gaps")
            n = b.shape[1]
            for s in range(b.shape[0]):
                part = sparse.csc_array(b[s])
                # Narrowed as it comes (hstack widens to the largest type of the parts): the
                # parts of every step are held until the last block, 0.2 GB as int32 at 50,000
                # units x 1,000 paths.
                if part.data.min(initial=0) >= 0:  # negatives are left for _compact to refuse
                    part.data = part.data.astype(narrow_dtype(int(part.data.max(initial=0))))
                cols[s].append(part)
            del b
        steps = []
        for parts in cols:
            m = sparse.hstack(parts, format="csc")
            parts.clear()
            if m.shape[1] != n_paths:
                raise ValueError(f"the blocks hold {m.shape[1]} paths, not {n_paths}")
            steps.append(_compact(m.tocsr()))
            del m
        return cls(steps, n, n_paths)

    @property
    def nbytes(self) -> int:
        """Bytes held by the counts and their indices."""
        return sum(
            m.nbytes
            if isinstance(m, np.ndarray)
            else m.data.nbytes + m.indices.nbytes + m.indptr.nbytes
            for m in self._steps
        )

    def units(self, start: int, stop: int) -> np.ndarray:
        """Dense int32 counts (steps, stop - start, paths) of units ``start`` to ``stop``."""
        out = np.empty(
            (self.shape[0], max(0, min(stop, self.shape[1]) - start), self.shape[2]), dtype=np.int32
        )
        for s, m in enumerate(self._steps):
            part = m[start:stop]
            out[s] = part if isinstance(part, np.ndarray) else part.toarray()
        return out

    def cells(self, step: np.ndarray, unit: np.ndarray) -> np.ndarray:
        """Int32 counts (len(step), paths) of (step, unit) pairs, ``toarray()[step, unit]``."""
        out = np.empty((len(step), self.shape[2]), dtype=np.int32)
        for s in np.unique(step):  # a few weeks
            sel = np.flatnonzero(step == s)
            part = self._steps[s][unit[sel]]
            out[sel] = part if isinstance(part, np.ndarray) else part.toarray()
        return out

    def group_sums(self, g: sparse.csr_matrix) -> np.ndarray:
        """``g @ paths[s]`` for every step: (steps, groups, paths) float64.

        ``g`` (groups x units) holds the weights; with whole-number weights the sums are the
        exact sums of the int32 paths whatever the order of addition.
        """
        out = np.empty((self.shape[0], g.shape[0], self.shape[2]))
        for s, m in enumerate(self._steps):
            prod = g @ m
            out[s] = prod if isinstance(prod, np.ndarray) else prod.toarray()
        return out

    def toarray(self) -> np.ndarray:
        """All counts, dense int32 (steps, units, paths)."""
        return self.units(0, self.shape[1])

    def __getstate__(self):
        return {"steps": self._steps, "shape": self.shape}

    def __setstate__(self, state):
        self._steps = state["steps"]
        self.shape = state["shape"]
        self.dtype = np.dtype(np.int32)


def _compact(m: sparse.csr_array):
    """Return the step as CSR of the narrowest type, or dense of that type when smaller."""
    top = int(m.data.max()) if m.nnz else 0
    if m.nnz and int(m.data.min()) < 0:
        raise ValueError("simulated counts must not be negative")
    dt = narrow_dtype(top)
    dense_bytes = m.shape[0] * m.shape[1] * dt.itemsize
    small = m.nnz < np.iinfo(np.int32).max and max(m.shape) < np.iinfo(np.int32).max
    index = np.dtype(np.int32 if small else np.int64)
    sparse_bytes = m.nnz * (dt.itemsize + index.itemsize) + (m.shape[0] + 1) * index.itemsize
    if dense_bytes <= sparse_bytes:
        return m.toarray().astype(dt)
    m.data = m.data.astype(dt)
    if m.indices.dtype != index:
        m.indices = m.indices.astype(index)
        m.indptr = m.indptr.astype(index)
    return m
