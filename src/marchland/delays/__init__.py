"""Stage 4, reporting delays: reporting triangles, nowcast of recent weeks, gaps in reporting.

In: Counts with every revision (``unit_id week cases received``; see DEVELOPERS.md) and,
optionally, the Units table (``country parent_id level population``) for provinces and rates.
Out: pandas DataFrames, one row per (group, week) or (unit, week): the reporting triangle, the
nowcast with its interval and status, the complete unit x week panel with gaps marked, and its
sums that never add a gap as zero.
Uses: errors, config, inputs (named ``delays`` so that no module shares the name of the public
function :func:`nowcast`).
"""

from .._lazy import exports

_EXPORTS = {
    "nowcast": "nowcasting",
    "reporting_triangle": "nowcasting",
    "STATUSES": "nowcasting",
    "fill_gaps": "gaps",
    "aggregate_panel": "gaps",
    "filled": "gaps",
    "aggregate_filled": "gaps",
    "Filled": "gaps",
    "PANEL_STATUSES": "gaps",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
