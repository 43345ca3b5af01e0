"""Population per unit: zonal sums of a population raster, or a table join.

Zonal sums are computed in the raster's own CRS (units are reprojected, the raster never is,
so no cell is resampled) with fractional coverage of the cells cut by unit edges, by
exactextract.
"""

from __future__ import annotations

import os
import warnings
from pathlib import Path

import numpy as np
import pandas as pd

from ..errors import DataWarning, InputError

#: A unit whose valid-raster share is below this gets a partial-coverage warning.
MIN_COVERED = 0.99


def zonal_population(
    units: pd.DataFrame, raster: str | os.PathLike[str], *, min_covered: float = MIN_COVERED
) -> pd.Series:
    """Sum a population raster (people per cell) over each unit, with fractional coverage.

    Each cell counts in proportion to the share of its area inside the unit (exactextract),
    so a cell cut by a border is split between the units on either side rather than counted
    twice or lost. Nodata cells count as no data, not as zero people.

    Parameters
    ----------
    units : geopandas.GeoDataFrame
        Units indexed by ``unit_id`` (any CRS; reprojected to the raster's).
    raster : path
        A single-band GeoTIFF of people per cell, with a CRS.
    min_covered : float
        Warn (:class:`~marchland.errors.DataWarning`, listing the shares) for units whose area
        is covered by valid raster cells less than this share.

    Returns
    -------
    pandas.Series
        ``population`` indexed by ``unit_id``; the Series has ``attrs["covered"]``, the share
        of each unit's area with valid raster cells.

    Raises
    ------
    InputError
        The raster cannot be read or has no CRS, or a unit lies wholly outside the raster's
        valid cells (no population can be given to it).

    References
    ----------
    Baston, D. (2023). exactextract: fast and accurate raster zonal statistics.
    https://github.com/isciences/exactextract

    Examples
    --------
    >>> import tempfile, pathlib, numpy as np, rasterio, geopandas as gpd, shapely
    >>> from affine import Affine
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "pop.tif"
    >>> with rasterio.open(path, "w", driver="GTiff", width=4, height=4, count=1,
    ...                    dtype="float32", crs="EPSG:3035", nodata=-1,
    ...                    transform=Affine(100, 0, 0, 0, -100, 400)) as dst:
    ...     dst.write(np.full((1, 4, 4), 10, dtype="float32"))
    >>> u = gpd.GeoDataFrame(geometry=[shapely.box(0, 0, 150, 400), shapely.box(150, 0, 400, 400)],
    ...                      index=pd.Index(["a", "b"], name="unit_id"), crs="EPSG:3035")
    >>> zonal_population(u, path).tolist()
    [60.0, 100.0]
    """
    out, share = _zonal(units, raster, ["sum"], "population raster", min_covered)
    pop = pd.Series(out["sum"].fillna(0).to_numpy(float), index=units.index, name="population")
    pop.attrs["covered"] = share
    return pop


def zonal_mean(
    units: pd.DataFrame,
    raster: str | os.PathLike[str],
    *,
    min_covered: float = MIN_COVERED,
    name: str = "mean",
) -> pd.Series:
    """Area-weighted mean of a raster over each unit, with fractional coverage (exactextract).

    Each valid cell counts in proportion to the area of it inside the unit: its covered
    fraction, times its area on the sphere when the raster is in a geographic CRS (cells of a
    longitude-latitude grid shrink towards the poles). Nodata cells are left out, so the mean
    is over the part of the unit the raster covers. The same CRS handling, warnings and
    errors as :func:`zonal_population`.

    Parameters
    ----------
    units : geopandas.GeoDataFrame
        Units indexed by ``unit_id`` (any CRS; reprojected to the raster's).
    raster : path
        A single-band GeoTIFF with a CRS, e.g. the share of each cell flooded in the wet
        season, or an access-to-water index.
    min_covered : float
        Warn (:class:`~marchland.errors.DataWarning`) for units covered by valid cells less
        than this share of their area.
    name : str
        Name of the returned Series.

    Returns
    -------
    pandas.Series
        The mean per unit, indexed by ``unit_id``, with ``attrs["covered"]`` as in
        :func:`zonal_population`.

    Raises
    ------
    InputError
        The raster cannot be read or has no CRS, or a unit lies wholly outside its valid
        cells.

    References
    ----------
    Baston, D. (2023). exactextract: fast and accurate raster zonal statistics.
    https://github.com/isciences/exactextract

    Examples
    --------
    A unit over a 10 and a 30 column, three quarters on the 10s: 0.75 * 10 + 0.25 * 30.

    >>> import tempfile, pathlib, numpy as np, rasterio, geopandas as gpd, shapely
    >>> from affine import Affine
    >>> path = pathlib.Path(tempfile.mkdtemp()) / "flood.tif"
    >>> with rasterio.open(path, "w", driver="GTiff", width=2, height=1, count=1,
    ...                    dtype="float32", crs="EPSG:3035", nodata=-1,
    ...                    transform=Affine(100, 0, 0, 0, -100, 100)) as dst:
    ...     dst.write(np.array([[[10, 30]]], dtype="float32"))
    >>> u = gpd.GeoDataFrame(geometry=[shapely.box(25, 0, 125, 100)],
    ...                      index=pd.Index(["a"], name="unit_id"), crs="EPSG:3035")
    >>> zonal_mean(u, path).tolist()
    [15.0]
    """
    out, share = _zonal(units, raster, None, "raster", min_covered)
    s = pd.Series(out["mean"].to_numpy(float), index=units.index, name=name)
    s.attrs["covered"] = share
    return s


def _zonal(
    units: pd.DataFrame,
    raster: str | os.PathLike[str],
    ops: list[str] | None,
    what: str,
    min_covered: float,
) -> tuple[pd.DataFrame, pd.Series]:
    """Run exactextract ``ops`` over ``units`` (``None``: an area-weighted mean) and check cover.

    Returns the statistics (one row per unit, in order) and the covered share per unit; raises
    for units outside the raster's valid cells and warns for partly covered ones.
    """
    import rasterio
    import shapely
    from exactextract import exact_extract

    from ._extract import WkbFeatures, raster_source

    path = Path(raster)
    try:
        with rasterio.open(path) as src:
            crs = src.crs
            res = abs(src.res[0] * src.res[1])
            if src.count < 1:
                raise InputError(f"the {what} has no band", file=path)
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot read the {what}: {exc}", file=path) from None
    if crs is None:
        raise InputError(f"the {what} has no CRS", file=path)
    if units.crs is None:
        raise InputError("the units have no CRS")
    if ops is None:
        # On a longitude-latitude grid cells differ in area: weight by each covered part's
        # area on the sphere; on a projected grid every cell has the same area.
        weight = "area_spherical_m2" if crs.is_geographic else "fraction"
        ops = [f"mean=mean(coverage_weight={weight})"]
    geoms = units.geometry.to_crs(crs).to_numpy()
    with rasterio.open(path) as src:
        out = exact_extract(
            raster_source(src),
            WkbFeatures(geoms, crs.wkt),
            [*ops, "count"],
            include_cols=["_uid"],
            output="pandas",
        )
    out = out.set_index("_uid").reindex(np.arange(len(units)))
    # Planar area in the raster's own units, the same units as the cell size.
    area = shapely.area(geoms)
    covered = np.clip(out["count"].fillna(0).to_numpy() * res / np.where(area > 0, area, 1), 0, 1)
    share = pd.Series(covered, index=units.index, name="covered")
    outside = share <= 0
    if outside.any():
        ids = ", ".join(map(str, share.index[outside][:10]))
        raise InputError(
            f"{int(outside.sum())} unit(s) lie outside the raster's valid cells: {ids}",
            file=path,
        )
    partial = share < min_covered
    if partial.any():
        listed = ", ".join(f"{u} {s:.1%}" for u, s in share[partial].sort_values().items())
        warnings.warn(
            f"{path.name}: {int(partial.sum())} unit(s) only partly covered by valid raster "
            f"cells (share covered): {listed}",
            DataWarning,
            stacklevel=3,
        )
    return out, share


def population_from_table(
    units: pd.DataFrame,
    table: str | os.PathLike[str] | pd.DataFrame,
    *,
    id_column: str = "unit_id",
    value_column: str = "population",
) -> pd.Series:
    """Read population per unit from a table (CSV or DataFrame): ``id_column, value_column``.

    Units missing from the table get NaN; ids in the table that are not units, duplicate ids
    and values that are not non-negative numbers are errors naming the row.

    Examples
    --------
    >>> u = pd.DataFrame(index=pd.Index(["a", "b"], name="unit_id"))
    >>> population_from_table(u, pd.DataFrame({"unit_id": ["a"], "population": [120]})).tolist()
    [120.0, nan]
    """
    t, ids, vals, file = _read_unit_table(table, id_column, value_column, "population")
    # Each check names the first offending row (data rows count from 1).
    for bad, reason, column, shown in (
        (vals.isna() | (vals < 0), "population needs to be a number >= 0", value_column,
         t[value_column]),
        (ids.duplicated(), "unit id listed twice", id_column, ids),
        (~ids.isin(units.index), "unit id is in no boundary file", id_column, ids),
    ):  # fmt: skip
        if bad.any():
            i = int(np.flatnonzero(bad.to_numpy())[0])
            raise InputError(reason, file=file, row=i + 1, column=column, value=shown.iloc[i])
    s = pd.Series(vals.to_numpy(float), index=ids.to_numpy()).reindex(units.index)
    return s.rename("population")


def require_population(population: pd.Series, counts: pd.DataFrame) -> None:
    """Raise :class:`InputError` if a unit with cases has zero or missing population.

    Examples
    --------
    >>> require_population(pd.Series({"a": 0.0}), pd.DataFrame({"unit_id": ["a"], "cases": [2]}))
    Traceback (most recent call last):
    marchland.errors.InputError: zero or missing population for 1 unit(s) with cases: a
    """
    with_cases = counts.loc[counts["cases"].fillna(0) > 0, "unit_id"].unique()
    pop = population.reindex(with_cases)
    bad = pop.isna() | (pop <= 0)
    if bad.any():
        ids = ", ".join(map(str, pop.index[bad.to_numpy()][:10]))
        raise InputError(
            f"zero or missing population for {int(bad.sum())} unit(s) with cases: {ids}"
        )


def covariate_from_table(
    units: pd.DataFrame,
    analysis: pd.DataFrame,
    table: str | os.PathLike[str] | pd.DataFrame,
    *,
    id_column: str = "unit_id",
    value_column: str = "value",
    name: str = "value",
) -> pd.Series:
    """Read a unit-level covariate from a table and put it on the analysis units.

    Rows may name analysis units or units inside them (the districts of a country analysed
    at province level): those are averaged to their analysis unit weighted by population
    (an unweighted mean where the districts' population is unknown or zero), so a share or
    an index keeps its meaning. A province whose districts are listed only in part is
    averaged over those listed, with a :class:`~marchland.errors.DataWarning`.

    Parameters
    ----------
    units : pandas.DataFrame
        Every unit (both levels) indexed by ``unit_id``, with ``parent_id`` and
        ``population``.
    analysis : pandas.DataFrame
        The analysis units, indexed by ``unit_id``.
    table : path or pandas.DataFrame
        A CSV (or a DataFrame) with ``id_column`` and ``value_column``.
    id_column, value_column : str
        The columns with the unit id and the value.
    name : str
        Name of the returned Series.

    Returns
    -------
    pandas.Series
        One value per analysis unit, indexed by ``unit_id``.

    Raises
    ------
    InputError
        The table cannot be read or lacks a column; a value is not a finite number; an id is
        listed twice, is in no boundary file, or lies above its analysis unit (a province of
        a country analysed by district); an analysis unit gets no value. The message names
        the file, the first bad row (data rows from 1) and the column.

    Examples
    --------
    Two districts of province ``P`` (analysed as a whole), 1,000 and 3,000 people:
    (1000 * 0.2 + 3000 * 0.6) / 4000 = 0.5.

    >>> u = pd.DataFrame({"parent_id": [None, "P", "P"], "population": [4e3, 1e3, 3e3]},
    ...                  index=["P", "a", "b"])
    >>> t = pd.DataFrame({"unit_id": ["a", "b"], "value": [0.2, 0.6]})
    >>> covariate_from_table(u, u.loc[["P"]], t).tolist()
    [0.5]
    """
    from .units import to_analysis_ids

    t, ids, vals, file = _read_unit_table(table, id_column, value_column, "covariate")
    aid = to_analysis_ids(ids, units, analysis)
    for bad, reason, column, shown in (
        (~np.isfinite(vals), "the value needs to be a number", value_column,
         t[value_column]),
        (ids.duplicated(), "unit id listed twice", id_column, ids),
        (~ids.isin(units.index), "unit id is in no boundary file", id_column, ids),
        (aid.isna(), "unit id is coarser than the unit its country is analysed at (give the "
         "analysis units or the districts inside them)", id_column, ids),
    ):  # fmt: skip
        if bad.any():
            i = int(np.flatnonzero(bad.to_numpy())[0])
            raise InputError(reason, file=file, row=i + 1, column=column, value=shown.iloc[i])
    pop = pd.to_numeric(units["population"], errors="coerce") if "population" in units else None
    w = (
        ids.map(pop).fillna(0).clip(lower=0).to_numpy(float)
        if pop is not None
        else np.zeros(len(ids))
    )
    up = (aid != ids).to_numpy()
    if up.any():
        # A province averaged over only some of its districts is said, not silently accepted.
        listed = ids[up].groupby(aid[up].to_numpy()).nunique()
        members = units["parent_id"].value_counts().reindex(listed.index)
        short = listed[listed < members]
        if len(short):
            what = ", ".join(f"{p} ({n} of {members[p]})" for p, n in short.items())
            warnings.warn(
                f"{file.name if file is not None else 'covariate table'}: {len(short)} "
                f"analysis unit(s) averaged over only some of their districts: {what}",
                DataWarning,
                stacklevel=2,
            )
    frame = pd.DataFrame({"aid": aid.to_numpy(), "v": vals.to_numpy(float), "w": w})
    g = frame.assign(vw=frame["v"] * frame["w"]).groupby("aid")
    wsum = g["w"].sum()
    mean = (g["vw"].sum() / wsum).where(wsum > 0, g["v"].mean())
    out = mean.reindex(analysis.index).rename(name)
    missing = out.index[out.isna()]
    if len(missing):
        raise InputError(
            f"{len(missing)} analysis unit(s) get no value from the covariate table: "
            + ", ".join(map(str, missing[:10])),
            file=file,
            column=id_column,
            value=str(missing[0]),
        )
    return out


def covariate_values(covariate, analysis, all_units=None) -> pd.Series:
    """Values of one ``[[risk.covariates]]`` entry on the analysis units.

    A raster gives the area-weighted zonal mean over each analysis unit
    (:func:`zonal_mean`); a table is read through :func:`covariate_from_table`, with district
    rows of a country analysed by province averaged to the province.

    Parameters
    ----------
    covariate : marchland.config.schema.RiskCovariate
        ``name`` and either ``raster`` or ``table`` with ``id_column`` and ``value_column``.
    analysis : geopandas.GeoDataFrame
        The analysis units.
    all_units : geopandas.GeoDataFrame, optional
        Every unit of every level (needed for district rows of a province-level country).

    Returns
    -------
    pandas.Series
        Named ``covariate.name``, indexed by the analysis units' ``unit_id``.

    Examples
    --------
    >>> from marchland.config import load_config
    >>> from marchland.demo import scenario_path
    >>> from marchland.pack import open_region
    >>> cfg = load_config(scenario_path())
    >>> flood = covariate_values(cfg.risk.covariates[0], open_region(cfg).units)
    >>> bool(flood.between(0, 1).all()), flood.name
    (True, 'flood_share')
    """
    if covariate.raster is not None:
        return zonal_mean(analysis, covariate.raster, name=covariate.name)
    return covariate_from_table(
        all_units if all_units is not None else analysis,
        analysis,
        covariate.table,
        id_column=covariate.id_column,
        value_column=covariate.value_column,
        name=covariate.name,
    )


def _read_unit_table(
    table: pd.DataFrame | str | os.PathLike[str], id_column: str, value_column: str, what: str
) -> tuple[pd.DataFrame, pd.Series, pd.Series, Path | None]:
    """Read a unit-id/value table (a frame or a CSV path): the frame, ids, numeric values, file."""
    file = None
    if isinstance(table, pd.DataFrame):
        t = table
    else:
        file = Path(table)
        try:
            t = pd.read_csv(file, dtype={id_column: str})
        except Exception as exc:  # pandas raises many types for unreadable files
            raise InputError(f"cannot read the {what} table: {exc}", file=file) from None
    for c in (id_column, value_column):
        if c not in t.columns:
            raise InputError(f"the {what} table has no column {c!r}", file=file, column=c)
    ids = t[id_column].astype(str).str.strip()
    return t, ids, pd.to_numeric(t[value_column], errors="coerce"), file
