"""Stage 9, border risk: counts, units and the graph in, a score per unaffected unit out.

Comes in: Counts, units, the graph, optional covariates. Goes out: the discrete-time hazard
model's probability of a first case within h weeks for unaffected units near affected ones,
with its parts, and its rolling-origin backtest against simple baselines.
Uses: every stage above it (errors to forecast).
"""

from .._lazy import exports

_EXPORTS = {
    "border_risk": "score",
    "backtest_risk": "score",
    "fit_risk_model": "score",
    "run_backtest": "score",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
