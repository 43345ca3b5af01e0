"""Stage 11, figures: result tables and geometry in, matplotlib figures out.

Comes in: GeoDataFrames and tables already computed. Goes out: static maps (Fisher-Jenks
classes), epi curves. Draws only; imports no analysis stage, so a figure never computes a
statistic of its own. Uses: errors, config.
"""

from .._lazy import exports

_EXPORTS = {
    "base_map": "maps",
    "rate_classes": "maps",
    "attack_rate_map": "maps",
    "rate_small_multiples": "maps",
    "cluster_map": "maps",
    "arrival_map": "maps",
    "risk_map": "maps",
    "priority_map": "maps",
    "save_figure": "maps",
    "label_units": "labels",
    "outline_units": "labels",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
