"""marchland: cross-border spatial risk analysis of epidemic-prone waterborne disease.

The public names are loaded on first use, so ``import marchland`` (and the command line) stays
quick and does not pull in the statistics stack until it is needed.
"""

from __future__ import annotations

from typing import TYPE_CHECKING

from ._lazy import exports

__version__ = "0.1.0"

_EXPORTS: dict[str, str] = {
    "read_units": "inputs.units",
    "analysis_units": "inputs.units",
    "zonal_population": "inputs.population",
    "read_reports": "inputs.reports",
    "border_graph": "graph.build",
    "attack_rates": "stats.rates",
    "case_fatality": "stats.rates",
    "smooth_rates": "stats.rates",
    "local_moran": "stats.autocorrelation",
    "hotspots": "stats.autocorrelation",
    "first_cases": "spread.arrival",
    "spread_fronts": "spread.fronts",
    "spread_velocity": "spread.arrival",
    "cross_border_introductions": "spread.fronts",
    "corridor": "spread.fronts",
    "border_risk": "risk.score",
    "backtest_risk": "risk.score",
    "prioritise": "supplies.plan",
    "choose_depots": "supplies.depots",
    "open_region": "pack.region",
    "run_month": "pack.monthly",
    "run_week": "pack.weekly",
    "nowcast": "delays.nowcasting",
    "forecast": "projections.projection",
    "backtest_forecast": "projections.backtest",
    "emerging_clusters": "clusters.emerging",
}

__all__ = [
    "read_units",
    "analysis_units",
    "zonal_population",
    "read_reports",
    "border_graph",
    "attack_rates",
    "case_fatality",
    "smooth_rates",
    "local_moran",
    "hotspots",
    "first_cases",
    "spread_fronts",
    "spread_velocity",
    "cross_border_introductions",
    "corridor",
    "border_risk",
    "backtest_risk",
    "prioritise",
    "choose_depots",
    "open_region",
    "run_month",
    "run_week",
    "nowcast",
    "forecast",
    "backtest_forecast",
    "emerging_clusters",
]

if TYPE_CHECKING:  # pragma: no cover
    from .clusters.emerging import emerging_clusters
    from .delays.nowcasting import nowcast
    from .graph.build import border_graph
    from .inputs.population import zonal_population
    from .inputs.reports import read_reports
    from .inputs.units import analysis_units, read_units
    from .pack.monthly import run_month
    from .pack.region import open_region
    from .pack.weekly import run_week
    from .projections.backtest import backtest_forecast
    from .projections.projection import forecast
    from .risk.score import backtest_risk, border_risk
    from .spread.arrival import first_cases, spread_velocity
    from .spread.fronts import corridor, cross_border_introductions, spread_fronts
    from .stats.autocorrelation import hotspots, local_moran
    from .stats.rates import attack_rates, case_fatality, smooth_rates
    from .supplies.depots import choose_depots
    from .supplies.plan import prioritise

__getattr__, __dir__ = exports(__name__, _EXPORTS)
