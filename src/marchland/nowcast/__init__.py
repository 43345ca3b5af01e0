"""Nowcast stage: reporting triangles, completeness, nowcast of recent weeks, reporting gaps.

In: Counts with every revision (``unit_id week cases received``; see DEVELOPERS.md) and,
optionally, the Units table (``country parent_id level population``) for provinces and rates.
Out: pandas DataFrames, one row per (group, week) or (unit, week): the reporting triangle, the
nowcast with its interval and status, the complete unit x week panel with gaps marked, and its
sums that never add a gap as zero.
May use the earlier stages: errors, config, inputs, graph (today only ``errors``).
"""

from .gaps import PANEL_STATUSES, aggregate_panel, fill_gaps
from .nowcasting import STATUSES, nowcast, reporting_triangle

__all__ = [
    "PANEL_STATUSES",
    "STATUSES",
    "aggregate_panel",
    "fill_gaps",
    "nowcast",
    "reporting_triangle",
]
