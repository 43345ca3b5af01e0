"""Epi curves: weekly cases (bars) and deaths (line), the reporting-delay weeks shaded.

Drawn from plain DataFrames (week index, ``cases``, ``deaths``); re-exported by
:mod:`~marchland.figures.maps`.
A week absent from a table had no report: it stays a gap, never a zero.
"""

from __future__ import annotations

import math
from collections.abc import Mapping

import matplotlib.dates as mdates
import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.collections import PolyCollection
from matplotlib.figure import Figure
from matplotlib.ticker import MaxNLocator

from ._mapkit import _MAP_SIZE, CASE_BAR, DEATH_LINE, DELAY_SHADE, DPI, MapNotes, _no_math

# Bars of the weeks still being reported: a paler tone of CASE_BAR, so the reader can count
# which bars the shaded zone covers even where a bar hides the shade behind it.
INCOMPLETE_BAR = "#aab4cd"
AS_OF_LINE = "#6b2a22"
NOWCAST_MARK = "#1f2a44"


def epi_curves(
    series: Mapping[str, pd.DataFrame],
    notes: MapNotes,
    *,
    as_of: object,
    delay_weeks: int,
    title: str,
    ncols: int | None = None,
    week_days: int = 7,
) -> Figure:
    """Weekly cases (bars) and deaths (line) for one or more areas, delay zone shaded.

    Parameters
    ----------
    series : Mapping
        Panel title -> DataFrame indexed by week start (Timestamp) with ``cases`` and
        ``deaths`` columns. A week absent from the index had no report at all; it is drawn as
        a gap, never as zero. Optional ``estimate``, ``lower`` and ``upper`` columns (NaN for
        complete weeks) draw the nowcast of the weeks still arriving over the bars.
    notes : MapNotes
    as_of : date-like
        The as-of date. The last ``delay_weeks`` complete weeks up to it (weeks that ended on
        or before it) are shaded, and their bars drawn paler, as still incomplete; a week in
        progress on the as-of date is drawn paler too. A line marks the as-of date.
    delay_weeks : int
        Reporting delay in weeks (config ``analysis.reporting_delay_weeks``).
    title : str
    ncols : int, optional
        Panels per row (default: 1 for one panel, else up to 3).

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> w = pd.date_range("2026-08-03", periods=10, freq="7D")
    >>> df = pd.DataFrame({"cases": range(10), "deaths": [0] * 10}, index=w)
    >>> fig = epi_curves({"Region": df}, MapNotes("2026-10-14", "Data: example"),
    ...                  as_of="2026-10-14", delay_weeks=2, title="Weekly cases")
    >>> len(fig.axes) >= 1
    True
    """
    n = max(len(series), 1)
    ncols = ncols or (1 if n == 1 else min(3, n))
    nrows = math.ceil(n / ncols)
    height = 4.6 if nrows == 1 else min(2.1 * nrows + 1.4, 11.5)
    fig = Figure(figsize=(_MAP_SIZE[0], height), dpi=DPI, facecolor="white")
    top = 1 - 1.0 / height
    bottom = 0.95 / height
    fig.text(0.02, 1 - 0.3 / height, title, fontsize=12, fontweight="bold", ha="left", va="center")
    as_of = pd.Timestamp(as_of)
    delay_start, delay_end = _delay_zone(series, as_of, delay_weeks, week_days)
    # One time axis for every panel, so areas can be compared by eye.
    starts = [pd.Timestamp(df.index.min()) for df in series.values() if len(df)]
    ends = [pd.Timestamp(df.index.max()) for df in series.values() if len(df)]
    lo = min(starts) - pd.Timedelta(days=week_days) if starts else delay_start
    hi = max([*ends, delay_end - pd.Timedelta(days=week_days)]) + pd.Timedelta(days=2 * week_days)
    gs = fig.add_gridspec(
        nrows, ncols, left=0.07, right=0.93, top=top, bottom=bottom, hspace=0.6, wspace=0.38
    )
    first = True
    for i, (name, df) in enumerate(series.items()):
        row, col = divmod(i, ncols)
        ax = fig.add_subplot(gs[row, col])
        df = df.sort_index()
        if len(df):
            # Reindex to every week so an unreported week is a visible gap, never a zero.
            full = pd.date_range(df.index.min(), df.index.max(), freq=f"{week_days}D")
            df = df.reindex(full.union(pd.DatetimeIndex(df.index)))
        weeks = pd.DatetimeIndex(df.index)
        cases = df["cases"].astype(float) if "cases" in df else pd.Series(dtype=float)
        deaths = df["deaths"].astype(float) if "deaths" in df else pd.Series(np.nan, df.index)
        if delay_weeks > 0:
            ax.axvspan(
                delay_start,
                delay_end,
                facecolor=DELAY_SHADE,
                edgecolor="#a59a83",
                hatch="....",
                linewidth=0,
                zorder=0,
                label=f"last {delay_weeks} complete weeks: reporting incomplete",
            )
        ax.axvline(
            as_of + pd.Timedelta(days=1),  # the end of the as-of day
            color=AS_OF_LINE,
            linewidth=0.8,
            linestyle=(0, (3, 2)),
            zorder=3,
            label=f"as-of date ({as_of:%Y-%m-%d})",
        )
        _week_bars(
            ax,
            weeks,
            cases.to_numpy(dtype=float),
            week_days,
            incomplete_from=delay_start if delay_weeks > 0 else None,
        )
        if "estimate" in df:
            _nowcast_marks(ax, weeks, df, week_days)
        ax.set_ylim(bottom=0)
        # Deaths on the cases' own axis: a second scale drew a handful of deaths above the bars.
        ax.plot(
            weeks + pd.Timedelta(days=week_days / 2),
            deaths.to_numpy(),
            color=DEATH_LINE,
            linewidth=0.9,
            marker="o",
            markersize=1.6,
            label="deaths (line, same scale as cases)",
        )
        ax.set_ylim(bottom=0)
        ax.set_xlim(lo, hi)
        ax.set_title(str(name), fontsize=8.5, loc="left", pad=3)
        ax.tick_params(labelsize=6.5)
        if col == 0:
            ax.set_ylabel("cases and deaths per week", fontsize=7)
        ax.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=3, maxticks=5))
        ax.yaxis.set_major_locator(MaxNLocator(4, integer=True))
        ax.xaxis.set_major_formatter(mdates.DateFormatter("%b %Y"))
        ax.spines["top"].set_visible(False)
        if first:
            h1, l1 = ax.get_legend_handles_labels()
            fig.legend(
                h1,
                l1,
                loc="center left",
                bbox_to_anchor=(0.01, 1 - 0.62 / height),
                fontsize=7,
                frameon=False,
                ncols=3,  # four columns overflow once the estimate has its two entries
            )
            first = False
    fig.text(
        0.02,
        0.55 / height,
        f"Data as of {notes.as_of}. {notes.source} Weeks with no report are gaps, not zeros.",
        fontsize=6.5,
        ha="left",
        va="center",
        color="#3a3832",
    )
    fig.text(
        0.02,
        0.25 / height,
        notes.caution,
        fontsize=6.5,
        ha="left",
        va="center",
        color="#6b2a22",
        style="italic",
    )
    return _no_math(fig)


def _nowcast_marks(ax: Axes, weeks: pd.DatetimeIndex, df: pd.DataFrame, week_days: int) -> None:
    """Draw the estimate of the weeks still arriving (diamonds, a line) and its interval.

    Drawn only where ``estimate`` is given (the caller leaves complete weeks NaN), so a
    reader sees at once which weeks are estimated and by how much above the reported bar.
    """
    est = df["estimate"].to_numpy(dtype=float)
    ok = np.isfinite(est)
    if not ok.any():
        return
    x = weeks[ok] + pd.Timedelta(days=week_days * 0.425)
    lower = df["lower"].to_numpy(dtype=float)[ok] if "lower" in df else np.full(ok.sum(), np.nan)
    upper = df["upper"].to_numpy(dtype=float)[ok] if "upper" in df else np.full(ok.sum(), np.nan)
    has = np.isfinite(lower) & np.isfinite(upper)
    ax.vlines(
        x[has],
        lower[has],
        upper[has],
        color=NOWCAST_MARK,
        linewidth=1.6,
        zorder=4,
        label="interval of the estimate (reporting delay)",
    )
    ax.plot(  # NaN between estimated runs breaks the line: only neighbouring weeks join
        weeks + pd.Timedelta(days=week_days * 0.425),
        est,
        color=NOWCAST_MARK,
        linewidth=0.9,
        marker="D",
        markersize=3.2,
        zorder=5,
        label="estimate: late reports and silent units added",
    )
    top = float(np.nanmax(np.concatenate([est[ok], upper[has]])))
    ax.set_ylim(0, max(ax.get_ylim()[1], top * 1.08))


def _delay_zone(
    series: Mapping[str, pd.DataFrame], as_of: pd.Timestamp, delay_weeks: int, week_days: int
) -> tuple[pd.Timestamp, pd.Timestamp]:
    """Span the last ``delay_weeks`` whole weeks finished by ``as_of`` (data's week grid)."""
    first = next((pd.Timestamp(df.index.min()) for df in series.values() if len(df)), None)
    start_day = first.day_of_week if first is not None else 0
    day = as_of.normalize()
    current = day - pd.Timedelta(days=(day.day_of_week - start_day) % 7)
    done = (
        current
        if day >= current + pd.Timedelta(days=week_days - 1)
        else current - pd.Timedelta(days=week_days)
    )
    return done - pd.Timedelta(days=week_days * (delay_weeks - 1)), done + pd.Timedelta(
        days=week_days
    )


def _week_bars(
    ax: Axes,
    weeks: pd.DatetimeIndex,
    values: np.ndarray,
    week_days: int,
    *,
    incomplete_from: pd.Timestamp | None = None,
) -> None:
    """Weekly bars as ONE collection (a bar per artist costs seconds over many panels)."""
    ok = np.isfinite(values) & (values > 0)
    late = np.zeros(int(ok.sum()), dtype=bool)
    if incomplete_from is not None:
        late = np.asarray(weeks[ok] >= incomplete_from)
    x0 = mdates.date2num(weeks[ok])
    w = week_days * 0.85
    h = values[ok]
    verts = np.stack(
        [
            np.column_stack([x0, np.zeros_like(h)]),
            np.column_stack([x0, h]),
            np.column_stack([x0 + w, h]),
            np.column_stack([x0 + w, np.zeros_like(h)]),
        ],
        axis=1,
    )
    coll = PolyCollection(
        verts,
        facecolors=np.where(late, INCOMPLETE_BAR, CASE_BAR),
        # An outline on the paler bars only, so they stand out from the shade behind them.
        edgecolors=np.where(late, CASE_BAR, "none"),
        linewidths=np.where(late, 0.7, 0.0),
        zorder=2,
        label="cases (bars)",
    )
    ax.add_collection(coll)
    ax.set_ylim(0, max(1.0, float(h.max()) if h.size else 1.0) * 1.08)
    ax.xaxis_date()
