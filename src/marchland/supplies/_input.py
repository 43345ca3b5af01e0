"""Input checks behind :mod:`marchland.supplies.plan`: item tables, depot sites, candidates.

Each check raises :class:`~marchland.errors.InputError` naming file, row, column and value.
"""

from __future__ import annotations

import io
import math
import os
from collections.abc import Mapping
from pathlib import Path
from typing import Any

import geopandas as gpd
import numpy as np
import pandas as pd

from ..errors import InputError

ITEM_UNITS = ("sachet", "litre", "bag", "kit", "tablet", "piece", "box")
ITEM_BASES = ("all", "severe")
ITEM_COLUMNS = ("item", "unit", "per_case", "basis", "buffer_share")
DEPOT_COLUMNS = ("site", "name", "lon", "lat")
_TRUE = frozenset({"true", "yes", "y", "1"})
_FALSE = frozenset({"false", "no", "n", "0", ""})
# Columns of prioritise() an item name may not take.
_RESERVED = frozenset(
    {
        "rank",
        "name",
        "country",
        "probability",
        "population",
        "planning_cases",
        "planning_cases_low",
        "planning_cases_high",
        "cross_border",
        "silent",
        "drivers",
        "units",
        "expected_cases",
        "geometry",
    }
)


def _get(obj: Any, key: str) -> Any:
    if isinstance(obj, Mapping):
        return obj.get(key)
    return getattr(obj, key, None)


def _share(value: Any, column: str) -> None:
    ok = isinstance(value, (int, float, np.number)) and not isinstance(value, bool)
    if not ok or not 0.0 <= float(value) <= 1.0:
        raise InputError(
            f"{column} needs to be a share between 0 and 1; {value!r} was given instead",
            column=column,
            value=value,
        )


def _read_items(path: Any) -> tuple[pd.DataFrame, str | None]:
    name = _file_name(path)
    try:
        text = Path(path).read_text(encoding="utf-8-sig") if _is_path(path) else path.read()
    except OSError as err:
        raise InputError(f"cannot read the supply items table: {err.strerror}", file=name) from err
    lines = text.splitlines()
    note = None
    if lines and lines[0].lstrip().startswith("#"):
        note = lines[0].lstrip().lstrip("#").strip()
        lines = lines[1:]
    frame = _read_csv(io.StringIO("\n".join(lines)), name, "supply items", comment=None)
    return _check_items(frame, file=name), note


def _read_csv(source: Any, name: str | None, what: str, *, comment: str | None) -> pd.DataFrame:
    """Read every cell as text (the checks parse numbers themselves, naming the bad cell)."""
    try:
        frame = pd.read_csv(source, dtype=str, keep_default_na=False, comment=comment)
    except OSError as err:
        raise InputError(f"cannot read the {what} table: {err.strerror or err}", file=name) from err
    except (pd.errors.EmptyDataError, pd.errors.ParserError, UnicodeDecodeError) as err:
        reason = str(err).splitlines()[0] if str(err) else type(err).__name__
        raise InputError(f"the {what} table is not a readable CSV: {reason}", file=name) from err
    frame.columns = [str(c).strip() for c in frame.columns]
    return frame


def _is_path(obj: Any) -> bool:
    return isinstance(obj, (str, os.PathLike))


def _file_name(obj: Any) -> str | None:
    return os.fspath(obj) if _is_path(obj) else None


def _number(value: Any, *, file: str | None, row: int, column: str) -> float:
    try:
        out = float(value)
    except (TypeError, ValueError):
        out = math.nan
    if not math.isfinite(out) or out < 0:
        raise InputError(
            f"{column} needs to be a number >= 0; {value!r} was given instead",
            file=file,
            row=row,
            column=column,
            value=value,
        )
    return out


def _choice(rec: Mapping, column: str, allowed: tuple, *, file: str | None, row: int) -> str:
    """Read the row's ``column``, trimmed and lower-cased; it must be one of ``allowed``."""
    value = str(rec[column]).strip().lower()
    if value not in allowed:
        raise InputError(
            f"'{column}' needs to be one of {allowed}; {rec[column]!r} was given instead",
            file=file,
            row=row,
            column=column,
            value=rec[column],
        )
    return value


def _require_columns(
    frame: pd.DataFrame, columns: tuple[str, ...], what: str, *, file: str | None
) -> None:
    """Refuse a table that lacks any of ``columns`` (``what``: "the depot sites table", ...)."""
    missing = [c for c in columns if c not in frame.columns]
    if missing:
        raise InputError(
            f"{what} needs columns {list(columns)}; missing {missing}",
            file=file,
            column=missing[0],
        )


def _check_items(frame: pd.DataFrame, *, file: str | None) -> pd.DataFrame:
    _require_columns(frame, ITEM_COLUMNS, "the supply items table", file=file)
    if len(frame) == 0:
        raise InputError("the supply items table has no rows", file=file)
    out = frame.reset_index(drop=True).copy()
    seen: set[str] = set()
    per_case, buffer = [], []
    # A handful of rows, each needing its own message: a loop is the clear way here.
    for row, rec in enumerate(out.to_dict("records"), start=1):
        item = str(rec["item"]).strip()
        if not item or item in seen or item in _RESERVED:
            why = "is empty" if not item else "is repeated" if item in seen else "is reserved"
            raise InputError(
                f"each item needs its own name (not one of {sorted(_RESERVED)}); this one {why}",
                file=file,
                row=row,
                column="item",
                value=rec["item"],
            )
        seen.add(item)
        unit = _choice(rec, "unit", ITEM_UNITS, file=file, row=row)
        basis = _choice(rec, "basis", ITEM_BASES, file=file, row=row)
        per_case.append(_number(rec["per_case"], file=file, row=row, column="per_case"))
        raw_buffer = rec["buffer_share"]
        if isinstance(raw_buffer, str) and not raw_buffer.strip():
            raw_buffer = 0.0
        buffer.append(_number(raw_buffer, file=file, row=row, column="buffer_share"))
        out.loc[row - 1, ["item", "unit", "basis"]] = [item, unit, basis]
    out["per_case"] = np.array(per_case, dtype=float)
    out["buffer_share"] = np.array(buffer, dtype=float)
    return out


def _depots_from_frame(frame: pd.DataFrame, crs: Any, *, file: str | None) -> gpd.GeoDataFrame:
    """Check a site table with lon/lat (WGS84) and make points in ``crs``."""
    _require_columns(frame, DEPOT_COLUMNS, "the depot sites table", file=file)
    n = len(frame)
    rows = np.arange(1, n + 1)
    site = frame["site"].astype(str).str.strip()
    empty = (site == "").to_numpy()
    if empty.any():
        row = int(rows[empty][0])
        raise InputError("each site needs an id", file=file, row=row, column="site")
    dup = site.duplicated()
    if dup.any():
        row = int(rows[dup.to_numpy()][0])
        raise InputError(
            "site ids need to be unique", file=file, row=row, column="site", value=site[dup].iloc[0]
        )
    coords = {}
    for col, limit in (("lon", 180.0), ("lat", 90.0)):
        values = pd.to_numeric(frame[col], errors="coerce").to_numpy(dtype=float)
        bad = ~np.isfinite(values) | (np.abs(values) > limit)
        if bad.any():
            i = int(np.flatnonzero(bad)[0])
            raise InputError(
                f"{col} needs to be a number in degrees (WGS84) within +-{limit:g}",
                file=file,
                row=int(rows[i]),
                column=col,
                value=frame[col].iloc[i],
            )
        coords[col] = values
    existing = np.zeros(n, dtype=bool)
    if "existing" in frame.columns:
        existing = _parse_existing(frame["existing"], rows, file=file)
    points = gpd.GeoSeries.from_xy(coords["lon"], coords["lat"], crs="EPSG:4326")
    out = gpd.GeoDataFrame(
        {
            "name": frame["name"].astype(str).str.strip().to_numpy(),
            "lon": coords["lon"],
            "lat": coords["lat"],
            "existing": existing,
            "source": file if file is not None else pd.NA,
            "row": frame["row"].to_numpy() if "row" in frame.columns else rows,
        },
        geometry=points.to_crs(crs).to_numpy(),
        crs=crs,
        index=pd.Index(site.to_numpy(), name="site"),
    )
    return out


def _parse_existing(values: pd.Series, rows: np.ndarray, *, file: str | None) -> np.ndarray:
    """Yes/no cells (true/false, yes/no, 1/0, empty = no) as booleans."""
    if pd.api.types.is_bool_dtype(values):
        return values.to_numpy(dtype=bool)
    raw = values.map(lambda v: str(v).strip().lower() if pd.notna(v) else "")
    known = raw.isin(_TRUE | _FALSE).to_numpy()
    if not known.all():
        i = int(np.flatnonzero(~known)[0])
        raise InputError(
            "'existing' needs to be yes/no (true/false, 1/0, or empty for no)",
            file=file,
            row=int(rows[i]),
            column="existing",
            value=values.iloc[i],
        )
    return raw.isin(_TRUE).to_numpy()


def _check_metric(crs: Any, what: str) -> None:
    if crs is None:
        raise InputError(f"{what} needs a CRS (the working equal-area CRS, in metres)")
    units = {a.unit_name for a in crs.axis_info}
    if crs.is_geographic or not units <= {"metre", "meter"}:
        raise InputError(
            f"{what} needs a projected CRS in metres (the working equal-area CRS); "
            f"{crs.name!r} was given instead"
        )


def _check_known(ids: pd.Index, units: pd.DataFrame, who: str) -> None:
    """Refuse ids that are not in the units table (``who``: "risk names", ...)."""
    missing = ids.difference(units.index)
    if len(missing):
        raise InputError(
            f"{who} {len(missing)} unit(s) not in the units table, e.g. {list(missing[:3])}",
            column="unit_id",
            value=missing[0],
        )


def _candidate_points(
    candidates: pd.DataFrame, units: gpd.GeoDataFrame | None
) -> tuple[gpd.GeoSeries, gpd.GeoSeries]:
    """District centres (centroids in the working CRS) and the region they lie in."""
    if units is not None:
        _check_known(candidates.index, units, "candidates name")
        region = units.geometry
    elif isinstance(candidates, gpd.GeoDataFrame):
        region = candidates.geometry
    else:
        raise InputError(
            "candidates need geometry: pass a GeoDataFrame, or the analysis units as units="
        )
    _check_metric(region.crs, "the candidate districts")
    return region.reindex(candidates.index).centroid, region


def _weights(candidates: pd.DataFrame, weight: str | None) -> np.ndarray:
    if weight is not None:
        if weight not in candidates.columns:
            raise InputError(f"weight column {weight!r} not in the candidates", column=weight)
        w = pd.to_numeric(candidates[weight], errors="coerce").to_numpy(dtype=float)
    else:
        for col in ("probability", "population"):
            if col not in candidates.columns:
                raise InputError(f"the candidates need a {col!r} column", column=col)
        prob = pd.to_numeric(candidates["probability"], errors="coerce").to_numpy(dtype=float)
        pop = pd.to_numeric(candidates["population"], errors="coerce").to_numpy(dtype=float)
        w = prob * pop
    w = np.nan_to_num(w, nan=0.0)
    if (w < 0).any():
        i = int(np.flatnonzero(w < 0)[0])
        raise InputError(
            "depot weights need to be >= 0",
            column=weight or "probability",
            value=candidates.index[i],
        )
    return w


def _sites(sites: pd.DataFrame, crs: Any) -> gpd.GeoDataFrame:
    if not isinstance(sites, gpd.GeoDataFrame):
        frame = sites if "site" in sites.columns else sites.reset_index()
        return _depots_from_frame(frame, crs, file=None)
    if sites.crs is None:
        raise InputError("the depot sites need a CRS")
    not_point = sites.geom_type.to_numpy() != "Point"
    if not_point.any():
        i = int(np.flatnonzero(not_point)[0])
        raise InputError(
            f"depot sites need to be points; site {sites.index[i]!r} is a "
            f"{sites.geom_type.iloc[i]}",
            column="geometry",
        )
    out = sites.to_crs(crs) if sites.crs != crs else sites.copy()
    rows = out["row"].to_numpy() if "row" in out.columns else np.arange(1, len(out) + 1)
    if "existing" in out.columns:
        out["existing"] = _parse_existing(out["existing"], rows, file=None)
    else:
        out["existing"] = False
    if "name" not in out.columns:
        out["name"] = out.index.astype(str)
    out.index = out.index.rename("site")
    return out


def _check_inside(sites: gpd.GeoDataFrame, region: gpd.GeoSeries, reach_km: float) -> None:
    """Reject a site further than the reach from every unit of the region: it serves nobody."""
    gap_km = sites.geometry.distance(region.union_all()).to_numpy() / 1000.0
    far = gap_km > reach_km
    if far.any():
        i = int(np.flatnonzero(far)[0])
        rec = sites.iloc[i]
        where = {
            "file": rec["source"] if "source" in sites and pd.notna(rec["source"]) else None,
            "row": int(rec["row"]) if "row" in sites and pd.notna(rec["row"]) else None,
        }
        value = (
            f"{rec['lon']}, {rec['lat']}"
            if {"lon", "lat"} <= set(sites.columns)
            else sites.index[i]
        )
        raise InputError(
            f"depot site {sites.index[i]!r} is {gap_km[i]:.0f} km outside the region, beyond the "
            f"reach of {reach_km:g} km",
            column="lon, lat",
            value=value,
            **where,
        )


def _check_k(k: Any, n_new: int) -> int:
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 0:
        raise InputError(
            f"k (depots to open) needs to be a whole number >= 0; {k!r} was given instead",
            column="k",
            value=k,
        )
    if k > n_new:
        raise InputError(
            f"k = {k} depots to open, but only {n_new} candidate site(s) are not already open",
            column="k",
            value=k,
        )
    return int(k)


def _check_reach(reach_km: Any) -> float:
    ok = isinstance(reach_km, (int, float, np.number)) and not isinstance(reach_km, bool)
    if not ok or not math.isfinite(float(reach_km)) or reach_km <= 0:
        raise InputError(
            f"reach_km needs to be a distance in km > 0; {reach_km!r} was given instead",
            column="reach_km",
            value=reach_km,
        )
    return float(reach_km)


def _plan_arguments(supplies: Any, base: Any) -> tuple:
    """Read items, low/mid/high rates, severe share (or None) and note from ``[supplies]``."""
    items = _get(supplies, "items")
    if items is None:
        raise InputError("the [supplies] section needs 'items'", column="supplies.items")
    note = None
    if not isinstance(items, pd.DataFrame):
        if isinstance(items, (str, os.PathLike)) and base is not None:
            items = Path(base) / items
        items, note = _read_items(items)
    rate = _get(supplies, "planning_attack_rate")
    if rate is None:
        raise InputError(
            "the [supplies] section needs planning_attack_rate = {low, mid, high}",
            column="supplies.planning_attack_rate",
        )
    if isinstance(rate, (int, float)) and not isinstance(rate, bool):
        low = mid = high = rate  # one number: no range
    else:
        low, mid, high = (_get(rate, key) for key in ("low", "mid", "high"))
    return items, low, mid, high, _get(supplies, "severe_share"), note
