"""Stage 3, the graph: analysis units in, the cross-border contiguity graph out.

Comes in: analysis units (geometry, country, source file) and optional extra links. Goes out:
:class:`BorderGraph` (edge table with shared length, gap, cross-border flag and kind; libpysal
``Graph`` views, weights, hop distances, islands). Every statistic that takes a graph accepts a
BorderGraph or a plain ``libpysal.graph.Graph`` through :func:`as_border_graph`.
Uses: errors, config, inputs.
"""

from .._lazy import exports

_EXPORTS = {
    "BorderGraph": "border",
    "as_border_graph": "border",
    "border_graph": "build",
    "edges_layer": "build",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
