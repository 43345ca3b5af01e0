"""marchland: cross-border spatial risk analysis of epidemic-prone waterborne disease.

The public names are loaded on first use, so ``import marchland`` (and the command line) stays
quick and does not pull in the statistics stack until it is needed.
"""

from __future__ import annotations

import importlib
from typing import TYPE_CHECKING, Any

__version__ = "0.1.0"

_EXPORTS: dict[str, str] = {
    "read_units": "units",
    "analysis_units": "units",
    "zonal_population": "population",
    "read_reports": "reports",
    "border_graph": "graph",
    "attack_rates": "rates",
    "case_fatality": "rates",
    "smooth_rates": "rates",
    "local_moran": "hotspots",
    "hotspots": "hotspots",
    "first_cases": "spread",
    "spread_fronts": "spread",
    "spread_velocity": "spread",
    "cross_border_introductions": "spread",
    "corridor": "spread",
    "border_risk": "risk",
    "backtest_risk": "risk",
    "prioritise": "supplies",
    "choose_depots": "supplies",
    "open_region": "region",
    "run_month": "monthly",
}

__all__ = list(_EXPORTS)

if TYPE_CHECKING:  # pragma: no cover
    from .graph import border_graph
    from .hotspots import hotspots, local_moran
    from .population import zonal_population
    from .rates import attack_rates, case_fatality, smooth_rates
    from .region import open_region, run_month
    from .reports import read_reports
    from .risk import backtest_risk, border_risk
    from .spread import (
        corridor,
        cross_border_introductions,
        first_cases,
        spread_fronts,
        spread_velocity,
    )
    from .supplies import choose_depots, prioritise
    from .units import analysis_units, read_units


def __getattr__(name: str) -> Any:
    if name in _EXPORTS:
        module = importlib.import_module(f".{_EXPORTS[name]}", __name__)
        return getattr(module, name)
    raise AttributeError(f"module 'marchland' has no attribute {name!r}")


def __dir__() -> list[str]:
    return sorted([*globals(), *__all__])
