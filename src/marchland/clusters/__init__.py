"""Clusters: prospective space-time cluster detection.

In: counts (long, every revision; read as known on the as-of date) or a filled unit x week
case panel (e.g. nowcast-adjusted), and the analysis units (equal-area CRS); optionally the
border graph, so cluster bases follow borders.
Out: one row per cluster (``units start end observed expected relative_risk p
recurrence_weeks`` and more), from the space-time permutation scan statistic or its Poisson
(population) variant.
May use the earlier stages: errors, config, inputs, graph, nowcast, stats.
"""

from .emerging import CLUSTER_COLUMNS, METHODS, NEIGHBOURS, emerging_clusters

__all__ = ["CLUSTER_COLUMNS", "METHODS", "NEIGHBOURS", "emerging_clusters"]
