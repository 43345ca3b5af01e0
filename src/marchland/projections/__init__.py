"""Stage 8, projections: short-term forecasts of weekly cases per unit, and their backtest.

In: counts (long, every revision; as-of views), analysis units (``population``, ``country``,
``parent_id``, ``level``) and the cross-border graph; optionally a unit x week panel of counts
already corrected for reporting delay by the delays stage (``panel=``).
Out: :class:`Forecast` (per unit and week ``mean median lower upper p_any``, fitted
parameters, simulated paths that aggregate to provinces, countries or the region) and the
rolling-origin backtest table of :func:`backtest_forecast`.
Uses: errors, config, inputs, graph, delays, stats, spread, clusters (named ``projections`` so
that no module shares the name of the public function :func:`forecast`).
"""

from .._lazy import exports

_EXPORTS = {
    "forecast": "projection",
    "Forecast": "projection",
    "backtest_forecast": "backtest",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
