"""Whether a counts table is already an as-of view (private to ``reports.as_of``)."""

from __future__ import annotations

import numpy as np
import pandas as pd


def one_row_per_unit_week(frame: pd.DataFrame) -> bool:
    """Whether rows are strictly increasing in (unit_id, week): sorting would change nothing.

    Ids compare as the sort compares them: category order for categorical ids, else as text.
    Anything else (missing values, mixed types) answers False and takes the sort.
    """
    if len(frame) < 2:
        return False
    ids = frame["unit_id"]
    if isinstance(ids.dtype, pd.CategoricalDtype):
        u = ids.cat.codes.to_numpy()
        if (u < 0).any():
            return False
    else:
        u = ids.to_numpy(dtype=object)
        if pd.isna(u).any():
            return False
    w = frame["week"].to_numpy("datetime64[ns]")
    if np.isnat(w).any():
        return False
    try:
        later = (u[1:] > u[:-1]) | ((u[1:] == u[:-1]) & (w[1:] > w[:-1]))
    except TypeError:  # ids of mixed types
        return False
    return bool(np.all(later))
