"""Stage 5, statistics: counts, population and the graph in, rates and clusters out.

Comes in: per-unit counts and population (Series indexed by unit_id), a graph. Goes out:
attack rates with exact limits, CFR, empirical Bayes rates, window sums and area totals, local
and global Moran's I (rate-adjusted), Gi*, Benjamini-Hochberg q-values.
Uses: errors, config, inputs, graph, the nowcast stage.
"""

from .._lazy import exports

_EXPORTS = {
    "attack_rates": "rates",
    "case_fatality": "rates",
    "smooth_rates": "rates",
    "poisson_limits": "rates",
    "eb_standardised": "rates",
    "window_counts": "totals",
    "aggregate_rates": "totals",
    "local_moran": "autocorrelation",
    "hotspots": "autocorrelation",
    "getis_ord": "autocorrelation",
    "global_moran": "autocorrelation",
    "global_moran_rate": "autocorrelation",
    "bh_qvalues": "autocorrelation",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
