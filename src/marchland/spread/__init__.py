"""Stage 6, spread: counts and the graph in, arrival times, fronts and speeds out.

Comes in: Counts, the graph, units. Goes out: first-case weeks and affected episodes
(``arrival``), fronts, their outlines, cross-border introductions and corridors (``fronts``),
spread velocity with intervals, the Knox space-time test.
Uses: errors, config, inputs, graph, nowcast, stats.
"""

from .._lazy import exports

_EXPORTS = {
    "first_cases": "arrival",
    "affected_episodes": "arrival",
    "spread_velocity": "arrival",
    "knox": "arrival",
    "spread_fronts": "fronts",
    "front_outlines": "fronts",
    "cross_border_introductions": "fronts",
    "introductions_by_border": "fronts",
    "corridor": "fronts",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
