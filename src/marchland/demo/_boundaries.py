"""Each country's own boundary files, digitised "independently" so borders do not line up.

Every country's copy of the map is moved by its own smooth displacement field (at most
``MAX_SHIFT`` metres), applied to every vertex. Inside one country a shared vertex moves the
same way for both districts, so its districts still tile exactly; along an international
border the two countries' copies move differently, which opens gaps and overlaps of up to
2 x ``MAX_SHIFT`` - as files from different mapping agencies do.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import shapely

from ._world import GEN_CRS, World

MAX_SHIFT = 135.0  # metres; two countries' shifts add up to at most 270 m
# Each country's copy is offset as a whole (a datum or digitising difference) plus a wavy part.
# Offsets sit 120-180 degrees apart on a circle for neighbours, so their difference across a
# land border is 147-170 m and the mismatch is rarely near zero for long.
_OFFSET_M = 85.0
_OFFSET_DEG = {"TVR": 0.0, "OSK": 120.0, "MRW": 240.0, "QLN": 60.0}
# Each country's file: (format suffix, CRS, column names for adm2 and adm1).
FILES = {
    "TVR": (".gpkg", "EPSG:4326", ("code", "name", "prov_code"), ("code", "name")),
    "OSK": (".geojson", "EPSG:4326", ("code", "name", "prov_code"), ("code", "name")),
    "MRW": (".gpkg", "EPSG:32727", ("code", "name", "prov_code"), ("code", "name")),
    "QLN": (".gpkg", "EPSG:32728", ("dist_id", "dist_name", "prov_id"), ("prov_id", "prov_name")),
}
# GeoPackages record a "last change" time; pin it so regeneration is reproducible.
_FIXED_DATE = "2026-12-01T00:00:00Z"


def _field(country, rng):
    """Draw a country's smooth 2-D displacement field, bounded by MAX_SHIFT."""
    k = 4
    off = _OFFSET_M * np.array(
        [np.cos(np.radians(_OFFSET_DEG[country])), np.sin(np.radians(_OFFSET_DEG[country]))]
    )
    wavelength = rng.uniform(12_000, 60_000, (2, k))
    angle = rng.uniform(0, 2 * np.pi, (2, k))
    phase = rng.uniform(0, 2 * np.pi, (2, k))
    amp = rng.uniform(0.3, 1.0, (2, k))
    amp = amp / amp.sum(axis=1, keepdims=True) * (MAX_SHIFT - _OFFSET_M) / np.sqrt(2)
    kx = 2 * np.pi / wavelength * np.cos(angle)
    ky = 2 * np.pi / wavelength * np.sin(angle)

    def shift(xy):
        x, y = xy[:, :1], xy[:, 1:2]
        arg = x * kx[None, 0] + y * ky[None, 0] + phase[None, 0]
        dx = (amp[0] * np.cos(arg)).sum(1)
        arg = x * kx[None, 1] + y * ky[None, 1] + phase[None, 1]
        dy = (amp[1] * np.cos(arg)).sum(1)
        return xy + off + np.column_stack([dx, dy])

    return shift


def country_copies(world: World, rng: np.random.Generator) -> dict[str, gpd.GeoDataFrame]:
    """Each country's perturbed districts (in GEN_CRS) as it would publish them.

    Parameters
    ----------
    world : World
    rng : numpy.random.Generator

    Returns
    -------
    dict of str to geopandas.GeoDataFrame
        Districts indexed by unit_id with ``name province_id geometry``.
    """
    out = {}
    for c in FILES:
        d = world.districts[world.districts["country"] == c]
        g = shapely.transform(d.geometry.values, _field(c, rng))
        g = shapely.set_precision(g, 0.01)
        if not shapely.is_valid(g).all():  # pragma: no cover - strain is far too small for it
            raise RuntimeError(f"perturbed {c} districts are not valid")
        out[c] = gpd.GeoDataFrame(d[["name", "province_id"]], geometry=g, crs=GEN_CRS)
    return out


def write_boundaries(world: World, copies: dict, folder: Path) -> None:
    """Write ``<country>_adm1`` and ``<country>_adm2`` files into ``folder``."""
    folder.mkdir(parents=True, exist_ok=True)
    pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": _FIXED_DATE})
    try:
        for c, (suffix, crs, cols2, cols1) in FILES.items():
            d = copies[c]
            adm2 = gpd.GeoDataFrame(
                {
                    cols2[0]: d.index.values,
                    cols2[1]: d["name"].values,
                    cols2[2]: d["province_id"].values,
                },
                geometry=d.geometry.values,
                crs=GEN_CRS,
            ).to_crs(crs)
            prov = world.provinces[world.provinces["country"] == c]
            unions = [
                shapely.union_all(d.geometry.values[d["province_id"].values == p])
                for p in prov.index
            ]
            if not shapely.is_valid(unions).all():  # pragma: no cover - a bug, not bad input
                raise RuntimeError(f"{c} provinces are not valid")
            adm1 = gpd.GeoDataFrame(
                {cols1[0]: prov.index.values, cols1[1]: prov["name"].values},
                geometry=unions,
                crs=GEN_CRS,
            ).to_crs(crs)
            for level, frame in (("adm1", adm1), ("adm2", adm2)):
                path = folder / f"{c.lower()}_{level}{suffix}"
                path.unlink(missing_ok=True)
                if suffix == ".geojson":
                    frame.to_file(path, driver="GeoJSON", engine="pyogrio")
                else:
                    frame.to_file(
                        path, driver="GPKG", layer=f"{c.lower()}_{level}", engine="pyogrio"
                    )
    finally:
        pyogrio.set_gdal_config_options({"OGR_CURRENT_DATE": None})
