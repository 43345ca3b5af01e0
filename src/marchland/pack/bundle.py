"""The monthly output folder: layers, tables, maps, atlas, report and manifest, written atomically.

:func:`write_month` writes ``OUT/YYYY-MM/`` from a :class:`~marchland.pack.monthly.MonthResult`::

    layers.gpkg      one layer per result: units rates hotspots spread fronts risk priorities
                     depots edges (those that were computed)
    layers/*.parquet the same layers as GeoParquet, one file each
    tables/*.csv     every table of the run, sorted by unit id (or area), same bytes for the
                     same inputs and seed
    maps/*.png       the maps and epi curves at 200 dpi
    atlas.pdf        the same figures, one per page
    rejects.csv      every input row that was not used, with its reason
    manifest.json    inputs with sha256, config, package versions, seed, row accounting,
                     timings per step, files written
    report.html      one self-contained page (images embedded, no script, no network)

Everything is written into a hidden temporary folder beside the destination and renamed into
place only once complete. An existing month is replaced only with ``overwrite=True``, and only
after the new bundle is complete; a failure at any point leaves the previous bundle as it was
and removes the partial folder.
"""

from __future__ import annotations

import hashlib
import json
import os
import platform
import time
from collections.abc import Callable, Mapping
from contextvars import ContextVar
from dataclasses import asdict, is_dataclass
from datetime import UTC, datetime
from importlib import metadata
from pathlib import Path
from typing import TYPE_CHECKING, Any

import numpy as np
import pandas as pd
from pandas.api.types import infer_dtype

from . import _outlooksteps as _outlook
from ._folder import replace_atomically

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

_VERSIONED = (
    "marchland",
    "numpy",
    "pandas",
    "geopandas",
    "shapely",
    "pyproj",
    "pyogrio",
    "libpysal",
    "esda",
    "scipy",
    "statsmodels",
    "spopt",
    "matplotlib",
    "rasterio",
    "exactextract",
    "rapidfuzz",
    "openpyxl",
)


#: Space a bundle needs at least when there is no previous one to measure (a demo month's
#: bundle is about 15 MB).


def write_month(
    result: MonthResult,
    out_dir: str | os.PathLike[str],
    *,
    overwrite: bool = False,
    progress: Callable[[str, int, int], None] | None = None,
) -> Path:
    """Write the month's bundle atomically and return its folder.

    Parameters
    ----------
    result : MonthResult
        From :func:`marchland.pack.monthly.run_month`.
    out_dir : path-like
        The bundle goes to ``out_dir / result.month``; the folder is made if missing.
    overwrite : bool
        Replace an existing bundle of the same month (only once the new one is complete).
    progress : callable, optional
        Called as ``progress(task, done, total)`` while the figures are drawn (the long part),
        e.g. to show a progress bar.

    Returns
    -------
    pathlib.Path
        The bundle folder.

    Raises
    ------
    InputError
        The month's folder exists and ``overwrite`` is False.

    Examples
    --------
    An existing month is refused unless ``overwrite`` is set (nothing is touched):

    >>> import pathlib, tempfile, types
    >>> out = pathlib.Path(tempfile.mkdtemp())
    >>> (out / "2026-10").mkdir()
    >>> write_month(types.SimpleNamespace(month="2026-10"), out)
    Traceback (most recent call last):
    marchland.errors.InputError: ...2026-10: a bundle for this month exists already; ...
    """
    return replace_atomically(
        out_dir,
        result.month,
        lambda tmp: _write_all(result, tmp, progress),
        overwrite=overwrite,
    )


# --- the writing, step by step ----------------------------------------------------------------
def _write_all(
    result: MonthResult, root: Path, progress: Callable[[str, int, int], None] | None = None
) -> None:
    from ..compute import one_blas_thread

    with one_blas_thread():  # as in the analysis: processes, not BLAS threads, share the CPUs
        _write_steps(result, root, progress)


def _write_steps(
    result: MonthResult, root: Path, progress: Callable[[str, int, int], None] | None
) -> None:
    timings: dict[str, float] = {}

    def timed(name: str, fn: Callable[[], Any]) -> Any:
        t0 = time.perf_counter()
        value = fn()
        timings[name] = round(time.perf_counter() - t0, 3)
        return value

    from ..compute import in_background
    from ._drawing import figure_workers

    def alongside_figures() -> tuple[dict[str, float], str]:
        from ._webmap import map_section

        own: dict[str, float] = {}
        made = {}
        for name, make in (
            ("bundle: tables", lambda: _write_tables(result, root)),
            ("bundle: layers", lambda: _write_layers(result, root / "layers.gpkg")),
            ("bundle: interactive map", lambda: map_section(result)),
        ):
            t0 = time.perf_counter()
            made[name] = make()
            own[name] = round(time.perf_counter() - t0, 3)
        return own, made["bundle: interactive map"]

    # Tables, layers and the report's interactive map (which needs no figure) are made by a
    # forked copy while the figures are drawn (in one process, in turn, where there is no
    # second CPU or forking is unsafe).
    side = timed(
        "bundle: start", lambda: in_background(alongside_figures, workers=figure_workers(result))
    )
    token = _PROGRESS.set(progress)
    try:
        figures = timed("bundle: maps", lambda: _write_figures(result, root))
    finally:
        _PROGRESS.reset(token)
        if "bundle: maps" not in timings:
            side.cancel()
    alongside, map_html = timed("bundle: tables, layers, map", side.result)
    timed("bundle: report", lambda: _write_report(result, root, figures, map_html))
    _write_manifest(result, root, timings, alongside)


# What pandas.api.types.infer_dtype calls a column of one scalar kind (never a list inside).
_ONE_KIND = frozenset(
    {"string", "empty", "integer", "floating", "boolean", "datetime", "datetime64", "date"}
)


def _flat(df: pd.DataFrame) -> pd.DataFrame:
    """Return a copy ready for CSV/GeoPackage: flat columns, lists joined, no geometry."""
    out = df.copy()
    if isinstance(out.columns, pd.MultiIndex):
        out.columns = ["_".join(str(c) for c in col if str(c)) for col in out.columns]
    for c in out.columns:
        s = out[c]
        # Only a column pandas cannot read as one scalar kind (C speed) may hold lists: the
        # check per cell was a Python call for each of 10,000 units in every text column.
        if s.dtype == object and infer_dtype(s, skipna=True) not in _ONE_KIND:
            if s.map(lambda v: isinstance(v, (list, tuple, set, np.ndarray))).any():
                out[c] = s.map(
                    lambda v: (
                        "; ".join(map(str, v))
                        if isinstance(v, (list, tuple, set, np.ndarray))
                        else v
                    )
                )
        elif isinstance(s.dtype, pd.DatetimeTZDtype):
            out[c] = s.dt.tz_localize(None)
        elif isinstance(s.dtype, pd.PeriodDtype):
            out[c] = s.astype(str)
    if "geometry" in out.columns:
        out = out.drop(columns="geometry")
    return out


# Text a spreadsheet would run as a formula (OWASP "CSV injection"): such cells get a leading
# single quote in CSV files only; the GeoPackage and the report keep the true text.
_FORMULA_START = ("=", "+", "-", "@", "\t", "\r")


def neutralise(values: pd.Series | pd.Index) -> pd.Series | pd.Index:
    """Prefix a single quote to text cells that a spreadsheet would read as a formula.

    Examples
    --------
    >>> neutralise(pd.Series(["=1+1", "Ast", 3, "-2", "@x"])).tolist()
    ["'=1+1", 'Ast', 3, "'-2", "'@x"]
    """

    def fix(v: object) -> object:
        return "'" + v if isinstance(v, str) and v.startswith(_FORMULA_START) else v

    if isinstance(values, pd.MultiIndex):
        return values.set_levels([neutralise(lv) for lv in values.levels])
    if values.dtype == object or isinstance(values.dtype, pd.StringDtype):
        return values.map(fix)
    return values


def _csv(df: pd.DataFrame, path: Path, *, index: bool = True) -> None:
    df = _flat(df)
    df = df.apply(neutralise) if len(df.columns) else df
    df.index = neutralise(df.index)
    # Fixed float format and line endings: same inputs and seed give the same bytes.
    df.to_csv(path, index=index, float_format="%.10g", lineterminator="\n", date_format="%Y-%m-%d")


def _tables(result: MonthResult) -> dict[str, pd.DataFrame | None]:
    """Name -> table for tables/*.csv (None: the step did not run)."""
    units = _portable(result.units, result)
    t: dict[str, Any] = {
        "units": _flat(units.drop(columns="geometry")).sort_index(),
        "weekly": result.weekly,
        "rates": _rates_with_adjusted(result),
        "rates_history": result.rates_history,
        "rates_by_area": result.rates_by_area,
        "hotspots": result.hotspots,
        "global_moran": None
        if result.global_moran is None
        else pd.DataFrame([result.global_moran]),
        "spread": result.fronts,
        "fronts": None
        if result.front_outlines is None
        else pd.DataFrame(result.front_outlines.drop(columns="geometry")),
        "velocity": None if result.velocity is None else result.velocity.by_method,
        "velocity_by_group": None if result.velocity is None else result.velocity.by_group,
        "introductions": result.introductions,
        "introductions_by_border": result.introductions_by_border,
        "risk": result.risk,
        "backtest": result.backtest,
        "backtest_by_country": result.backtest_by_country,
        "priorities": result.priorities,
        "clusters": None if result.clusters is None else _outlook.clusters_table(result.clusters),
        "forecast": None
        if result.forecast is None
        else _outlook.forecast_table(result.forecast, result.units),
        "forecast_by_area": result.forecast_areas,
        "forecast_backtest": result.forecast_backtest,
        "supply_totals": result.supply_totals,
        "supply_totals_by_depot": result.supply_totals_by_depot,
        "supplies_affected": result.supplies_affected,
        "depots": None
        if result.depots is None
        else pd.DataFrame(result.depots.drop(columns="geometry")),
        "depot_assignment": result.depot_assignment,
        "nowcast": result.nowcast,
        "rates_adjusted_by_area": result.month_adjusted_by_area,
        "completeness": result.completeness,
        "completeness_by_country": result.completeness_by_country,
        "matches": result.matches,
        "accounting": result.accounting if isinstance(result.accounting, pd.DataFrame) else None,
        "edges": None
        if result.graph is None
        else result.graph.edges.sort_values(["focal", "neighbor"]),
    }
    return t


def _rates_with_adjusted(result: MonthResult) -> pd.DataFrame | None:
    """Return the rates table with the month's nowcast-adjusted cases and rate beside it."""
    if result.rates is None or result.month_adjusted is None:
        return result.rates
    adj = result.month_adjusted[["adjusted_cases", "adjusted_rate"]].add_prefix("month_")
    return result.rates.join(adj, how="left")


def _write_tables(result: MonthResult, root: Path) -> dict[str, pd.DataFrame]:
    tdir = root / "tables"
    tdir.mkdir()
    written = {}
    for name, df in _tables(result).items():
        if df is None:
            continue
        keep_index = not isinstance(df.index, pd.RangeIndex)
        _csv(df, tdir / f"{name}.csv", index=keep_index)
        written[name] = df
    rejects = (
        result.rejects
        if result.rejects is not None
        else pd.DataFrame(columns=["source", "row", "column", "value", "reason", "candidates"])
    )
    _csv(rejects, root / "rejects.csv", index=False)
    return written


def _geo(units: Any, table: pd.DataFrame | None) -> Any:
    """Units' geometry joined to a unit-indexed table (rows of the table only)."""
    import geopandas as gpd

    if table is None:
        return None
    flat = _flat(table)
    # Name and country come from the units (one spelling everywhere); the rest is the table's.
    flat = flat.drop(columns=[c for c in ("name", "country") if c in flat.columns])
    ids = flat.index[flat.index.isin(units.index)]  # the table's own order (e.g. by rank)
    joined = units.loc[ids, ["name", "country", "geometry"]].join(flat, how="inner")
    return gpd.GeoDataFrame(joined, geometry="geometry", crs=units.crs)


def _portable(units: Any, result: MonthResult) -> Any:
    """Units with boundary file paths relative to the config's folder (no machine paths)."""
    if "source" not in units.columns or getattr(result, "config", None) is None:
        return units
    base = result.config.base_dir
    # Once per boundary file, not per unit: path arithmetic for each of 10,000 units was
    # most of writing the units layer (benchmarks/bench_cores.py).
    src = units["source"]
    rel = {p: _rel(Path(p), base) for p in src.unique() if isinstance(p, str)}
    # A dict lookup, not a Python call per unit; the column keeps its text dtype, so the
    # layer writer has no object column to scan (together ~25 ms of ~300 at 10,000 units).
    return units.assign(source=src.map(rel).where(src.isin(list(rel)), src))


def _write_layers(result: MonthResult, path: Path) -> None:
    units = _portable(result.units, result)
    layers: dict[str, Any] = {
        "units": units,  # flattened with every layer in _write_layer_files
        "rates": _geo(units, result.rates),
        "hotspots": _geo(units, result.hotspots),
        "spread": _geo(units, result.fronts),
        "fronts": result.front_outlines,
        "risk": _geo(units, result.risk),
        "priorities": _geo(units, result.priorities),
        "depots": result.depots,
        "edges": result.edges,
        "clusters": None
        if result.clusters is None
        else _outlook.clusters_layer(result.clusters, result.units),
    }
    import pyogrio

    # GDAL stamps each GeoPackage table with the time of writing (gpkg_contents.last_change);
    # a fixed stamp from the as-of date makes a rerun byte-identical (GDAL's documented
    # OGR_CURRENT_DATE configuration option).
    before = pyogrio.get_gdal_config_option("OGR_CURRENT_DATE")
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": f"{result.as_of:%Y-%m-%d}T00:00:00Z"})
    try:
        _write_layer_files(layers, path)
    finally:
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": before})


def _write_layer_files(layers: Mapping[str, Any], path: Path) -> None:
    for name, layer in layers.items():
        if layer is None or len(layer) == 0:
            continue
        import geopandas as gpd

        geo = layer.geometry
        attrs = _flat(pd.DataFrame(layer.drop(columns=layer.geometry.name)))
        attrs = attrs if isinstance(attrs.index, pd.RangeIndex) else attrs.reset_index()
        gdf = gpd.GeoDataFrame(attrs, geometry=geo.to_numpy(), crs=layer.crs)
        gdf.to_file(path, layer=name, driver="GPKG", engine="pyogrio")
        # The same layer as GeoParquet (one file per layer): what columnar tools and cloud
        # stores read quickest.
        pq = path.parent / "layers"
        pq.mkdir(exist_ok=True)
        gdf.to_parquet(pq / f"{name}.parquet", index=False)


# The caller's progress callback while the figures are written (kept out of _write_figures'
# signature, which tests replace with a stub).
_PROGRESS: ContextVar[Callable[[str, int, int], None] | None] = ContextVar(
    "marchland_bundle_progress", default=None
)


def _write_figures(result: MonthResult, root: Path) -> dict[str, dict[str, Any]]:
    from ._drawing import figure_workers, write_figures

    return write_figures(result, root, workers=figure_workers(result), progress=_PROGRESS.get())


def _write_report(
    result: MonthResult, root: Path, figures: Mapping[str, Any], map_html: str | None = None
) -> None:
    from ._report import render_report

    html = render_report(result, figures, map_html=map_html)
    (root / "report.html").write_text(html, encoding="utf-8")


# --- manifest ---------------------------------------------------------------------------------
def sha256(path: str | os.PathLike[str]) -> str:
    """Return the hex sha256 of a file, read in blocks.

    Examples
    --------
    >>> import pathlib, tempfile
    >>> f = pathlib.Path(tempfile.mkdtemp()) / "a.txt"
    >>> _ = f.write_bytes(b"abc")
    >>> sha256(f)[:16]  # FIPS 180-2's "abc" example digest
    'ba7816bf8f01cfea'
    """
    h = hashlib.sha256()
    with open(path, "rb") as f:
        for block in iter(lambda: f.read(1 << 20), b""):
            h.update(block)
    return h.hexdigest()


def _rel(path: Path, base: Path) -> str:
    try:
        return os.path.relpath(path, base)
    except ValueError:  # another drive (Windows)
        return str(path)


def _jsonable(obj: Any) -> Any:
    if isinstance(obj, Path):
        return str(obj)
    if is_dataclass(obj) and not isinstance(obj, type):
        return {k: _jsonable(v) for k, v in asdict(obj).items()}
    if isinstance(obj, Mapping):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (list, tuple, set)):
        return [_jsonable(v) for v in obj]
    if isinstance(obj, pd.DataFrame):
        flat = _flat(obj)
        if not isinstance(flat.index, pd.RangeIndex):
            flat = flat.reset_index()
        return [_jsonable(r) for r in flat.to_dict(orient="records")]
    if isinstance(obj, pd.Series):
        return {str(k): _jsonable(v) for k, v in obj.items()}
    if isinstance(obj, (pd.Timestamp, datetime)):
        return obj.isoformat()
    if hasattr(obj, "isoformat"):
        return obj.isoformat()
    if isinstance(obj, (np.integer,)):
        return int(obj)
    if isinstance(obj, (np.floating, float)):
        return None if not np.isfinite(obj) else float(obj)
    if isinstance(obj, (np.bool_,)):
        return bool(obj)
    if obj is pd.NA or obj is pd.NaT:
        return None
    if isinstance(obj, (str, int, bool)) or obj is None:
        return obj
    return str(obj)


def _versions() -> dict[str, str]:
    out = {"python": platform.python_version()}
    for name in _VERSIONED:
        try:
            out[name] = metadata.version(name)
        except metadata.PackageNotFoundError:
            continue
    return out


#: Files of a bundle holding a value of the moment of the run, and why.
VARIES_BETWEEN_RUNS = {
    "manifest.json": "the time the bundle was made (created_utc) and the seconds each step "
    "took (timings_s, alongside_s)",
}


def _write_manifest(
    result: MonthResult,
    root: Path,
    bundle_timings: Mapping[str, float],
    bundle_alongside: Mapping[str, float] | None = None,
) -> None:
    # The manifest times itself up to its own writing (hashing every file is most of it).
    started = time.perf_counter()
    cfg = result.config
    base = cfg.base_dir
    inputs = [
        {"path": _rel(p, base), "sha256": sha256(p), "bytes": p.stat().st_size}
        for p in result.inputs
    ]
    files = [
        {"path": p.relative_to(root).as_posix(), "sha256": sha256(p), "bytes": p.stat().st_size}
        for p in sorted(root.rglob("*"))
        if p.is_file()
    ]
    settings = _jsonable(cfg)
    settings.pop("path", None)
    manifest = {
        "marchland": _versions().get("marchland"),
        "month": result.month,
        "as_of": f"{result.as_of:%Y-%m-%d}",
        # Report weeks after this date were rejected as "future-week".
        "run_date": None if result.run_date is None else f"{result.run_date:%Y-%m-%d}",
        "created_utc": datetime.now(UTC).strftime("%Y-%m-%dT%H:%M:%SZ"),
        "seed": result.seed,
        "config": {
            "path": None if cfg.path is None else _rel(Path(cfg.path).resolve(), base),
            "sha256": None if cfg.path is None else sha256(cfg.path),
            "settings": _relative_paths(settings, base),
        },
        "inputs": inputs,
        "versions": _versions(),
        "accounting": _jsonable(result.accounting),
        "timings_s": {
            **result.timings,
            **bundle_timings,
            "bundle: manifest": round(time.perf_counter() - started, 3),
        },
        # Steps that ran in a forked copy while later steps ran here: their own seconds (the
        # time they were waited for is in timings_s, which adds up to the run).
        "alongside_s": {
            **dict(getattr(result, "alongside", {}) or {}),
            **dict(bundle_alongside or {}),
        },
        "steps_not_run": dict(result.absent),
        "warnings": list(result.warnings),
        "files": files,
        # Every other file is byte-identical on a rerun with the same inputs and as-of date.
        "varies_between_runs": dict(VARIES_BETWEEN_RUNS),
    }
    (root / "manifest.json").write_text(
        json.dumps(manifest, indent=2, ensure_ascii=False) + "\n", encoding="utf-8"
    )


def _relative_paths(obj: Any, base: Path) -> Any:
    """Absolute paths in the settings, shown relative to the config's folder."""
    if isinstance(obj, dict):
        return {k: _relative_paths(v, base) for k, v in obj.items()}
    if isinstance(obj, list):
        return [_relative_paths(v, base) for v in obj]
    if isinstance(obj, str) and os.path.isabs(obj):
        return _rel(Path(obj), base)
    return obj
