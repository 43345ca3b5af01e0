"""Which group each unit belongs to, and the input checks shared by the stage."""

from __future__ import annotations

import numpy as np
import pandas as pd

from ..errors import InputError

BY = ("region", "country", "province", "unit")
METHODS = ("negbin", "chain-ladder")
KEY = {"region": "region", "country": "country", "province": "province", "unit": "unit_id"}
NEEDED = ("unit_id", "week", "cases", "received")


def check_args(
    counts: pd.DataFrame, as_of: object, by: str, method: str, max_delay: int, conf: float
) -> pd.Timestamp:
    """Check arguments; return ``as_of`` as a Timestamp."""
    if by not in BY:
        raise ValueError(f"'by' needs to be one of {BY}. {by!r} was given instead.")
    if method not in METHODS:
        raise ValueError(f"'method' needs to be one of {METHODS}. {method!r} was given instead.")
    if not isinstance(max_delay, (int, np.integer)) or max_delay < 1:
        raise ValueError(f"'max_delay_weeks' must be a whole number >= 1; got {max_delay!r}.")
    if not 0 < conf < 1:
        raise ValueError(f"'conf' must lie strictly between 0 and 1; got {conf!r}.")
    missing = [c for c in NEEDED if c not in counts]
    if missing:
        raise InputError(f"counts lack the column(s) {missing}; expected {list(NEEDED)}")
    try:
        stamp = pd.Timestamp(as_of)
    except (TypeError, ValueError) as err:
        raise ValueError(f"'as_of' must be a date; got {as_of!r}.") from err
    if stamp is pd.NaT or pd.isna(stamp):
        raise ValueError("'as_of' must be a date; got a missing value.")
    if len(counts) == 0:
        raise InputError("counts are empty: there is nothing to nowcast", column="received")
    first = counts["received"].min()
    if stamp < first:
        raise InputError(
            f"as_of {stamp.date()} is before the first report was received ({first.date()}); "
            "nothing was known then",
            column="received",
            value=str(stamp.date()),
        )
    return stamp


def country_of(ids: pd.Index, units: pd.DataFrame | None) -> np.ndarray:
    """Country code of each unit id: ``units.country`` if given, else the id's prefix."""
    if units is not None and "country" in units:
        known = pd.Series(units["country"]).reindex(ids).to_numpy(dtype=object)
        missing = pd.isna(known)
        if not missing.any():  # the prefixes are only needed for units not in ``units``
            return known
    prefix = ids.str.split("-").str[0].to_numpy(dtype=object)
    if units is None or "country" not in units:
        return prefix
    return np.where(missing, prefix, known)


def province_of(ids: pd.Index, units: pd.DataFrame | None) -> np.ndarray:
    """Province of each unit: itself at level 1, its parent at level 2 (``units``), else id."""
    codes, uniq = pd.factorize(ids)
    if len(uniq) < len(ids) and not (codes < 0).any():
        # A long panel repeats every id once per week: work out each id once.
        return _province_of(pd.Index(uniq), units)[codes]
    return _province_of(ids, units)


def _province_of(ids: pd.Index, units: pd.DataFrame | None) -> np.ndarray:
    if units is None or "parent_id" not in units or "level" not in units:
        return _id_province(ids)
    level = pd.Series(units["level"]).reindex(ids).to_numpy()
    parent = pd.Series(units["parent_id"]).reindex(ids).to_numpy(dtype=object)
    own = np.asarray(ids, dtype=object)
    out = np.where(level == 1, own, parent)
    missing = pd.isna(out) | pd.isna(level)
    if not missing.any():  # the id-based guess is only needed for units not in ``units``
        return out
    return np.where(missing, _id_province(ids), out)


def _id_province(ids: pd.Index) -> np.ndarray:
    """Return the province part of ids shaped ``CCC-PP-DD`` (their first two parts)."""
    return ids.str.split("-").str[:2].str.join("-").to_numpy(dtype=object)


def group_of(ids: pd.Index, by: str, units: pd.DataFrame | None) -> np.ndarray:
    """Group label of each unit for ``by``."""
    if by == "unit":
        return np.asarray(ids, dtype=object)
    if by == "province":
        return province_of(ids, units)
    return country_of(ids, units)
