"""Outlook figures: emerging clusters outlined on the attack-rate map, and forecast fan charts.

Separate from :mod:`~marchland.figures.maps` and the epi curves so that each stays one layer:
the cluster map draws outlines over :func:`~marchland.figures.maps.attack_rate_map`, and the
fan charts are their own figures (reported weeks, nowcast-filled weeks, forecast band).
"""

from __future__ import annotations

from collections.abc import Mapping

import geopandas as gpd
import matplotlib.dates as mdates
import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from ._mapkit import BaseMap, MapNotes, _no_math
from .maps import attack_rate_map

OUTLINE = "#1b1464"
REPORTED = "#8c7b62"
FILLED = "#c98a3c"
BAND = "#4a6fa5"


def cluster_outline_map(
    base: BaseMap,
    rate: pd.Series,
    outlines: gpd.GeoDataFrame,
    notes: MapNotes,
    *,
    bins: np.ndarray | None = None,
    period: str = "",
) -> Figure:
    """Attack-rate map with each emerging cluster's units outlined and labelled.

    Parameters
    ----------
    base : BaseMap
    rate : pandas.Series
        Attack rate per 100,000 by unit id (NaN: not reported, hatched).
    outlines : geopandas.GeoDataFrame
        One polygon per cluster (the union of its units) with a ``label`` column, e.g.
        ``"1: from 2026-10-12, p=0.001"``; in the map's CRS.
    notes : MapNotes
    bins : numpy.ndarray, optional
        Rate class bounds.
    period : str

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> from shapely.geometry import box
    >>> from marchland.figures.maps import base_map
    >>> u = gpd.GeoDataFrame({"country": ["AAA", "BBB"]}, index=["a", "b"],
    ...                      geometry=[box(0, 0, 9e4, 9e4), box(9e4, 0, 18e4, 9e4)],
    ...                      crs="EPSG:3035")
    >>> o = gpd.GeoDataFrame({"label": ["1: from 2026-10-12, p=0.001"]},
    ...                      geometry=[u.geometry["a"]], crs=u.crs)
    >>> fig = cluster_outline_map(base_map(u), pd.Series({"a": 12.0, "b": 0.0}), o,
    ...                           MapNotes("2026-11-03", "Data: example"))
    >>> [t.get_text() for t in fig.axes[0].texts][-1]
    '1'
    """
    fig = attack_rate_map(
        base,
        rate,
        notes,
        bins=bins,
        period=period,
        title=f"Emerging clusters over the attack rate {period}".strip(),
    )
    ax = fig.axes[0]
    if len(outlines):
        outlines.boundary.plot(ax=ax, color="white", linewidth=3.2, zorder=6)
        outlines.boundary.plot(ax=ax, color=OUTLINE, linewidth=1.6, zorder=7)
        # geopandas labels the axes with the CRS's easting/northing; no other map has them.
        ax.set_xlabel("")
        ax.set_ylabel("")
        pts = outlines.geometry.representative_point()
        for i, (pt, lab) in enumerate(zip(pts, outlines["label"], strict=True)):
            ax.text(
                pt.x,
                pt.y,
                str(lab).split(":")[0] if ":" in str(lab) else str(i + 1),
                fontsize=8,
                fontweight="bold",
                color=OUTLINE,
                ha="center",
                va="center",
                zorder=8,
                bbox={"boxstyle": "circle,pad=0.15", "fc": "white", "ec": OUTLINE, "lw": 0.6},
            )
        lines = "\n".join(str(s) for s in outlines["label"])
        fig.text(
            0.985,
            0.30,
            f"Emerging clusters (outlined)\n{lines}",
            fontsize=6.5,
            ha="right",
            va="bottom",
            color=OUTLINE,
            bbox={"fc": "white", "ec": "#d8d2c2", "lw": 0.5},
        )
    return _no_math(fig)


def fan_charts(
    series: Mapping[str, pd.DataFrame],
    notes: MapNotes,
    *,
    title: str,
    conf: float = 0.9,
    ncols: int | None = None,
) -> Figure:
    """Draw reported cases, nowcast-filled recent weeks and the forecast band, per area.

    Parameters
    ----------
    series : Mapping
        Panel title -> DataFrame indexed by week start with ``reported`` (cases as reported;
        NaN for a gap), ``filled`` (nowcast-filled cases) and, on the forecast weeks,
        ``median lower upper``.
    notes : MapNotes
    title : str
    conf : float
        Level of the band, for the legend.
    ncols : int, optional

    Returns
    -------
    matplotlib.figure.Figure

    Examples
    --------
    >>> w = pd.date_range("2026-09-07", periods=8, freq="7D")
    >>> df = pd.DataFrame({"reported": [5, 6, 7, 8, 6, np.nan, np.nan, np.nan],
    ...                    "filled": [5, 6, 7, 8, 9, np.nan, np.nan, np.nan],
    ...                    "median": [np.nan] * 5 + [9, 10, 10],
    ...                    "lower": [np.nan] * 5 + [5, 4, 3],
    ...                    "upper": [np.nan] * 5 + [14, 17, 19]}, index=w)
    >>> fig = fan_charts({"Region": df}, MapNotes("2026-11-03", "Data: example"), title="t")
    >>> len(fig.axes)
    1
    """
    n = len(series)
    ncols = ncols or (1 if n == 1 else min(3, n))
    nrows = int(np.ceil(n / ncols))
    height = 1.2 + 2.2 * nrows
    fig = Figure(figsize=(10, height), dpi=100)
    fig.suptitle(title, x=0.02, ha="left", fontsize=11, y=1 - 0.2 / height)
    gs = fig.add_gridspec(
        nrows, ncols, left=0.07, right=0.98, top=1 - 0.9 / height, bottom=0.85 / height,
        hspace=0.55, wspace=0.25,
    )  # fmt: skip
    for i, (name, df) in enumerate(series.items()):
        ax = fig.add_subplot(gs[i // ncols, i % ncols])
        w = pd.DatetimeIndex(df.index) + pd.Timedelta(days=3.5)
        ax.bar(w, df["reported"].to_numpy(float), width=6, color=REPORTED, alpha=0.55, lw=0)
        ax.plot(w, df["filled"].to_numpy(float), color=FILLED, lw=1.2)
        ax.fill_between(
            w, df["lower"].to_numpy(float), df["upper"].to_numpy(float), color=BAND, alpha=0.3,
            lw=0,
        )  # fmt: skip
        ax.plot(w, df["median"].to_numpy(float), color=BAND, lw=1.4, ls="--")
        ax.set_ylim(bottom=0)
        ax.set_title(str(name), fontsize=8.5, loc="left", pad=3)
        ax.tick_params(labelsize=6.5)
        ax.xaxis.set_major_locator(mdates.AutoDateLocator(minticks=3, maxticks=5))
        ax.xaxis.set_major_formatter(mdates.DateFormatter("%d %b"))
        ax.yaxis.set_major_locator(MaxNLocator(4, integer=True))
        ax.spines[["top", "right"]].set_visible(False)
        if i % ncols == 0:
            ax.set_ylabel("cases per week", fontsize=7)
    handles = [
        Patch(color=REPORTED, alpha=0.55, label="reported"),
        Line2D([], [], color=FILLED, lw=1.2, label="nowcast-filled (late reports, gaps)"),
        Line2D([], [], color=BAND, lw=1.4, ls="--", label="forecast median"),
        Patch(color=BAND, alpha=0.3, label=f"forecast {conf:.0%} interval"),
    ]
    fig.legend(
        handles=handles, loc="center left", bbox_to_anchor=(0.01, 1 - 0.62 / height),
        fontsize=7, frameon=False, ncols=4,
    )  # fmt: skip
    fig.text(
        0.02, 0.5 / height,
        f"Data as of {notes.as_of}. {notes.source} Projections assume no change in response.",
        fontsize=6.5, ha="left", va="center", color="#3a3832",
    )  # fmt: skip
    fig.text(
        0.02, 0.22 / height, notes.caution, fontsize=6.5, ha="left", va="center",
        color="#6b2a22", style="italic",
    )  # fmt: skip
    return _no_math(fig)
