"""Boundary files into one table of units, and the analysis level each country reports at.

:func:`read_units` reads any number of boundary files (or GeoDataFrames), each with its own
column mapping and CRS, checks them and reprojects them to one equal-area working CRS in metres.
:func:`analysis_units` chooses per country the level its reports can be analysed at and
dissolves districts into provinces where needed; :func:`counts_to_analysis` moves counts onto
those units.
"""

from __future__ import annotations

import os
import re
import warnings
from collections.abc import Sequence
from pathlib import Path
from typing import TYPE_CHECKING, Any

import geopandas as gpd
import numpy as np
import pandas as pd
import shapely
from pyproj import CRS

from ..errors import DataWarning, InputError

if TYPE_CHECKING:  # pragma: no cover
    from ..config.schema import Config

UNIT_COLUMNS = ("name", "country", "level", "parent_id", "population", "source", "geometry")
LEVELS = (1, 2)
_COUNTRY = re.compile(r"^[A-Z]{3}$")

Source = str | os.PathLike[str] | gpd.GeoDataFrame


def _per_source(value: Any, n: int, what: str) -> list:
    """One mapping value per source: a scalar applies to all, a list gives one each."""
    if isinstance(value, list | tuple):
        if len(value) != n:
            raise InputError(f"'{what}' needs one value per source ({n}); {len(value)} given")
        return list(value)
    return [value] * n


def _label(src: Source, i: int) -> str:
    return f"<GeoDataFrame {i}>" if isinstance(src, gpd.GeoDataFrame) else os.fspath(src)


def _read(src: Source, layer: str | None, label: str) -> gpd.GeoDataFrame:
    if isinstance(src, gpd.GeoDataFrame):
        return src
    path = Path(src)
    if not path.exists():
        raise InputError("boundary file not found", file=label)
    try:
        if path.suffix.lower() in (".parquet", ".geoparquet"):
            if layer:
                raise InputError("a GeoParquet file holds one layer; leave 'layer' out", file=label)
            # GeoParquet through pyarrow: columnar, several times quicker than a GeoPackage
            # for tens of thousands of polygons.
            return gpd.read_parquet(path)
        kw = {"layer": layer} if layer else {}
        frame = gpd.read_file(path, engine="pyogrio", **kw)
    except InputError:
        raise
    except Exception as exc:  # pyogrio and pyarrow raise several types for unreadable files
        if "not recognized as being in a supported file format" in str(exc):
            raise InputError(_NOT_VECTOR, file=label) from None
        raise InputError(f"cannot read the boundary file: {exc}", file=label) from None
    # GDAL reads a plain table (CSV, spreadsheet) too, as rows without geometry.
    if not isinstance(frame, gpd.GeoDataFrame) or frame._geometry_column_name not in frame:
        raise InputError(_NOT_VECTOR, file=label)
    return frame


_NOT_VECTOR = "not a vector boundary file (GeoPackage, GeoJSON, Shapefile, GeoParquet)"


def _column(frame: pd.DataFrame, col: str, label: str, what: str) -> pd.Series:
    if col not in frame.columns:
        cols = [c for c in frame.columns if c != frame.geometry.name]
        raise InputError(
            f"the {what} column is missing; the file has {cols}", file=label, column=col
        )
    return frame[col]


def _text(s: pd.Series) -> pd.Series:
    """Strings with blanks as missing (ids like 7 and '7' are the same id)."""
    out = s.astype("string").str.strip()
    return out.mask(out == "")


def _polygonal(geoms: np.ndarray) -> np.ndarray:
    """Keep only the polygon parts of each geometry (make_valid may return collections)."""
    out = geoms.copy()
    kinds = shapely.get_type_id(out)
    for i in np.flatnonzero(kinds == 7):  # GeometryCollection: rare, only repaired rows
        parts = shapely.get_parts(out[i])
        polys = parts[np.isin(shapely.get_type_id(parts), (3, 6))]
        out[i] = shapely.union_all(polys) if len(polys) else shapely.Polygon()
    return out


def _one_source(
    frame: gpd.GeoDataFrame,
    label: str,
    *,
    id: str,
    name: str,
    country: str | None,
    parent: str | None,
    level: int | str | None,
) -> gpd.GeoDataFrame:
    if frame.crs is None:
        raise InputError(
            "the boundary file has no CRS; set one (e.g. with ogr2ogr -a_srs) so it can be "
            "placed on the map",
            file=label,
        )
    if len(frame) == 0:
        raise InputError("the boundary file has no features", file=label)
    rows = np.arange(1, len(frame) + 1)
    ids = _text(_column(frame, id, label, "id"))
    if ids.isna().any():
        r = int(rows[ids.isna().to_numpy()][0])
        raise InputError("unit id is blank", file=label, row=r, column=id)
    out = pd.DataFrame(index=pd.Index(ids.to_numpy(dtype=object), name="unit_id"))
    out["name"] = _text(_column(frame, name, label, "name")).fillna("").to_numpy(dtype=object)
    if country is None:
        raise InputError("a country code or country column is needed", file=label)
    if country in frame.columns:
        cc = _text(frame[country]).str.upper()
    else:
        cc = pd.Series(str(country).strip().upper(), index=frame.index)
    bad = ~cc.fillna("").str.fullmatch(_COUNTRY.pattern)
    if bad.any():
        r = int(rows[bad.to_numpy()][0])
        raise InputError(
            "country codes need to be three letters (e.g. TVR)",
            file=label,
            row=r,
            column=country if country in frame.columns else "country",
            value=cc[bad].iloc[0],
        )
    out["country"] = cc.to_numpy(dtype=object)
    par = (
        _text(_column(frame, parent, label, "parent"))
        if parent
        else pd.Series(pd.NA, index=frame.index, dtype="string")
    )
    out["parent_id"] = par.to_numpy(dtype=object)
    out["parent_id"] = out["parent_id"].where(out["parent_id"].notna(), None)
    if level is None:
        lev = np.where(par.notna().to_numpy(), 2, 1)
    elif isinstance(level, str):
        raw = pd.to_numeric(_column(frame, level, label, "level"), errors="coerce")
        lev = raw.to_numpy()
        bad = ~np.isin(lev, LEVELS)
        if bad.any():
            r = int(rows[bad][0])
            raise InputError(
                f"level needs to be one of {LEVELS}",
                file=label,
                row=r,
                column=level,
                value=frame[level].iloc[r - 1],
            )
    elif level in LEVELS:
        lev = np.full(len(frame), level)
    else:
        raise InputError(
            f"'level' needs to be one of {LEVELS}. {level!r} was given instead.", file=label
        )
    out["level"] = lev.astype(int)
    geoms = frame.geometry.to_numpy()
    empty = shapely.is_missing(geoms) | shapely.is_empty(geoms)
    if empty.any():
        r = int(rows[empty][0])
        raise InputError(
            f"{int(empty.sum())} unit(s) have no geometry (first: {ids.iloc[r - 1]})",
            file=label,
            row=r,
            column="geometry",
        )
    invalid = ~shapely.is_valid(geoms)
    if invalid.any():
        fixed = _polygonal(shapely.make_valid(geoms[invalid]))
        geoms = geoms.copy()
        geoms[invalid] = fixed
        warnings.warn(
            f"{label}: repaired {int(invalid.sum())} invalid geometries with make_valid: "
            f"{', '.join(map(str, ids[invalid].tolist()[:10]))}",
            DataWarning,
            stacklevel=3,
        )
    kinds = shapely.get_type_id(geoms)
    notpoly = ~np.isin(kinds, (3, 6)) | shapely.is_empty(geoms)
    if notpoly.any():
        r = int(rows[notpoly][0])
        raise InputError(
            "unit geometries need to be polygons or multipolygons",
            file=label,
            row=r,
            column="geometry",
            value=shapely.get_type_id(geoms[r - 1]),
        )
    out["population"] = np.nan
    out["source"] = label
    return gpd.GeoDataFrame(
        out, geometry=gpd.GeoSeries(geoms, crs=frame.crs).to_numpy(), crs=frame.crs
    )


def working_crs(frames: Sequence[gpd.GeoDataFrame]) -> CRS:
    """Choose a Lambert azimuthal equal-area CRS centred on the frames' extent (metres).

    On the WGS 84 datum, so files on an older datum (NAD27, say) are shifted onto it: with
    only an ellipsoid named, pyproj would read every datum as the same (tens of metres off).

    Examples
    --------
    >>> import geopandas as gpd, shapely
    >>> f = gpd.GeoDataFrame(geometry=[shapely.box(10, 40, 12, 42)], crs="EPSG:4326")
    >>> working_crs([f]).srs
    '+proj=laea +lat_0=41.0 +lon_0=11.0 +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs +type=crs'

    """
    b = np.array([f.to_crs("EPSG:4326").total_bounds for f in frames])
    lon = round(float((b[:, 0].min() + b[:, 2].max()) / 2), 2)
    lat = round(float((b[:, 1].min() + b[:, 3].max()) / 2), 2)
    return CRS.from_proj4(
        f"+proj=laea +lat_0={lat} +lon_0={lon} +x_0=0 +y_0=0 +datum=WGS84 +units=m +no_defs"
    )


def read_units(
    sources: Source | Sequence[Source],
    *,
    id: str | Sequence[str],
    name: str | Sequence[str],
    country: str | Sequence[str] | None = None,
    parent: str | Sequence[str | None] | None = None,
    level: int | str | Sequence[int | str | None] | None = None,
    crs: Any = None,
    layer: str | Sequence[str | None] | None = None,
) -> gpd.GeoDataFrame:
    """Read boundary files into one GeoDataFrame of units in an equal-area working CRS.

    Parameters
    ----------
    sources : path, GeoDataFrame, or a list of them
        GeoPackage, GeoJSON or Shapefile paths (read with pyogrio), GeoParquet paths
        (``.parquet``, read with pyarrow) or GeoDataFrames. Every source needs a CRS.
    id, name : str or list of str
        Columns with the unit id (unique across all sources) and the unit's name; one value
        for all sources or one per source.
    country : str or list, optional
        A column with the country code, or a fixed three-letter code (e.g. ``"TVR"``).
    parent : str or list, optional
        Column with the parent unit's id (admin-2 files).
    level : int, str or list, optional
        A fixed level (1 province-like, 2 district-like) or a column holding it; by default 2
        where a parent is given and 1 elsewhere.
    crs : CRS-like, optional
        The working CRS; it must be projected. By default a Lambert azimuthal equal-area
        projection centred on the data's extent.
    layer : str or list, optional
        Layer name inside a GeoPackage.

    Returns
    -------
    geopandas.GeoDataFrame
        Indexed by ``unit_id`` with columns ``name country level parent_id population source
        geometry``; ``population`` is NaN until :func:`marchland.zonal_population` fills it.

    Raises
    ------
    InputError
        A source cannot be read, has no CRS, lacks a mapped column, has blank or duplicate ids
        (the error names both files), empty or non-polygon geometry, a parent id that does not
        exist, or inconsistent levels. Invalid geometries are repaired with ``make_valid`` and
        reported with a :class:`~marchland.errors.DataWarning`.

    Examples
    --------
    >>> import geopandas as gpd, shapely
    >>> prov = gpd.GeoDataFrame({"code": ["TVR-01"], "name": ["Orlane"]},
    ...                         geometry=[shapely.box(10, 40, 12, 42)], crs="EPSG:4326")
    >>> dist = gpd.GeoDataFrame({"code": ["TVR-01-01", "TVR-01-02"], "name": ["Ast", "Bel"],
    ...                          "prov": ["TVR-01", "TVR-01"]},
    ...                         geometry=[shapely.box(10, 40, 11, 42), shapely.box(11, 40, 12, 42)],
    ...                         crs="EPSG:4326")
    >>> u = read_units([prov, dist], id="code", name="name", country="TVR",
    ...                parent=[None, "prov"], level=[1, 2])
    >>> u[["name", "level", "parent_id"]]
                 name  level parent_id
    unit_id
    TVR-01     Orlane      1      None
    TVR-01-01     Ast      2    TVR-01
    TVR-01-02     Bel      2    TVR-01
    >>> u.crs.is_projected
    True
    """
    if isinstance(sources, str | os.PathLike | gpd.GeoDataFrame):
        sources = [sources]
    sources = list(sources)
    if not sources:
        raise InputError("no boundary sources given")
    n = len(sources)
    maps = {
        k: _per_source(v, n, k)
        for k, v in dict(
            id=id, name=name, country=country, parent=parent, level=level, layer=layer
        ).items()
    }
    parts = []
    for i, src in enumerate(sources):
        label = _label(src, i)
        frame = _read(src, maps["layer"][i], label)
        parts.append(
            _one_source(
                frame,
                label,
                id=maps["id"][i],
                name=maps["name"][i],
                country=maps["country"][i],
                parent=maps["parent"][i],
                level=maps["level"][i],
            )
        )
    _check_unique(parts)
    if crs is None:
        target = working_crs(parts)
    else:
        target = CRS.from_user_input(crs)
        if not target.is_projected:
            raise InputError(f"the working CRS needs to be projected in metres; {crs!r} is not")
    units = pd.concat([p.to_crs(target) for p in parts])
    units = gpd.GeoDataFrame(units, geometry="geometry", crs=target)
    _check_hierarchy(units)
    return units.loc[:, list(UNIT_COLUMNS)]


def _check_unique(parts: list[gpd.GeoDataFrame]) -> None:
    ids = pd.concat([pd.Series(p["source"].to_numpy(), index=p.index) for p in parts])
    dup = ids.index.duplicated(keep=False)
    if dup.any():
        first = ids.index[dup][0]
        files = ids[ids.index == first].tolist()
        where = files[0] if files[0] == files[-1] else f"{files[0]} and {files[1]}"
        raise InputError(
            f"unit id {first!r} appears more than once ({where}); ids must be unique across "
            "all boundary files",
            file=files[-1],
            column="id",
            value=first,
        )


def _check_hierarchy(units: gpd.GeoDataFrame) -> None:
    has_parent = units["parent_id"].notna()
    if (has_parent & (units["level"] == 1)).any():
        u = units.index[has_parent & (units["level"] == 1)][0]
        raise InputError(
            "a level-1 unit cannot have a parent",
            file=units.at[u, "source"],
            column="parent",
            value=u,
        )
    par = units.loc[has_parent, "parent_id"]
    missing = ~par.isin(units.index)
    if missing.any():
        u = par.index[missing][0]
        raise InputError(
            f"unit {u!r} names parent {par[u]!r}, which is in no boundary file",
            file=units.at[u, "source"],
            column="parent",
            value=par[u],
        )
    child = units.loc[par.index]
    # The parent must be coarser and in the same country; the first offender is named.
    for bad, reason, column, shown in (
        (
            units["level"].reindex(par.to_numpy()).to_numpy() >= child["level"].to_numpy(),
            "has a parent of the same or finer level",
            "level",
            pd.Series(par.index, index=par.index),
        ),
        (
            units["country"].reindex(par.to_numpy()).to_numpy() != child["country"].to_numpy(),
            "has a parent in another country",
            "parent",
            par,
        ),
    ):
        if bad.any():
            u = par.index[bad][0]
            raise InputError(
                f"unit {u!r} {reason}",
                file=units.at[u, "source"],
                column=column,
                value=shown[u],
            )


def units_from_config(config: Config | str | os.PathLike[str]) -> gpd.GeoDataFrame:
    """Read every ``[[boundaries]]`` table of a config, each with its own column mapping.

    Parameters
    ----------
    config : Config or path

    Returns
    -------
    geopandas.GeoDataFrame
        As :func:`read_units`, in ``[region] crs`` or the default equal-area CRS.

    Examples
    --------
    >>> from marchland.demo import scenario_path
    >>> u = units_from_config(scenario_path())
    >>> u.groupby("country").size().to_dict()
    {'MRW': 66, 'OSK': 66, 'QLN': 55, 'TVR': 88}
    """
    from ..config.load import load_config

    cfg = load_config(config)
    b = cfg.boundaries
    return read_units(
        [s.path for s in b],
        id=[s.id for s in b],
        name=[s.name for s in b],
        country=[s.country_column or s.country for s in b],
        parent=[s.parent for s in b],
        level=[s.level_column or s.level for s in b],
        layer=[s.layer for s in b],
        crs=cfg.region.crs,
    )


# --- analysis level ------------------------------------------------------------------------
def analysis_levels(units: pd.DataFrame, counts: pd.DataFrame) -> pd.Series:
    """Per country, the level its counts are analysed at.

    The finest level at which every count of the country can be placed: 2 when it reports only
    districts, 1 when it reports provinces (any district rows are then summed into their
    provinces). A country with no counts is analysed at the finest level it has.

    Examples
    --------
    >>> u = pd.DataFrame({"country": ["OSK", "OSK", "TVR", "TVR"], "level": [1, 2, 1, 2]},
    ...                  index=["OSK-01", "OSK-01-01", "TVR-01", "TVR-01-01"])
    >>> analysis_levels(u, pd.DataFrame({"unit_id": ["OSK-01", "TVR-01-01"]})).to_dict()
    {'OSK': 1, 'TVR': 2}
    """
    finest = units.groupby("country")["level"].max()
    lev = units["level"].reindex(pd.Index(counts["unit_id"].unique()))
    lev = lev.dropna()
    by_country = lev.groupby(units["country"].reindex(lev.index)).min()
    out = finest.copy()
    out.loc[by_country.index] = by_country.astype(int)
    return out.astype(int).rename("level")


def analysis_units(units: gpd.GeoDataFrame, counts: pd.DataFrame) -> gpd.GeoDataFrame:
    """Build the units everything downstream runs on: per country, the level it reports at.

    Districts of a country that reports only provinces are dissolved into their provinces, with
    population summed; the province keeps its id and name. A country that reports districts
    keeps its districts.

    Parameters
    ----------
    units : geopandas.GeoDataFrame
        All units, as from :func:`read_units` (both levels).
    counts : pandas.DataFrame
        Counts with a ``unit_id`` column (any level).

    Returns
    -------
    geopandas.GeoDataFrame
        Same columns as ``units``; indexed by ``unit_id``.

    Examples
    --------
    >>> import geopandas as gpd, shapely, pandas as pd
    >>> u = gpd.GeoDataFrame(
    ...     {"name": ["P", "a", "b"], "country": "OSK", "level": [1, 2, 2],
    ...      "parent_id": [None, "P", "P"], "population": [np.nan, 10.0, 5.0], "source": "f"},
    ...     geometry=[shapely.box(0, 0, 2, 1), shapely.box(0, 0, 1, 1), shapely.box(1, 0, 2, 1)],
    ...     index=pd.Index(["P", "a", "b"], name="unit_id"), crs="EPSG:3035")
    >>> a = analysis_units(u, pd.DataFrame({"unit_id": ["P"]}))
    >>> a.index.tolist(), a["population"].tolist(), a.area.tolist()
    (['P'], [15.0], [2.0])
    """
    levels = analysis_levels(units, counts)
    want = units["country"].map(levels)
    keep = units[units["level"] == want]
    # Provinces of a province-level country take their districts' union and population.
    rolled = units[(units["level"] > want) & units["parent_id"].isin(keep.index)]
    if len(rolled):
        grp = rolled.groupby("parent_id")
        geom = rolled.geometry.groupby(rolled["parent_id"]).agg(shapely.union_all)
        pop = grp["population"].sum(min_count=1)
        src = grp["source"].first()
        keep = keep.copy()
        ix = geom.index
        keep.loc[ix, "geometry"] = gpd.GeoSeries(geom, crs=units.crs).make_valid()
        keep.loc[ix, "population"] = pop
        keep.loc[ix, "source"] = src
    return gpd.GeoDataFrame(keep, geometry="geometry", crs=units.crs)


def to_analysis_ids(ids: pd.Series, units: pd.DataFrame, analysis: pd.DataFrame) -> pd.Series:
    """Map unit ids to the analysis unit each belongs to (itself or its province); NaN if none.

    Examples
    --------
    >>> u = pd.DataFrame({"parent_id": [None, "P"]}, index=["P", "d"])
    >>> to_analysis_ids(pd.Series(["d", "P", "x"]), u, u.loc[["P"]]).tolist()
    ['P', 'P', nan]
    """
    ids = pd.Series(ids)
    direct = ids.where(ids.isin(analysis.index))
    parent = ids.map(units["parent_id"])
    up = parent.where(parent.isin(analysis.index))
    return direct.fillna(up)


def counts_to_analysis(
    counts: pd.DataFrame, units: pd.DataFrame, analysis: pd.DataFrame
) -> pd.DataFrame:
    """Move counts onto analysis units; district rows of a province-level country are summed.

    Revisions stay correct when summing: for every date a district of the province sent a
    version, the province gets a version equal to the sum of each district's latest version
    known on that date, so :func:`~marchland.inputs.as_of` still gives the data as then known.

    Parameters
    ----------
    counts : pandas.DataFrame
        Counts (``unit_id week cases deaths received source row`` and any extra columns).
    units, analysis : pandas.DataFrame
        All units and the analysis units (indexed by ``unit_id``).

    Returns
    -------
    pandas.DataFrame
        Counts on analysis unit ids, every version kept. Counts whose unit is coarser than
        its analysis unit (cannot be placed) raise an :class:`InputError`.

    Examples
    --------
    >>> u = pd.DataFrame({"parent_id": [None, "P", "P"]}, index=["P", "a", "b"])
    >>> c = pd.DataFrame({"unit_id": ["a", "b", "a"], "week": pd.Timestamp("2026-01-05"),
    ...                   "cases": pd.array([2, 3, 4], dtype="Int64"),
    ...                   "deaths": pd.array([0, 0, 1], dtype="Int64"),
    ...                   "received": pd.to_datetime(["2026-01-12", "2026-01-12", "2026-01-19"]),
    ...                   "source": "s", "row": [1, 2, 3]})
    >>> moved = counts_to_analysis(c, u, u.loc[["P"]])
    >>> moved[["unit_id", "cases", "received"]].astype(str).values.tolist()
    [['P', '5', '2026-01-12'], ['P', '7', '2026-01-19']]
    """
    aid = to_analysis_ids(counts["unit_id"], units, analysis)
    if aid.isna().any():
        bad = counts.loc[aid.isna().to_numpy()].iloc[0]
        raise InputError(
            f"unit {bad['unit_id']!r} is not an analysis unit and has no parent that is one",
            file=str(bad.get("source", "")),
            row=int(bad["row"]),
            column="unit_id",
        )
    same = (aid == counts["unit_id"]).to_numpy()
    direct = counts[same]
    up = counts[~same].assign(_aid=aid[~same].to_numpy())
    if up.empty:
        return direct.reset_index(drop=True)
    up = up.sort_values("received", kind="stable")
    # Each (province, week, received) event, joined with each district's latest version by then.
    events = up[["_aid", "week", "received"]].drop_duplicates()
    members = up[["_aid", "week", "unit_id"]].drop_duplicates()
    grid = events.merge(members, on=["_aid", "week"]).sort_values("received", kind="stable")
    known = pd.merge_asof(
        grid,
        up.drop(columns="_aid")
        .rename(columns={"received": "_got"})
        .assign(received=lambda d: d["_got"])
        .sort_values("received", kind="stable"),
        on="received",
        by=["unit_id", "week"],
        direction="backward",
    ).dropna(subset=["_got"])
    deaths_na = known["deaths"].isna()
    summed = (
        known.assign(_dna=deaths_na)
        .groupby(["_aid", "week", "received"], sort=True)
        .agg(
            cases=("cases", "sum"),
            deaths=("deaths", "sum"),
            _dna=("_dna", "any"),
            source=("source", "last"),
            row=("row", "last"),
        )
        .reset_index()
    )
    summed["deaths"] = summed["deaths"].astype("Int64").mask(summed["_dna"])
    summed["cases"] = summed["cases"].astype("Int64")
    summed = summed.drop(columns="_dna").rename(columns={"_aid": "unit_id"})
    # A sum is written by no single row: keep the extra columns, marking it as derived.
    if "implied" in known:
        implied = known.groupby(["_aid", "week", "received"], sort=True)["implied"].all()
        summed["implied"] = implied.to_numpy(dtype=bool)
    for col in ("file", "sheet"):
        if col in counts:
            summed[col] = ""
    out = pd.concat([direct, summed], ignore_index=True)
    return out.reset_index(drop=True)
