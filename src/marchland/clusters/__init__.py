"""Stage 7, clusters: prospective space-time cluster detection.

In: counts (long, every revision; read as known on the as-of date) or a filled unit x week
case panel (e.g. nowcast-adjusted), and the analysis units (equal-area CRS); optionally the
border graph, so cluster bases follow borders.
Out: one row per cluster (``units start end observed expected relative_risk p
recurrence_weeks`` and more), from the space-time permutation scan statistic or its Poisson
(population) variant.
Uses: errors, config, inputs, graph, delays, stats, spread.
"""

from .._lazy import exports

_EXPORTS = {
    "emerging_clusters": "emerging",
    "CLUSTER_COLUMNS": "emerging",
    "METHODS": "emerging",
    "NEIGHBOURS": "emerging",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
