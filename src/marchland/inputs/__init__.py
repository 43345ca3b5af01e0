"""Stage 2, inputs: boundary files, population, weekly report files -> units and counts.

Comes in: boundary files, a population raster or table, report files (tables, workbooks, line
lists) as the config describes them. Goes out: Units (GeoDataFrame in the working equal-area
CRS), Counts (long, every revision kept; :func:`as_of` gives the data as known on a date),
Rejects with reasons, place-name matches, reporting completeness, epi weeks (``weeks``).
Uses: errors, config.
"""

from .._lazy import exports

_EXPORTS = {
    "read_units": "units",
    "analysis_units": "units",
    "working_crs": "units",
    "counts_to_analysis": "units",
    "zonal_population": "population",
    "zonal_mean": "population",
    "covariate_from_table": "population",
    "read_reports": "reports",
    "Reports": "reports",
    "as_of": "reports",
    "reporting_completeness": "reports",
    "load_aliases": "reports",
    "epi_week": "weeks",
    "week_start": "weeks",
    "month_weeks": "weeks",
    "week_month": "weeks",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
