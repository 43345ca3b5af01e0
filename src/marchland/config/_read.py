"""Checking a TOML configuration into the dataclasses of :mod:`marchland.config.schema`.

Each value checker returns the converted value or raises a ConfigError naming the key path;
each section builder checks its table for unknown and missing keys first.
"""

from __future__ import annotations

import datetime as _dt
import glob as _glob
import math
import re
from collections.abc import Callable, Mapping
from pathlib import Path
from typing import Any

from ..errors import ConfigError
from .schema import (
    CALENDARS,
    DATE_BASES,
    DEATHS_OVER_CASES,
    EXTRA_FEATURES,
    FEATURES,
    LEVELS,
    PAPER_SIZES,
    SAME_DAY_CONFLICTS,
    SECTIONS,
    SHAPES,
    THOUSANDS,
    WEEK_FORMATS,
    WEIGHTINGS,
    ZEROS,
    AnalysisConfig,
    BoundarySource,
    ChecksConfig,
    ComputeConfig,
    Config,
    GraphConfig,
    MatchingConfig,
    OutputConfig,
    PlanningRates,
    PopulationConfig,
    RegionConfig,
    ReportColumns,
    ReportSpec,
    RiskConfig,
    RiskCovariate,
    SuppliesConfig,
)


# --- value checkers: each returns the converted value or raises ConfigError ---------------
class _Ctx:
    """The file being read, so every error names it."""

    def __init__(self, path: Path | None, base: Path) -> None:
        self.path = path
        self.base = base

    def error(self, key: str, reason: str, value: object = None) -> ConfigError:
        return ConfigError(f"{key}: {reason}", file=self.path, value=value)


_Check = Callable[[_Ctx, str, Any], Any]


def _type_name(value: object) -> str:
    return type(value).__name__


def _str(ctx: _Ctx, key: str, v: Any) -> str:
    if not isinstance(v, str):
        raise ctx.error(key, f"needs to be a string. {_type_name(v)} {v!r} was given instead.")
    return v


def _opt_str(ctx: _Ctx, key: str, v: Any) -> str | None:
    # An empty string means "not present", as the scenario file writes optional columns.
    v = _str(ctx, key, v)
    return v or None


def _int(ctx: _Ctx, key: str, v: Any) -> int:
    if isinstance(v, bool) or not isinstance(v, int):
        raise ctx.error(key, f"needs to be an integer. {_type_name(v)} {v!r} was given instead.")
    return v


def _nonneg_int(ctx: _Ctx, key: str, v: Any) -> int:
    v = _int(ctx, key, v)
    if v < 0:
        raise ctx.error(key, f"needs to be >= 0. {v!r} was given instead.")
    return v


def _pos_int(ctx: _Ctx, key: str, v: Any) -> int:
    v = _int(ctx, key, v)
    if v < 1:
        raise ctx.error(key, f"needs to be >= 1. {v!r} was given instead.")
    return v


def _float(ctx: _Ctx, key: str, v: Any) -> float:
    if isinstance(v, bool) or not isinstance(v, int | float):
        raise ctx.error(key, f"needs to be a number. {_type_name(v)} {v!r} was given instead.")
    return float(v)


def _nonneg_float(ctx: _Ctx, key: str, v: Any) -> float:
    v = _float(ctx, key, v)
    if v < 0:
        raise ctx.error(key, f"needs to be >= 0. {v!r} was given instead.")
    return v


def _pos_float(ctx: _Ctx, key: str, v: Any) -> float:
    v = _float(ctx, key, v)
    if not (v > 0 and math.isfinite(v)):
        raise ctx.error(key, f"needs to be a number > 0. {v!r} was given instead.")
    return v


def _share(ctx: _Ctx, key: str, v: Any) -> float:
    v = _float(ctx, key, v)
    if not 0 <= v <= 1:
        raise ctx.error(key, f"needs to be between 0 and 1. {v!r} was given instead.")
    return v


def _upper_quantile(ctx: _Ctx, key: str, v: Any) -> float:
    v = _float(ctx, key, v)
    if not 0.5 <= v < 1:
        raise ctx.error(
            key, f"needs to be an upper quantile, at least 0.5 and below 1. {v!r} was given."
        )
    return v


def _score(ctx: _Ctx, key: str, v: Any) -> float:
    v = _float(ctx, key, v)
    if not 0 <= v <= 100:
        raise ctx.error(key, f"needs to be between 0 and 100. {v!r} was given instead.")
    return v


def _one_of(choices: tuple) -> _Check:
    def check(ctx: _Ctx, key: str, v: Any) -> Any:
        if isinstance(v, bool) or v not in choices:
            name = key.rsplit(".", 1)[-1]
            raise ctx.error(key, f"'{name}' needs to be one of {choices}. {v!r} was given instead.")
        return v

    return check


def _list_of(item: _Check) -> _Check:
    def check(ctx: _Ctx, key: str, v: Any) -> tuple:
        if not isinstance(v, list):
            raise ctx.error(key, f"needs to be a list. {_type_name(v)} {v!r} was given instead.")
        return tuple(item(ctx, f"{key}[{i}]", x) for i, x in enumerate(v))

    return check


def _date(ctx: _Ctx, key: str, v: Any) -> _dt.date:
    if isinstance(v, _dt.datetime):
        return v.date()
    if isinstance(v, _dt.date):
        return v
    if isinstance(v, str):
        try:
            return _dt.date.fromisoformat(v)
        except ValueError:
            pass
    raise ctx.error(key, f"needs to be a date (YYYY-MM-DD). {v!r} was given instead.")


def _date_format(ctx: _Ctx, key: str, v: Any) -> str | None:
    v = _opt_str(ctx, key, v)
    if v is None:
        return None
    import pandas as pd

    try:
        pd.to_datetime(pd.Series(["2000-01-01"]), format=v, errors="coerce")
    except ValueError as exc:
        raise ctx.error(
            key, f"is not a date format (strftime codes such as %d/%m/%Y): {exc}", value=v
        ) from None
    if "%" not in v:
        raise ctx.error(key, "needs strftime codes such as %d/%m/%Y.", value=v)
    return v


def _crs(ctx: _Ctx, key: str, v: Any) -> str | None:
    v = _opt_str(ctx, key, v)
    if v is None:
        return None
    from pyproj import CRS
    from pyproj.exceptions import CRSError

    try:
        crs = CRS.from_user_input(v)
    except CRSError:
        raise ctx.error(key, f"is not a CRS pyproj understands. {v!r} was given instead.") from None
    if crs.is_geographic:
        raise ctx.error(key, f"needs to be a projected CRS in metres. {v!r} is geographic.")
    return v


def _existing_path(ctx: _Ctx, key: str, v: Any) -> Path | None:
    v = _opt_str(ctx, key, v)
    if v is None:
        return None
    p = (ctx.base / Path(v).expanduser()).resolve()
    if not p.exists():
        raise ctx.error(key, f"file not found: {p}", value=v)
    return p


def _dir_path(ctx: _Ctx, key: str, v: Any) -> Path:
    v = _str(ctx, key, v)
    return (ctx.base / Path(v).expanduser()).resolve()


# --- tables ----------------------------------------------------------------------------------
def _table(
    ctx: _Ctx,
    key: str,
    raw: Any,
    spec: Mapping[str, _Check],
    required: tuple[str, ...] = (),
) -> dict[str, Any]:
    """Check a TOML table against ``spec``: unknown keys and missing required keys by name."""
    if raw is None:
        raw = {}
    if not isinstance(raw, dict):
        raise ctx.error(key, f"needs to be a table. {_type_name(raw)} was given instead.")
    unknown = [k for k in raw if k not in spec]
    if unknown:
        where = f"{key}.{unknown[0]}" if key else unknown[0]
        raise ctx.error(where, f"unknown key. Known keys here: {', '.join(spec)}.")
    for k in required:
        if k not in raw:
            raise ctx.error(f"{key}.{k}" if key else k, "is required but missing.")
    return {k: spec[k](ctx, f"{key}.{k}" if key else k, v) for k, v in raw.items()}


def _region(ctx: _Ctx, raw: Any) -> RegionConfig:
    spec = {
        "name": _str,
        "crs": _crs,
        "calendar": _one_of(CALENDARS),
        "seed": _nonneg_int,
        "as_of_lag_days": _nonneg_int,
    }
    return RegionConfig(**_table(ctx, "region", raw, spec))


def _boundary(ctx: _Ctx, key: str, raw: Any) -> BoundarySource:
    spec = {
        "path": _existing_path,
        "layer": _opt_str,
        "id": _str,
        "name": _str,
        "country": _opt_str,
        "country_column": _opt_str,
        "level": _one_of(LEVELS),
        "level_column": _opt_str,
        "parent": _opt_str,
        "country_name": _opt_str,
    }
    d = _table(ctx, key, raw, spec, required=("path", "id", "name"))
    if (d.get("country") is None) == (d.get("country_column") is None):
        raise ctx.error(key, "needs exactly one of 'country' (a code) or 'country_column'.")
    if d.get("country") is not None:
        # The code as units.read_units reads it, so names and units agree.
        d["country"] = d["country"].strip().upper()
    if d.get("country_name") is not None:
        if d.get("country") is None:
            raise ctx.error(
                f"{key}.country_name", "needs a fixed 'country' code (not 'country_column')."
            )
        d["country_name"] = d["country_name"].strip()
    if d.get("level") is None and d.get("level_column") is None:
        raise ctx.error(key, "needs 'level' (1 or 2) or 'level_column'.")
    return BoundarySource(**d)


def _population(ctx: _Ctx, raw: Any) -> PopulationConfig:
    spec = {
        "raster": _existing_path,
        "table": _existing_path,
        "id_column": _str,
        "value_column": _str,
    }
    d = _table(ctx, "population", raw, spec)
    if d.get("raster") is not None and d.get("table") is not None:
        raise ctx.error("population", "give either 'raster' or 'table', not both.")
    return PopulationConfig(**d)


_COLUMN_SPEC: dict[str, _Check] = {f: _opt_str for f in ReportColumns.__dataclass_fields__}


def _report(ctx: _Ctx, key: str, raw: Any) -> ReportSpec:
    spec: dict[str, _Check] = {
        "name": _str,
        "path": _str,
        "country": _str,
        "shape": _one_of(SHAPES),
        "level": _one_of(LEVELS),
        "zeros": _one_of(ZEROS),
        "calendar": _one_of(CALENDARS),
        "week_format": _one_of(WEEK_FORMATS),
        "sheets": _str,
        "date_basis": _one_of(DATE_BASES),
        "date_format": _date_format,
        "received_date": _date,
        "died_values": _list_of(_str),
        "thousands": _one_of(THOUSANDS),
        "columns": lambda c, k, v: v,  # checked below, with its own key path
    }
    d = _table(ctx, key, raw, spec, required=("name", "path", "country"))
    col_raw = dict(d.pop("columns", None) or {})
    # The scenario file documents these two beside the line-list column names; accept them there.
    for k in ("died_values", "received_date"):
        if k in col_raw:
            d[k] = spec[k](ctx, f"{key}.columns.{k}", col_raw.pop(k))
    cols = ReportColumns(**_table(ctx, f"{key}.columns", col_raw, _COLUMN_SPEC))
    pattern = str(ctx.base / Path(d["path"]).expanduser())
    files = tuple(sorted(Path(p).resolve() for p in _glob.glob(pattern)))
    if not files:
        raise ctx.error(f"{key}.path", f"no file matches {pattern}", value=d["path"])
    shape = d.get("shape", "weekly")
    if shape == "linelist":
        basis = d.get("date_basis", "onset")
        need = "onset" if basis == "onset" else "report_date"
        if getattr(cols, need) is None:
            raise ctx.error(f"{key}.columns.{need}", f"is required for a line list by {basis}.")
    else:
        if cols.cases is None:
            raise ctx.error(f"{key}.columns.cases", "is required for a weekly table or workbook.")
        if cols.week is None:
            raise ctx.error(f"{key}.columns.week", "is required for a weekly table or workbook.")
        if d.get("week_format") == "year-week" and cols.year is None:
            raise ctx.error(f"{key}.columns.year", "is required when week_format = 'year-week'.")
    if cols.place is None and cols.code is None:
        raise ctx.error(f"{key}.columns.place", "give 'place' or 'code' (or both).")
    if cols.received is None and d.get("received_date") is None and cols.report_date is None:
        raise ctx.error(
            f"{key}.columns.received",
            "is required unless 'received_date' (or a line list's 'report_date') is given.",
        )
    d["country"] = d["country"].strip().upper()
    return ReportSpec(
        path=pattern, files=files, columns=cols, **{k: v for k, v in d.items() if k != "path"}
    )


def _matching(ctx: _Ctx, raw: Any) -> MatchingConfig:
    spec = {
        "aliases": _existing_path,
        "fuzzy_score": _score,
        "fuzzy_margin": _score,
        "strip_words": _list_of(_str),
    }
    return MatchingConfig(**_table(ctx, "matching", raw, spec))


def _checks(ctx: _Ctx, raw: Any) -> ChecksConfig:
    spec = {
        "deaths_over_cases": _one_of(DEATHS_OVER_CASES),
        "same_day_conflict": _one_of(SAME_DAY_CONFLICTS),
        "earliest_date": _date,
        "latest_date": _date,
        "max_rejected_share": _share,
    }
    d = _table(ctx, "checks", raw, spec)
    if d.get("earliest_date") and d.get("latest_date") and d["earliest_date"] > d["latest_date"]:
        raise ctx.error("checks.latest_date", "needs to be on or after checks.earliest_date.")
    return ChecksConfig(**d)


def _graph(ctx: _Ctx, raw: Any) -> GraphConfig:
    spec = {
        "tolerance_m": _nonneg_float,
        "min_shared_m": _nonneg_float,
        "links": _existing_path,
        "weighting": _one_of(WEIGHTINGS),
    }
    return GraphConfig(**_table(ctx, "graph", raw, spec))


def _analysis(ctx: _Ctx, raw: Any) -> AnalysisConfig:
    def fdr(c: _Ctx, k: str, v: Any) -> float:
        v = _float(c, k, v)
        if not 0 < v < 1:
            raise c.error(k, f"needs to be between 0 and 1 (exclusive). {v!r} was given instead.")
        return v

    spec = {
        "permutations": _pos_int,
        "fdr": fdr,
        "windows_weeks": _list_of(_pos_int),
        "reporting_delay_weeks": _nonneg_int,
        "min_cases_cfr": _nonneg_int,
    }
    return AnalysisConfig(**_table(ctx, "analysis", raw, spec))


def _risk(ctx: _Ctx, raw: Any) -> RiskConfig:
    def penalty(c: _Ctx, k: str, v: Any) -> float:
        v = _nonneg_float(c, k, v)
        if not math.isfinite(v):
            raise c.error(k, f"needs to be a finite number >= 0. {v!r} was given instead.")
        return v

    spec = {
        "horizon_weeks": _pos_int,
        "silent_weeks": _pos_int,
        "top_k": _pos_int,
        "min_events": _nonneg_int,
        "recent_weeks": _pos_int,
        # TOML has no null: 0 switches re-introduction off, as leaving the key out does.
        "reintroduction_weeks": lambda c, k, v: _nonneg_int(c, k, v) or None,
        "penalty": penalty,
        "covariates": _covariates,
    }
    return RiskConfig(**_table(ctx, "risk", raw, spec))


_COVARIATE_NAME = re.compile(r"[a-z][a-z0-9_]{0,39}")


def _covariate_name(ctx: _Ctx, key: str, v: Any) -> str:
    v = _str(ctx, key, v)
    if not _COVARIATE_NAME.fullmatch(v):
        raise ctx.error(
            key,
            "needs to be lower-case letters, digits and '_', starting with a letter "
            f"(at most 40). {v!r} was given instead.",
        )
    if v in FEATURES + EXTRA_FEATURES:
        raise ctx.error(key, f"is the name of a built-in feature; choose another. {v!r} given.")
    return v


def _covariate(ctx: _Ctx, key: str, raw: Any) -> RiskCovariate:
    spec = {
        "name": _covariate_name,
        "raster": _existing_path,
        "table": _existing_path,
        "id_column": _str,
        "value_column": _str,
    }
    d = _table(ctx, key, raw, spec, required=("name",))
    if (d.get("raster") is None) == (d.get("table") is None):
        raise ctx.error(key, "needs exactly one of 'raster' or 'table'.")
    if d.get("raster") is not None:
        extra = [k for k in ("id_column", "value_column") if k in d]
        if extra:
            raise ctx.error(f"{key}.{extra[0]}", "belongs to a 'table' covariate, not a raster.")
    return RiskCovariate(**d)


def _covariates(ctx: _Ctx, key: str, v: Any) -> tuple[RiskCovariate, ...]:
    if not isinstance(v, list):
        raise ctx.error(key, f"needs to be an array of tables ([[{key}]]).")
    out = tuple(_covariate(ctx, f"{key}[{i}]", t) for i, t in enumerate(v))
    names = [c.name for c in out]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ctx.error(key, f"covariate names must be unique; {dup} repeated.")
    return out


def _supplies(ctx: _Ctx, raw: Any) -> SuppliesConfig:
    rate_spec = {"low": _share, "mid": _share, "high": _share, "severe_share": _share}

    def rates(c: _Ctx, k: str, v: Any) -> dict:
        return _table(c, k, v, rate_spec)

    spec = {
        "items": _existing_path,
        "depots": _existing_path,
        # k = 0 opens no new depot: units are assigned to the existing ones only.
        "k": _nonneg_int,
        "reach_km": _pos_float,
        "planning_attack_rate": rates,
        "severe_share": _share,
        "forecast_quantile": _upper_quantile,
    }
    d = _table(ctx, "supplies", raw, spec)
    r = d.pop("planning_attack_rate", {})
    if "severe_share" in r:
        d.setdefault("severe_share", r.pop("severe_share"))
    plan = PlanningRates(**r)
    if not plan.low <= plan.mid <= plan.high:
        raise ctx.error(
            "supplies.planning_attack_rate",
            "needs low <= mid <= high.",
            value=(plan.low, plan.mid, plan.high),
        )
    return SuppliesConfig(planning_attack_rate=plan, **d)


def _output(ctx: _Ctx, raw: Any) -> OutputConfig:
    spec = {"dir": _dir_path, "paper": _one_of(tuple(PAPER_SIZES))}
    return OutputConfig(**_table(ctx, "output", raw, spec))


def _scheduler(ctx: _Ctx, key: str, v: Any) -> str:
    # The pattern lives with the executor (marchland.compute, below config in the layering).
    from ..compute import SCHEDULER_PATTERN

    s = _str(ctx, key, v)
    if not SCHEDULER_PATTERN.match(s):
        raise ctx.error(key, "needs a Dask scheduler address such as 'tcp://host:8786'.", value=v)
    return s


def _compute(ctx: _Ctx, raw: Any) -> ComputeConfig:
    spec = {"scheduler": _scheduler, "workers": _pos_int}
    return ComputeConfig(**_table(ctx, "compute", raw, spec))


def from_dict(raw: dict, path: Path | None, base: Path) -> Config:
    ctx = _Ctx(path, base)
    unknown = [k for k in raw if k not in SECTIONS]
    if unknown:
        raise ctx.error(unknown[0], f"unknown section. Known sections: {', '.join(SECTIONS)}.")

    def array(name: str, build: Callable[[_Ctx, str, Any], Any]) -> tuple:
        items = raw.get(name, [])
        if not isinstance(items, list):
            raise ctx.error(name, f"needs to be an array of tables ([[{name}]]).")
        return tuple(build(ctx, f"{name}[{i}]", t) for i, t in enumerate(items))

    region = _region(ctx, raw.get("region"))
    boundaries = array("boundaries", _boundary)
    if not boundaries:
        raise ctx.error("boundaries", "needs at least one [[boundaries]] table.")
    named: dict[str, str] = {}
    for i, b in enumerate(boundaries):
        if b.country_name is None:
            continue
        first = named.setdefault(b.country, b.country_name)
        if first != b.country_name:
            raise ctx.error(
                f"boundaries[{i}].country_name",
                f"country {b.country} is named {first!r} in an earlier [[boundaries]] table; "
                f"{b.country_name!r} was given here. Give one name per country code.",
            )
    reports = array("reports", _report)
    names = [r.name for r in reports]
    dup = sorted({n for n in names if names.count(n) > 1})
    if dup:
        raise ctx.error("reports", f"report names must be unique; {dup} repeated.")
    return Config(
        path=path,
        region=region,
        boundaries=boundaries,
        population=_population(ctx, raw.get("population")),
        reports=reports,
        matching=_matching(ctx, raw.get("matching")),
        checks=_checks(ctx, raw.get("checks")),
        graph=_graph(ctx, raw.get("graph")),
        analysis=_analysis(ctx, raw.get("analysis")),
        risk=_risk(ctx, raw.get("risk")),
        supplies=_supplies(ctx, raw.get("supplies")),
        output=_output(ctx, raw.get("output", {"dir": "out"})),
        compute=_compute(ctx, raw.get("compute")),
    )
