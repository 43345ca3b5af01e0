"""Forecast stage: short-term projections of weekly cases per unit, and their backtest.

In: counts (long, every revision; as-of views), analysis units (``population``, ``country``,
``parent_id``, ``level``) and the cross-border graph; optionally a unit x week panel of counts
already corrected for reporting delay by the nowcast stage (``panel=``).
Out: :class:`Forecast` (per unit and week ``mean median lower upper p_any``, fitted
parameters, simulated paths that aggregate to provinces, countries or the region) and the
rolling-origin backtest table of :func:`backtest_forecast`.
May use: errors, config, inputs, graph, nowcast, stats.
"""

from .backtest import backtest_forecast
from .projection import Forecast, forecast

__all__ = ["Forecast", "backtest_forecast", "forecast"]
