"""Each country's own boundary files, digitised "independently" so borders do not line up.

Along every land border the two countries' copies are pushed apart or into each other along
the border's normal by a profile that alternates between overlap and gap every few tens of
kilometres (a squashed sine, so it spends little length near zero), plus a small wavy field
of each country's own. Every vertex of a country moves by one function of its position, so
inside a country shared vertices move together and districts still tile exactly; across a
border the two copies differ by up to ``2 * MAX_SHIFT`` - as files from different mapping
agencies do.
"""

from __future__ import annotations

from pathlib import Path

import geopandas as gpd
import numpy as np
import pyogrio
import shapely

from ._world import GEN_CRS, World

MAX_SHIFT = 135.0  # metres; two countries' shifts add up to at most 270 m
_PROFILE_M = 115.0  # each side's share of the gap/overlap profile (so up to 230 m between them)
_WAVE_M = MAX_SHIFT - _PROFILE_M  # each country's own small wavy shift
_TAPER_M = (3_000.0, 12_000.0)  # full profile this close to the border, none beyond the second
# Each country's file: (format suffix, CRS, column names for adm2 and adm1).
FILES = {
    "TVR": (".gpkg", "EPSG:4326", ("code", "name", "prov_code"), ("code", "name")),
    "OSK": (".geojson", "EPSG:4326", ("code", "name", "prov_code"), ("code", "name")),
    "MRW": (".gpkg", "EPSG:32727", ("code", "name", "prov_code"), ("code", "name")),
    "QLN": (".gpkg", "EPSG:32728", ("dist_id", "dist_name", "prov_id"), ("prov_id", "prov_name")),
}
# GeoPackages record a "last change" time; pin it so regeneration is reproducible.
_FIXED_DATE = "2026-12-01T00:00:00Z"


def _waves(rng):
    """Draw a smooth random 2-D displacement field bounded by ``_WAVE_M`` (plane waves)."""
    k = 4
    wavelength = rng.uniform(12_000, 60_000, (2, k))
    angle = rng.uniform(0, 2 * np.pi, (2, k))
    phase = rng.uniform(0, 2 * np.pi, (2, k))
    amp = rng.uniform(0.3, 1.0, (2, k))
    amp = amp / amp.sum(axis=1, keepdims=True) * _WAVE_M / np.sqrt(2)
    kx = 2 * np.pi / wavelength * np.cos(angle)
    ky = 2 * np.pi / wavelength * np.sin(angle)

    def shift(xy):
        x, y = xy[:, :1], xy[:, 1:2]
        dx = (amp[0] * np.cos(x * kx[None, 0] + y * ky[None, 0] + phase[None, 0])).sum(1)
        dy = (amp[1] * np.cos(x * kx[None, 1] + y * ky[None, 1] + phase[None, 1])).sum(1)
        return np.column_stack([dx, dy])

    return shift


def _land_borders(world: World) -> list:
    """(country a, country b, line) for every land border, from the true geometry."""
    d = world.districts
    union = {c: shapely.union_all(d.geometry.values[d["country"].values == c]) for c in FILES}
    out = []
    for i, a in enumerate(FILES):
        for b in list(FILES)[i + 1 :]:
            shared = shapely.intersection(union[a].boundary, union[b].boundary)
            lines = [
                g
                for g in getattr(shapely.line_merge(shared), "geoms", [shapely.line_merge(shared)])
                if g.geom_type == "LineString" and g.length > 0
            ]
            out.extend((a, b, line, union) for line in lines)
    return out


class _Near:
    """Distances from many points to one geometry, looked up through an STRtree of its segments.

    GEOS measures a point against every segment of a line or polygon; the borders and country
    outlines of a large world have hundreds of thousands of segments, so measuring every vertex
    against them directly grows with the product. The tree finds the few segments near each
    point; the distances are those GEOS gives (0 inside a polygon, else the nearest segment).
    """

    def __init__(self, geom):
        self.geom = geom
        rings = shapely.get_parts(geom.boundary if geom.geom_type.endswith("Polygon") else geom)
        segs = []
        for ring in rings:
            c = shapely.get_coordinates(ring)
            segs.append(shapely.linestrings(np.stack([c[:-1], c[1:]], axis=1)))
        self.tree = shapely.STRtree(np.concatenate(segs))
        shapely.prepare(geom)

    def within(self, pts, distance):
        """Positions of ``pts`` no further than ``distance`` from the geometry."""
        hit, _ = self.tree.query(pts, predicate="dwithin", distance=distance)
        return np.unique(hit)

    def distance(self, pts):
        """Distance of each point to the geometry (0 inside a polygon or on it)."""
        out = np.zeros(len(pts))
        outside = ~shapely.intersects(self.geom, pts)
        if outside.any():
            _, dist = self.tree.query_nearest(pts[outside], return_distance=True, all_matches=False)
            out[outside] = dist
        return out


def _profile_shift(xy, own, other, line, union, params):
    """Push points near ``line`` along its normal, towards ``other``, by the border's profile.

    ``line`` and ``union``'s values are :class:`_Near` lookups of the border and the countries.
    """
    wavelength, phase = params
    lo, hi = _TAPER_M
    out = np.zeros_like(xy)
    cand = line.within(shapely.points(xy), hi)  # only these can lie within the taper
    pts = shapely.points(xy[cand])
    dist = shapely.distance(pts, line.geom)
    w = np.clip((hi - dist) / (hi - lo), 0, 1)
    near = w > 0
    if not near.any():
        return out
    line = line.geom
    s = shapely.line_locate_point(line, pts[near])
    p0 = shapely.get_coordinates(shapely.line_interpolate_point(line, s - 150))
    p1 = shapely.get_coordinates(shapely.line_interpolate_point(line, s + 150))
    q = shapely.get_coordinates(shapely.line_interpolate_point(line, s))
    t = p1 - p0
    t /= np.maximum(np.hypot(t[:, 0], t[:, 1]), 1e-9)[:, None]
    n = np.column_stack([-t[:, 1], t[:, 0]])
    probe = shapely.points(q + 300 * n)
    towards = union[other].distance(probe) < union[own].distance(probe)
    n *= np.where(towards, 1.0, -1.0)[:, None]
    m = np.tanh(3 * np.sin(2 * np.pi * s / wavelength + phase))  # +1 overlap, -1 gap
    out[cand[near]] = (w[near] * _PROFILE_M * m)[:, None] * n
    return out


def _field(country, borders, params, rng):
    """Draw a country's displacement: border profiles plus its own small waves."""
    waves = _waves(rng)

    def shift(xy):
        total = xy + waves(xy)
        for k, (a, b, line, union) in enumerate(borders):
            if country in (a, b):
                other = b if country == a else a
                total += _profile_shift(xy, country, other, line, union, params[k])
        return total

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
    borders = _land_borders(world)
    if borders:  # index each border and country once, for every vertex of every country
        near = {c: _Near(g) for c, g in borders[0][3].items()}
        borders = [(a, b, _Near(line), near) for a, b, line, _union in borders]
    params = [(rng.uniform(45_000, 90_000), rng.uniform(0, 2 * np.pi)) for _ in borders]
    for c in FILES:
        d = world.districts[world.districts["country"] == c]
        g = shapely.transform(d.geometry.values, _field(c, borders, params, rng))
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
