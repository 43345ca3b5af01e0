"""marchland: cross-border spatial risk analysis of epidemic-prone waterborne disease.

The public names are loaded on first use, so ``import marchland`` (and the command line) stays
quick and does not pull in the statistics stack until it is needed.
"""

from __future__ import annotations

import importlib
import sys
import types
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
]

if TYPE_CHECKING:  # pragma: no cover
    from .graph import border_graph
    from .hotspots import hotspots, local_moran
    from .monthly import run_month
    from .population import zonal_population
    from .rates import attack_rates, case_fatality, smooth_rates
    from .region import open_region
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


# ``hotspots`` is both a module and the function it exports. Importing the submodule binds the
# module on the package, which would hide the function; this keeps ``marchland.hotspots`` the
# function (as design.md's API says) while the module stays importable by its full dotted path.
_SHADOWED = frozenset(name for name, module in _EXPORTS.items() if name == module)


class _PublicFront(types.ModuleType):
    def __getattribute__(self, name: str) -> Any:
        value = super().__getattribute__(name)
        if name in _SHADOWED and isinstance(value, types.ModuleType):
            return getattr(value, name)
        return value


sys.modules[__name__].__class__ = _PublicFront
