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
import shutil
import tempfile
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

from ..errors import InputError

if TYPE_CHECKING:  # pragma: no cover
    from .monthly import MonthResult

_PARTIAL = ".partial-"
_OLD = ".replaced-"
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
    "mapclassify",
    "matplotlib",
    "rasterio",
    "exactextract",
    "rapidfuzz",
    "openpyxl",
)


def check_destination(out_dir: str | os.PathLike[str], month: str, *, overwrite: bool) -> Path:
    """Return the bundle folder for ``month``; InputError if it exists and overwrite is off.

    Parameters
    ----------
    out_dir : path-like
        Folder holding the monthly bundles.
    month : str
        ``"YYYY-MM"``.
    overwrite : bool

    Returns
    -------
    pathlib.Path
        ``out_dir / month``.

    Examples
    --------
    >>> import tempfile
    >>> d = tempfile.mkdtemp()
    >>> check_destination(d, "2026-10", overwrite=False).name
    '2026-10'
    """
    dest = Path(out_dir) / month
    if dest.exists() and not overwrite:
        raise InputError(
            "a bundle for this month exists already; pass --overwrite (overwrite=True) to "
            "replace it",
            file=dest,
        )
    if dest.exists() and not dest.is_dir():
        raise InputError("exists and is not a folder", file=dest)
    return dest


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
    out = Path(out_dir)
    dest = check_destination(out, result.month, overwrite=overwrite)
    out.mkdir(parents=True, exist_ok=True)
    _remove_stale(out, result.month)
    tmp = Path(tempfile.mkdtemp(prefix=f".{result.month}{_PARTIAL}{os.getpid()}-", dir=out))
    try:
        _write_all(result, tmp, progress)
        os.chmod(tmp, 0o755)  # mkdtemp makes it private; a bundle is meant to be shared
    except BaseException:
        shutil.rmtree(tmp, ignore_errors=True)
        raise
    if dest.exists():
        old = Path(tempfile.mkdtemp(prefix=f".{result.month}{_OLD}", dir=out))
        old.rmdir()
        os.rename(dest, old)
        try:
            os.rename(tmp, dest)
        except BaseException:
            os.rename(old, dest)
            shutil.rmtree(tmp, ignore_errors=True)
            raise
        shutil.rmtree(old, ignore_errors=True)
    else:
        os.rename(tmp, dest)
    return dest


def _remove_stale(out: Path, month: str) -> None:
    """Remove partial folders of this month left by a process that no longer runs."""
    for p in out.glob(f".{month}{_PARTIAL}*"):
        try:
            pid = int(p.name[len(f".{month}{_PARTIAL}") :].split("-")[0])
        except ValueError:
            continue
        if pid != os.getpid() and not _alive(pid):
            shutil.rmtree(p, ignore_errors=True)


def _alive(pid: int) -> bool:
    try:
        os.kill(pid, 0)
    except ProcessLookupError:
        return False
    except PermissionError:
        return True
    return True


# --- the writing, step by step ----------------------------------------------------------------
def _write_all(
    result: MonthResult, root: Path, progress: Callable[[str, int, int], None] | None = None
) -> None:
    timings: dict[str, float] = {}

    def timed(name: str, fn: Callable[[], Any]) -> Any:
        t0 = time.perf_counter()
        value = fn()
        timings[name] = round(time.perf_counter() - t0, 3)
        return value

    tables = timed("bundle: tables", lambda: _write_tables(result, root))
    timed("bundle: layers", lambda: _write_layers(result, root / "layers.gpkg"))
    token = _PROGRESS.set(progress)
    try:
        figures = timed("bundle: maps", lambda: _write_figures(result, root))
    finally:
        _PROGRESS.reset(token)
    timed("bundle: report", lambda: _write_report(result, root, figures, tables))
    _write_manifest(result, root, timings)


def _flat(df: pd.DataFrame) -> pd.DataFrame:
    """Return a copy ready for CSV/GeoPackage: flat columns, lists joined, no geometry."""
    out = df.copy()
    if isinstance(out.columns, pd.MultiIndex):
        out.columns = ["_".join(str(c) for c in col if str(c)) for col in out.columns]
    for c in out.columns:
        s = out[c]
        if s.dtype == object:
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


def _csv(df: pd.DataFrame, path: Path, *, index: bool = True) -> None:
    df = _flat(df)
    # Fixed float format and line endings: same inputs and seed give the same bytes.
    df.to_csv(path, index=index, float_format="%.10g", lineterminator="\n", date_format="%Y-%m-%d")


def _tables(result: MonthResult) -> dict[str, pd.DataFrame | None]:
    """Name -> table for tables/*.csv (None: the step did not run)."""
    units = result.units
    t: dict[str, Any] = {
        "units": _flat(units.drop(columns="geometry")).sort_index(),
        "weekly": result.weekly,
        "rates": result.rates,
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
        "supply_totals": result.supply_totals,
        "supply_totals_by_depot": result.supply_totals_by_depot,
        "depots": None
        if result.depots is None
        else pd.DataFrame(result.depots.drop(columns="geometry")),
        "depot_assignment": result.depot_assignment,
        "completeness": result.completeness,
        "completeness_by_country": result.completeness_by_country,
        "matches": result.matches,
        "accounting": result.accounting if isinstance(result.accounting, pd.DataFrame) else None,
        "edges": None
        if result.graph is None
        else result.graph.edges.sort_values(["focal", "neighbor"]),
    }
    return t


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


def _write_layers(result: MonthResult, path: Path) -> None:
    units = result.units
    layers: dict[str, Any] = {
        "units": units.assign(
            **{c: _flat(units[[c]])[c] for c in units.columns if c != "geometry"}
        ),
        "rates": _geo(units, result.rates),
        "hotspots": _geo(units, result.hotspots),
        "spread": _geo(units, result.fronts),
        "fronts": result.front_outlines,
        "risk": _geo(units, result.risk),
        "priorities": _geo(units, result.priorities),
        "depots": result.depots,
        "edges": result.edges,
    }
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
    from matplotlib.backends.backend_pdf import PdfPages

    from ..figures.maps import save_figure
    from ._figures import cover_page, draw_figures

    progress = _PROGRESS.get()
    mdir = root / "maps"
    mdir.mkdir()
    figures: dict[str, dict[str, Any]] = {}
    with PdfPages(
        root / "atlas.pdf",
        metadata={
            "Title": f"marchland atlas {result.month}",
            "Creator": "marchland",
            "CreationDate": None,
        },
    ) as pdf:
        # The figures share the base map's Paths, so holding them all until the cover page
        # (which lists every caption) is cheap; each is emptied once saved, so only one
        # rendering's buffers are alive at a time.
        entries = list(draw_figures(result))
        pdf.savefig(cover_page(result, [caption for _, _, caption in entries]))
        for i, (name, fig, caption) in enumerate(entries):
            path = mdir / f"{name}.png"
            save_figure(fig, path, pdf=pdf)
            fig.clear()
            entries[i] = (name, None, caption)
            figures[name] = {"path": path, "caption": caption}
            if progress is not None:
                progress("maps and atlas pages", i + 1, len(entries))
    return figures


def _write_report(
    result: MonthResult, root: Path, figures: Mapping[str, Any], tables: Mapping[str, pd.DataFrame]
) -> None:
    from ._report import render_report

    html = render_report(result, figures)
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


def _write_manifest(result: MonthResult, root: Path, bundle_timings: Mapping[str, float]) -> None:
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
        "steps_not_run": dict(result.absent),
        "warnings": list(result.warnings),
        "files": files,
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
