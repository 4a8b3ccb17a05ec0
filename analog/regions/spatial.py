"""Points to regions, and the equal-area projection used for areas and maps."""
from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd
import pyproj
import shapely

from ..errors import AnalogWarning, InputError, Problem

__all__ = ["assign_points", "equal_area_crs", "EqualArea", "region_areas_km2"]


def assign_points(lon, lat, regions, *, engine: str = "local", chunk_size: int = 200000) -> np.ndarray:
    """Region row position for each point (longitude, latitude in degrees, WGS84); -1 for none.

    Parameters
    ----------
    lon, lat : array-like of float
        Point coordinates in decimal degrees (EPSG:4326).
    regions : geopandas.GeoDataFrame
        Polygons with a ``region_id`` column, in any CRS (points are transformed to it).
    engine : {'local', 'dask'}, default='local'
        Query the spatial index in this process, or in chunks of ``chunk_size`` points with Dask's
        threaded scheduler. The results are identical.

    Returns
    -------
    ndarray of int
        Row position in ``regions`` (not the region_id), -1 where the point is in no region.

    Notes
    -----
    Coordinates are deduplicated first, so each distinct location is tested once. The predicate
    is ``intersects``: a point on a region's boundary belongs to it (``within`` would drop points
    on edges). A point on an edge shared by several regions, or in their overlap, goes to the
    candidate with the lowest ``region_id`` (string order), so the assignment is deterministic and
    never counts a record twice. A point inside a hole belongs to the region only if another
    polygon (for example an island region) covers it.
    """
    lon = np.asarray(lon, dtype=float)
    lat = np.asarray(lat, dtype=float)
    out = np.full(len(lon), -1, dtype=np.int64)
    if len(lon) == 0 or len(regions) == 0:
        return out
    xy, inverse = np.unique(np.column_stack([lon, lat]), axis=0, return_inverse=True)
    inverse = inverse.reshape(-1)
    crs = regions.crs
    if crs is None:
        warnings.warn("the regions layer has no CRS; it was taken to be longitude/latitude (EPSG:4326)",
                      AnalogWarning, stacklevel=2)
    elif not pyproj.CRS.from_user_input(crs).equals(pyproj.CRS.from_epsg(4326), ignore_axis_order=True):
        tr = pyproj.Transformer.from_crs("EPSG:4326", crs, always_xy=True)
        x, y = tr.transform(xy[:, 0], xy[:, 1])
        xy = np.column_stack([x, y])
    geoms = np.asarray(regions.geometry.values, dtype=object)
    tree = shapely.STRtree(geoms)
    # rank of each region_id in string order: the tie-break for shared edges and overlaps
    id_rank = np.empty(len(regions), dtype=np.int64)
    id_rank[np.argsort(regions["region_id"].astype(str).to_numpy(), kind="stable")] = np.arange(len(regions))

    def query(chunk: np.ndarray) -> np.ndarray:
        pts = shapely.points(chunk)
        pi, ri = tree.query(pts, predicate="intersects")
        best = np.full(len(chunk), -1, dtype=np.int64)
        if len(pi):
            order = np.lexsort((id_rank[ri], pi))
            pi, ri = pi[order], ri[order]
            first = np.r_[True, pi[1:] != pi[:-1]]
            best[pi[first]] = ri[first]
        return best

    if engine == "local":
        unique_region = query(xy)
    elif engine == "dask":
        try:
            import dask
        except ImportError as exc:  # pragma: no cover - optional dependency
            raise ImportError("engine='dask' needs Dask: pip install 'analog[dask]'") from exc
        starts = range(0, len(xy), chunk_size)
        parts = [dask.delayed(query)(xy[s:s + chunk_size]) for s in starts]
        unique_region = np.concatenate(dask.compute(*parts, scheduler="threads"))
    else:
        raise ValueError(f"`engine` was {engine!r} but is expected to be in {{'local', 'dask'}}")
    out[:] = unique_region[inverse]
    return out


@dataclass(frozen=True)
class EqualArea:
    """The equal-area CRS used for areas and maps, with a sentence naming it."""

    crs: pyproj.CRS
    proj: str    # PROJ string (or the user's CRS string)
    label: str   # e.g. "Lambert azimuthal equal-area, centred 45.50°N 3.20°E"


def equal_area_crs(regions, *, projection: str = "auto") -> EqualArea:
    """Choose the equal-area projection for a study from its regions' extent.

    Parameters
    ----------
    regions : geopandas.GeoDataFrame
    projection : str, default='auto'
        ``'auto'``: Lambert azimuthal equal-area on the WGS84 ellipsoid, centred on the centre of
        the regions' longitude/latitude bounding box (rounded to 0.01°). Anything else is read by
        ``pyproj.CRS.from_user_input``.

    Notes
    -----
    The azimuthal projection keeps areas true everywhere and distorts shapes least near its
    centre, which suits study areas of roughly equal extent in all directions (Snyder 1987,
    Map Projections: A Working Manual, USGS Professional Paper 1395, pp. 182-190). Extents that
    cross the antimeridian are not handled by 'auto'; pass a CRS instead.
    """
    if projection != "auto":
        try:
            crs = pyproj.CRS.from_user_input(projection)
        except pyproj.exceptions.CRSError as exc:
            raise InputError(Problem("study.toml", repr(projection), "'auto' or a CRS pyproj can read",
                                     "set [regions] projection to 'auto' or e.g. 'EPSG:3035'",
                                     column="[regions] projection")) from exc
        return EqualArea(crs, projection, crs.name)
    geo = regions.to_crs("EPSG:4326") if regions.crs is not None else regions
    minx, miny, maxx, maxy = geo.total_bounds
    lon0 = round(float((minx + maxx) / 2.0), 2)
    lat0 = round(float((miny + maxy) / 2.0), 2)
    proj = f"+proj=laea +lat_0={lat0:.2f} +lon_0={lon0:.2f} +x_0=0 +y_0=0 +ellps=WGS84 +units=m +no_defs"
    label = (f"Lambert azimuthal equal-area, centred {abs(lat0):.2f}°{'N' if lat0 >= 0 else 'S'} "
             f"{abs(lon0):.2f}°{'E' if lon0 >= 0 else 'W'}")
    return EqualArea(pyproj.CRS.from_proj4(proj), proj, label)


def region_areas_km2(regions, crs) -> pd.Series:
    """Area of each region in km² measured in ``crs`` (an equal-area CRS)."""
    return pd.Series(regions.to_crs(crs).geometry.area.to_numpy() / 1e6, index=regions.index)
