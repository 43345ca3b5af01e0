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

from .errors import DataWarning, InputError

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
    import geopandas as gpd
    import rasterio
    import shapely
    from exactextract import exact_extract

    path = Path(raster)
    try:
        with rasterio.open(path) as src:
            crs = src.crs
            res = abs(src.res[0] * src.res[1])
            if src.count < 1:
                raise InputError("the population raster has no band", file=path)
    except rasterio.errors.RasterioIOError as exc:
        raise InputError(f"cannot read the population raster: {exc}", file=path) from None
    if crs is None:
        raise InputError("the population raster has no CRS", file=path)
    if units.crs is None:
        raise InputError("the units have no CRS")
    local = gpd.GeoDataFrame(
        {"_uid": np.arange(len(units))}, geometry=units.geometry.to_crs(crs).to_numpy(), crs=crs
    )
    with rasterio.open(path) as src:
        out = exact_extract(src, local, ["sum", "count"], include_cols=["_uid"], output="pandas")
    out = out.set_index("_uid").reindex(np.arange(len(units)))
    # Planar area in the raster's own units, the same units as the cell size.
    area = shapely.area(local.geometry.to_numpy())
    covered = np.clip(out["count"].fillna(0).to_numpy() * res / np.where(area > 0, area, 1), 0, 1)
    pop = pd.Series(out["sum"].fillna(0).to_numpy(float), index=units.index, name="population")
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
            stacklevel=2,
        )
    pop.attrs["covered"] = share
    return pop


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
    file = None
    if isinstance(table, pd.DataFrame):
        t = table
    else:
        file = Path(table)
        try:
            t = pd.read_csv(file, dtype={id_column: str})
        except Exception as exc:  # pandas raises many types for unreadable files
            raise InputError(f"cannot read the population table: {exc}", file=file) from None
    for c in (id_column, value_column):
        if c not in t.columns:
            raise InputError(f"the population table has no column {c!r}", file=file, column=c)
    ids = t[id_column].astype(str).str.strip()
    vals = pd.to_numeric(t[value_column], errors="coerce")
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
