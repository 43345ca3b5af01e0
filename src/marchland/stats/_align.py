"""Aligning a per-unit Series to the units an analysis runs on (shared by rates and hotspots).

One check, one message: every statistic that takes values per ``unit_id`` refuses a Series
that is not one, lists a unit twice, or does not cover exactly the expected units.
"""

from __future__ import annotations

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
