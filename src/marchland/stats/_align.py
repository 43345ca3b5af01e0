"""Aligning a per-unit Series to the units an analysis runs on (shared by rates and hotspots).

One check, one message: every statistic that takes values per ``unit_id`` refuses a Series
that is not one, lists a unit twice, or does not cover exactly the expected units. One lookup:
:func:`unit_positions` places the unit ids of millions of rows on the units.
"""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import InputError


def align_units(values: pd.Series, index: pd.Index, name: str, other: str) -> pd.Series:
    """``values`` reordered to ``index``; every unit must be in both.

    Examples
    --------
    >>> align_units(pd.Series({"b": 2, "a": 1}), pd.Index(["a", "b"]), "cases", "the graph")
    a    1
    b    2
    dtype: int64
    """
    if not isinstance(values, pd.Series):
        raise TypeError(
            f"'{name}' needs to be a pandas Series indexed by unit_id. "
            f"{type(values).__name__} was given instead."
        )
    if not values.index.is_unique:
        dup = values.index[values.index.duplicated()][0]
        raise InputError(f"{name} lists unit {dup!r} more than once", column=name, value=dup)
    missing = index.difference(values.index)
    extra = values.index.difference(index)
    if len(missing) or len(extra):
        parts = []
        if len(missing):
            parts.append(
                f"{len(missing)} unit(s) of {other} missing from {name}, e.g. {list(missing[:3])}"
            )
        if len(extra):
            parts.append(f"{len(extra)} unit(s) of {name} not in {other}, e.g. {list(extra[:3])}")
        raise InputError(
            f"{name} and {other} must have the same unit_ids: " + "; ".join(parts), column=name
        )
    return values.reindex(index)


def unit_positions(ids: pd.Series, units: pd.Index) -> np.ndarray:
    """Position in ``units`` of each row's id (-1 where the id is not a unit).

    ``units.get_indexer(ids)``, but Arrow-backed text ids are looked up in Arrow: the index
    get_indexer builds a Python string per row first (at 50,000 units and 4 million rows
    of counts, some 300 MB for a moment).

    Examples
    --------
    >>> unit_positions(pd.Series(["b", "z", "a"], dtype="str"), pd.Index(["a", "b"])).tolist()
    [1, -1, 0]
    """
    dtype = ids.dtype
    if not units.is_unique or not (
        getattr(dtype, "storage", None) == "pyarrow" or isinstance(dtype, pd.ArrowDtype)
    ):
        return units.get_indexer(ids)
    import pyarrow as pa
    import pyarrow.compute as pc

    values = pa.array(ids.array)  # the column's own Arrow data, not a copy
    try:
        keys = pa.array(units.to_numpy(dtype=object), type=values.type)
    except (pa.ArrowInvalid, pa.ArrowTypeError):  # ids of another type: nothing matches
        return units.get_indexer(ids)
    pos = pc.index_in(values, value_set=keys).fill_null(-1)
    return pos.to_numpy(zero_copy_only=False).astype(np.intp, copy=False)
