"""Layers some maps draw over the unit fills: rate panels, month fronts, silent outlines, depots.

Private to the figures stage. The order of the calls is the drawing order (artists of equal
``zorder`` stack in the order they are added), so each helper draws in one fixed sequence.
"""

from __future__ import annotations

import math

import numpy as np
import pandas as pd
from matplotlib.axes import Axes
from matplotlib.figure import Figure
from matplotlib.patches import Circle

from ._mapclass import _existing, _rate_colours
from ._mapkit import (
    _MAP_SIZE,
    DEPOT_COLOUR,
    DPI,
    EXISTING_DEPOT_COLOUR,
    FRONT_COLOUR,
    BaseMap,
    MapNotes,
    _country_labels,
    _fill,
    _frame,
    _north_arrow,
    _scale_bar,
)


def _rate_panels(
    base: BaseMap, rates: pd.DataFrame, notes: MapNotes, bins: np.ndarray
) -> tuple[Figure, np.ndarray]:
    """Draw one rate panel per column of ``rates``; return the figure and the pooled classes."""
    n = rates.shape[1]
    ncols = 3 if n > 4 else max(n, 1)
    nrows = max(1, math.ceil(n / ncols))
    fig = Figure(figsize=_MAP_SIZE, dpi=DPI, facecolor="white")
    fig.text(
        0.02, 0.955, "Attack rate by month", fontsize=13, fontweight="bold", ha="left", va="center"
    )
    fig.text(
        0.02,
        0.922,
        f"{notes.region}: cases per 100,000; one class scheme shared by every panel",
        fontsize=9,
        ha="left",
        va="center",
        color="#4a4740",
    )
    all_classes = []
    # Panels take the full width; the legend runs along the bottom instead of down the side.
    width, height = 0.96 / ncols, 0.66 / nrows
    for i, col in enumerate(rates.columns):
        r, c = divmod(i, ncols)
        ax = fig.add_axes(
            (0.02 + c * width, 0.235 + (nrows - 1 - r) * height, width * 0.97, height * 0.9)
        )
        colours, classes = _rate_colours(rates[col], bins)
        all_classes.append(classes)
        _fill(ax, base, colours, hatch_ids=rates.index[classes == -2], compact=True)
        _frame(ax, base)
        _country_labels(ax, base, compact=True)
        ax.set_title(str(col), fontsize=8.5, pad=3)
        if i == 0:
            _scale_bar(ax, base, compact=True)
        if i == min(ncols, n) - 1:
            _north_arrow(ax, base, compact=True)
    classes = np.concatenate(all_classes) if all_classes else np.array([], dtype=int)
    return fig, classes


def _draw_fronts(ax: Axes, fronts, current: str | None) -> None:
    """Every month's front as a thin line; the ``current`` month's heavier, on top."""
    if fronts is not None and len(fronts):
        fronts.boundary.plot(ax=ax, color="#2a2723", linewidth=0.7, zorder=3)
        if current is not None and current in fronts.index:
            fronts.loc[[current]].boundary.plot(ax=ax, color=FRONT_COLOUR, linewidth=1.8, zorder=6)


def _draw_silent(ax: Axes, base: BaseMap, silent) -> bool:
    """Outline silent units dashed; whether any was drawn."""
    sil = base.units[base.units.index.isin(list(silent))]
    if len(sil):
        sil.boundary.plot(ax=ax, color="#1d1d1b", linewidth=0.9, linestyle=(0, (2, 1.5)), zorder=6)
    return bool(len(sil))


def _draw_depots(ax: Axes, depots, *, reach_km: float | None, sites) -> None:
    """Candidate sites, then each opened depot's reach circle, marker and name."""
    if sites is not None and len(sites):
        ax.scatter(
            sites.geometry.x,
            sites.geometry.y,
            marker="s",
            s=14,
            facecolor="white",
            edgecolor=DEPOT_COLOUR,
            linewidth=0.7,
            zorder=7,
        )
    if depots is None or not len(depots):
        return
    if reach_km:
        for pt in depots.geometry:
            ax.add_patch(
                Circle(
                    (pt.x, pt.y),
                    reach_km * 1000,
                    facecolor="none",
                    edgecolor=DEPOT_COLOUR,
                    linewidth=0.8,
                    linestyle=(0, (4, 2)),
                    zorder=7,
                )
            )
    existing = _existing(depots)
    ax.scatter(
        depots.geometry.x,
        depots.geometry.y,
        marker="s",
        s=40,
        facecolor=np.where(existing, EXISTING_DEPOT_COLOUR, DEPOT_COLOUR),
        edgecolor="white",
        linewidth=0.8,
        zorder=8,
    )
    if "name" in depots:
        for pt, name in zip(depots.geometry, depots["name"], strict=True):
            ax.annotate(
                str(name),
                (pt.x, pt.y),
                xytext=(5, 4),
                textcoords="offset points",
                fontsize=7,
                zorder=9,
                color=DEPOT_COLOUR,
                bbox=dict(boxstyle="round,pad=0.15", fc="white", ec="none", alpha=0.8),
            )
