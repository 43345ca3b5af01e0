"""Whether a counts table is already in as-of order (private to ``reports.as_of``).

The reader hands out versions sorted by (unit_id, week, received). On such a table the as-of
view is a mask of run ends, found by comparing neighbouring rows: no sort, and no hash of
millions of text ids (at 50,000 units that factorisation was most of the view's memory).
"""

from __future__ import annotations

import numpy as np
import pandas as pd


def _id_steps(ids: pd.Series) -> tuple[np.ndarray, np.ndarray] | None:
    """Per neighbouring pair of ids: (same, later), compared as the sort compares them.

    Category order for categorical ids, else as text (Arrow-backed text by its bytes, which
    orders as Python's code points do). ``None`` where ids are missing or of mixed types.
    """
    dtype = ids.dtype
    if isinstance(dtype, pd.CategoricalDtype):
        u = ids.cat.codes.to_numpy()
        if (u < 0).any():
            return None
        return u[1:] == u[:-1], u[1:] > u[:-1]
    if getattr(dtype, "storage", None) == "pyarrow" or isinstance(dtype, pd.ArrowDtype):
        import pyarrow as pa
        import pyarrow.compute as pc

        a = pa.array(ids.array)  # the column's own Arrow data, not a copy
        if a.null_count:
            return None
        try:
            same = pc.equal(a[1:], a[:-1]).to_numpy(zero_copy_only=False)
            later = pc.greater(a[1:], a[:-1]).to_numpy(zero_copy_only=False)
        except pa.ArrowNotImplementedError:
            return None
        return same, later
    u = ids.to_numpy(dtype=object)
    if pd.isna(u).any():
        return None
    try:
        return u[1:] == u[:-1], u[1:] > u[:-1]
    except TypeError:  # ids of mixed types
        return None


def _times(frame: pd.DataFrame, column: str) -> np.ndarray | None:
    t = frame[column].to_numpy("datetime64[ns]")
    return None if np.isnat(t).any() else t


def latest_rows(frame: pd.DataFrame, date: pd.Timestamp | None) -> np.ndarray | None:
    """Rows of the as-of view on ``date`` if ``frame`` is sorted by (unit_id, week, received).

    Per (unit_id, week) the last row received by ``date`` (``None``: the last row), as the
    stable sort and ``drop_duplicates(keep="last")`` of ``reports.as_of`` would pick it. A
    frame in any other order (or with missing keys) answers ``None``: the caller sorts.
    """
    if len(frame) < 2:
        return None
    steps = _id_steps(frame["unit_id"])
    w = _times(frame, "week")
    r = _times(frame, "received")
    if steps is None or w is None or r is None:
        return None
    same_id, later_id = steps
    same_week = same_id & (w[1:] == w[:-1])
    in_order = later_id | (same_id & (w[1:] > w[:-1])) | (same_week & (r[1:] >= r[:-1]))
    if not in_order.all():
        return None
    return _run_ends(same_week, r, date)


def _run_ends(same_week: np.ndarray, r: np.ndarray, date: pd.Timestamp | None) -> np.ndarray:
    """Mask of each (unit, week) run's last row received by ``date``, runs in received order.

    Within a run received dates never fall, so the rows known by date are the run's first
    ones: keep a known row whose successor is another unit-week or not known.
    """
    known = np.ones(len(r), dtype=bool) if date is None else r <= date.to_datetime64()
    last = np.append(~same_week, True)
    return known & (last | ~np.append(known[1:], False))


def _blocks(frame: pd.DataFrame) -> tuple[np.ndarray, np.ndarray, np.ndarray] | None:
    """(codes, same unit as the row before, same week too) when categorical ids come in blocks.

    Each unit's rows one block, in (week, received) order within it; ``None`` otherwise.
    """
    ids = frame["unit_id"]
    if len(frame) < 2 or not isinstance(ids.dtype, pd.CategoricalDtype):
        return None
    u = ids.cat.codes.to_numpy()
    w = _times(frame, "week")
    r = _times(frame, "received")
    if (u < 0).any() or w is None or r is None:
        return None
    same = u[1:] == u[:-1]
    starts = np.flatnonzero(np.append(True, ~same))
    if len(np.unique(u[starts])) != len(starts):  # a unit in two blocks
        return None
    same_week = same & (w[1:] == w[:-1])
    if not (~same | (w[1:] > w[:-1]) | (same_week & (r[1:] >= r[:-1]))).all():
        return None
    return u, same_week, r


def grouped_order(frame: pd.DataFrame) -> np.ndarray | None:
    """Return the stable sort by (unit_id, week, received) of units that come in blocks.

    Categorical ids sort by category order, which need not be the order the reader wrote the
    units in (the border-risk model's ids are categories of the graph's ids, in its order).
    When each unit's rows are one block, in (week, received) order within it, that sort only
    moves whole blocks: it is the stable argsort of the category codes, with no sort of weeks
    or dates (the multi-column sort held about 0.6 GB at 50,000 units). ``None`` when the ids
    are not categorical or the rows are not in such blocks: the caller sorts.
    """
    b = _blocks(frame)
    return None if b is None else np.argsort(b[0], kind="stable")


def grouped_latest(frame: pd.DataFrame, date: pd.Timestamp | None) -> np.ndarray | None:
    """Return the positions of the as-of view on ``date`` in sorted order, units in blocks.

    What ``frame.iloc[grouped_order(frame)]`` then :func:`latest_rows` would give (as
    positions in ``frame``), without copying the frame: runs never cross a block, so each
    row's place in its run is the same in both orders. ``None`` as for :func:`grouped_order`.
    """
    b = _blocks(frame)
    if b is None:
        return None
    u, same_week, r = b
    keep = np.flatnonzero(_run_ends(same_week, r, date))
    return keep[np.argsort(u[keep], kind="stable")]
