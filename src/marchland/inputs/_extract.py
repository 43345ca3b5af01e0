"""Feed exactextract from memory: units as WKB, a small raster as one array.

exactextract's own GeoDataFrame source turns every polygon into a GeoJSON string through
``__geo_interface__`` and its rasterio source reads one window per polygon through Python;
at 10,000 units the two took about 90 % of a zonal sum (4.5 s of 5 s). Handing the same
geometries as WKB and the same cells as one masked array gives identical statistics (checked
at 10,000 units) in a tenth of the time.
"""

from __future__ import annotations

import numpy as np
import shapely
from exactextract.feature import FeatureSource, JSONFeature
from exactextract.raster import NumPyRasterSource, RasterioRasterSource

#: Rasters up to this many cells are read whole (float32: 200 MB); larger ones window by window.
MAX_CELLS_IN_MEMORY = 50_000_000


class _WkbFeature(JSONFeature):
    """One unit: its position as ``_uid`` and its geometry as WKB."""

    def __init__(self, uid: int, wkb: bytes):
        super().__init__({"type": "Feature", "properties": {"_uid": uid}})
        self._wkb = wkb

    def geometry(self) -> bytes:
        """Return the geometry as WKB (exactextract reads bytes as WKB)."""
        return self._wkb


class WkbFeatures(FeatureSource):
    """Polygons (a shapely array) as exactextract features numbered 0..n-1 in ``_uid``."""

    def __init__(self, geoms: np.ndarray, srs_wkt: str | None):
        super().__init__()
        self._wkb = shapely.to_wkb(np.asarray(geoms))
        self._srs = srs_wkt

    def count(self) -> int:
        """Return the number of features."""
        return len(self._wkb)

    def __iter__(self):
        """Yield the features in order."""
        for i, wkb in enumerate(self._wkb):
            yield _WkbFeature(i, wkb)

    def srs_wkt(self) -> str | None:
        """Return the CRS as WKT."""
        return self._srs


def raster_source(src, band: int = 1):
    """Return an exactextract source for an open rasterio dataset, in memory when small.

    A rotated, scaled or very large raster keeps exactextract's rasterio source (which rejects
    rotation and applies scale and offset itself).
    """
    gt = src.get_transform()
    plain = gt[2] == 0 and gt[4] == 0 and src.scales[band - 1] == 1 and src.offsets[band - 1] == 0
    if not plain or src.width * src.height > MAX_CELLS_IN_MEMORY:
        return RasterioRasterSource(src, band)
    nodata = src.nodata
    if nodata is not None and not src.dtypes[band - 1].startswith("float"):
        nodata = int(nodata)  # as exactextract's rasterio source gives it
    b = src.bounds
    return NumPyRasterSource(
        src.read(band, masked=True),
        b.left,
        b.bottom,
        b.right,
        b.top,
        nodata=nodata,
        srs_wkt=src.crs.wkt if src.crs else None,
    )
