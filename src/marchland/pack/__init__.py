"""Stage 12, the pack: a config in, the month's results and its folder out.

Comes in: a config. Goes out: :class:`Region` (``open_region``: units, counts, rejects, graph)
and the input check; :class:`MonthResult` (``run_month``, composition of every stage, no file
output); the month's folder (``write_month``: GeoPackage, tables, maps, atlas, report page,
manifest, written atomically). Uses: every stage above it.
"""

from .._lazy import exports

_EXPORTS = {
    "open_region": "region",
    "check": "region",
    "Region": "region",
    "CheckReport": "region",
    "run_month": "monthly",
    "MonthResult": "monthly",
    "write_month": "bundle",
    "run_week": "weekly",
    "WeekResult": "weekly",
    "write_week": "_weekpage",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
