"""Stage 10, supplies: risk scores and units in, a priority list and depot choices out.

Comes in: border-risk scores, units, the supply plan (items, planning rates, depots). Goes out:
the ranked priority list with planning quantities (``plan``), depot choice by maximal covering,
assignment of units to depots and their reach (``depots``).
Uses: every stage above it.
"""

from .._lazy import exports

_EXPORTS = {
    "SupplyPlan": "plan",
    "prioritise": "plan",
    "totals": "plan",
    "forecast_case_totals": "plan",
    "affected_quantities": "plan",
    "read_supply_items": "plan",
    "read_depots": "depots",
    "choose_depots": "depots",
    "assign_depots": "depots",
    "reach_areas": "depots",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
