"""The nowcast as arrays: groups, their delay patterns (own or their country's) and estimates."""

from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..errors import DataWarning
from ._calendar import MONTH_END_SPAN, choose, month_end
from ._groups import country_of, group_of
from ._pattern import calibrate, nb_bounds, point
from ._triangle import group_sums, unit_cells

# A province or unit uses its own delay pattern only with this many cases in the weeks the
# pattern is estimated from (common practice: below ~100 events chain-ladder factors are noisy)
# and at least max_delay_weeks weeks that have reached the last delay.
MIN_OWN_CASES = 100


@dataclass(frozen=True)
class Estimate:
    """Arrays for one nowcast: groups x weeks."""

    groups: np.ndarray
    country: np.ndarray  # country of each group
    weeks: pd.DatetimeIndex
    age: np.ndarray
    first: np.ndarray  # (G,) first week position each group reported
    reported: np.ndarray  # (G, T) known on as_of
    n_units: np.ndarray
    R: np.ndarray  # (G, T) value at the week's current delay
    N: np.ndarray  # (G, T) point estimate (NaN: not estimable)
    phi: np.ndarray  # (G, T) NB size of the remainder
    fallback: np.ndarray  # (G,) True: as reported (no usable delay history)
    pattern: np.ndarray  # (G,) whose delay pattern was used
    C: np.ndarray  # (G, T, D+1) the group triangle
    unit_group: np.ndarray  # (U,) group position of each unit in cells.units


def _pattern(C, age, n_d, window, n_past, method, me):
    """Factors for other and month-end weeks (see ``_calendar``) and the NB sizes (G, D)."""
    F_of, _ = choose(C, age, window, n_past, me)
    F_other, F_end, _ = F_of(0)
    if method == "negbin":
        phi, _ = calibrate(C, age, window, n_past, F_of=F_of)
    else:
        phi = np.full((C.shape[0], n_d), np.nan)
    return F_other, F_end, phi


def _trim(C: np.ndarray, age: np.ndarray, keep: int) -> tuple[np.ndarray, np.ndarray]:
    """Only the recent weeks matter to the patterns; older weeks are dropped for speed."""
    sel = age < keep
    return C[:, sel], age[sel]


def estimate(
    counts: pd.DataFrame,
    as_of: pd.Timestamp,
    by: str,
    method: str,
    max_delay: int,
    units: pd.DataFrame | None,
    window: int,
    n_past: int,
    warn: bool = True,
) -> Estimate:
    """Group triangles, their patterns and the nowcast arrays (see ``nowcast``)."""
    n_d = max_delay
    cells = unit_cells(counts, as_of, n_d)
    ids = cells.units
    unit_country = country_of(ids, units)
    countries, ci = np.unique(unit_country.astype(str), return_inverse=True)
    labels = group_of(ids, "country" if by == "region" else by, units).astype(str)
    groups, gi = np.unique(labels, return_inverse=True)
    g_country = np.empty(len(groups), dtype=object)
    g_country[gi] = unit_country
    S = group_sums(cells, gi, len(groups))
    age = cells.age
    keep = n_d + MONTH_END_SPAN * window + n_past + 1
    Cg, ag = _trim(S["C"], age, keep)
    me_all = month_end(cells.weeks)
    me = me_all[age < keep]

    # Countries: the pattern every group falls back on.
    Sc = S if by in ("country", "region") else group_sums(cells, ci, len(countries))
    Cc, _ = _trim(Sc["C"], age, keep)
    del Sc
    # Countries without a usable history: no week that reached the last delay (fewer than
    # max_delay + 1 weeks of data), or every revision received on one day (no delays to learn).
    # Distinct (country, received day) pairs as one integer each: a frame of every revision
    # and its drop_duplicates held several copies of it.
    r = cells.row_received
    r0 = int(r.min()) if len(r) else 0
    span = int(r.max()) - r0 + 1 if len(r) else 1
    pairs = np.unique(ci[cells.row_unit].astype(np.int64) * span + (r - r0))
    n_dates = pd.Series(np.bincount(pairs // span, minlength=len(countries)))
    first_c = np.full(len(countries), len(cells.weeks))
    np.minimum.at(first_c, ci[cells.pair_unit], cells.pair_week)
    first = np.full(len(groups), len(cells.weeks))
    np.minimum.at(first, gi[cells.pair_unit], cells.pair_week)
    weeks = cells.weeks
    # The unit cells are done with: the patterns below need only the group triangles (at
    # 50,000 units the cells are ~0.5 GB, and the calibration's own arrays came on top).
    del cells, pairs, r
    Foc, Fec, phic = _pattern(Cc, ag, n_d, window, n_past, method, me)
    complete_c = np.where(first_c < len(age), age[np.minimum(first_c, len(age) - 1)] - n_d + 1, 0)
    bad_c = (complete_c < 1) | (n_dates.to_numpy() < 2)
    if bad_c.any() and warn:
        warnings.warn(
            "no usable reporting-delay history for "
            f"{', '.join(map(str, countries[bad_c]))} (fewer than {n_d + 1} weeks of reports, "
            "or every report received on one day): their recent weeks are shown as "
            "reported, without a nowcast (status 'as-reported')",
            DataWarning,
            stacklevel=4,
        )
    cidx = np.searchsorted(countries, g_country.astype(str))
    F_other, F_end = Foc[cidx].copy(), Fec[cidx].copy()
    phi = phic[cidx].copy()
    pattern = countries[cidx].astype(object)
    if by in ("province", "unit"):
        use = (ag[:, None] >= n_d) & (ag[:, None] < n_d + window)
        volume = np.nansum(np.where(use.T, Cg[:, :, n_d], 0), axis=1)
        own = volume >= MIN_OWN_CASES
        if own.any():  # only groups with enough data of their own get a pattern fitted
            Fo, Fe, phio = _pattern(Cg[own], ag, n_d, window, n_past, method, me)
            F_other[own], F_end[own], phi[own] = Fo, Fe, phio
        pattern = np.where(own, groups, pattern)
    p = point(S["C"], age, (F_other, F_end, me_all), 0)
    phi_t = phi[:, np.clip(age, 0, n_d - 1)]
    return Estimate(
        groups=groups,
        country=g_country,
        weeks=weeks,
        age=age,
        first=first,
        reported=S["latest"],
        n_units=S["n"],
        R=p["R"],
        N=p["N"],
        phi=phi_t,
        fallback=bad_c[cidx],
        pattern=pattern,
        C=S["C"],
        unit_group=gi,
    )


def bounds(e: Estimate, conf: float, method: str) -> tuple[np.ndarray, np.ndarray]:
    """Interval arrays (NaN for the plain chain-ladder, which has none)."""
    if method != "negbin":
        nan = np.full(e.R.shape, np.nan)
        return nan, nan
    lower = np.full(e.R.shape, np.nan)
    upper = np.full(e.R.shape, np.nan)
    live = e.age < e.C.shape[2] - 1  # only young weeks have an interval to compute
    lower[:, live], upper[:, live] = nb_bounds(e.R[:, live], e.N[:, live], e.phi[:, live], conf)
    return lower, upper
