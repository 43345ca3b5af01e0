"""Stage 1, configuration: a TOML file (or dict) in, validated frozen dataclasses out.

Comes in: the path of a TOML config. Goes out: :class:`Config` and its parts, every key checked
by key path (:class:`~marchland.errors.ConfigError` names the file and the key). Uses only
:mod:`marchland.errors`. ``schema`` holds the dataclasses and allowed values, ``_read`` the
key-by-key checking, ``load`` the two entry points.
"""

from .._lazy import exports

_EXPORTS = {
    "Config": "schema",
    "load_config": "load",
    "config_from_dict": "load",
    "RegionConfig": "schema",
    "BoundarySource": "schema",
    "PopulationConfig": "schema",
    "ReportColumns": "schema",
    "ReportSpec": "schema",
    "MatchingConfig": "schema",
    "ChecksConfig": "schema",
    "GraphConfig": "schema",
    "AnalysisConfig": "schema",
    "RiskCovariate": "schema",
    "RiskConfig": "schema",
    "PlanningRates": "schema",
    "SuppliesConfig": "schema",
    "OutputConfig": "schema",
    "ComputeConfig": "schema",
}
__all__ = list(_EXPORTS)
__getattr__, __dir__ = exports(__name__, _EXPORTS)
