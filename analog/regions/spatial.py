"""Points to regions, and the equal-area projection used for areas and maps."""
from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
import pandas as pd
import pyproj
import shapely

from ..errors import AnalogError, AnalogWarning, InputError, Problem

__all__ = ["assign_points", "equal_area_crs", "EqualArea", "region_areas_km2"]


def assign_points(lon, lat, regions, *, engine=None, chunk_size: int = 1_000_000,
                  index: str = "auto") -> np.ndarray:
    """Region row position for each point (longitude, latitude in degrees, WGS84); -1 for none.

    Parameters
    ----------
    lon, lat : array-like of float
        Point coordinates in decimal degrees (EPSG:4326).
    regions : geopandas.GeoDataFrame
        Polygons with a ``region_id`` column, in any CRS (points are transformed to it).
    engine : {'local', 'dask'} or analog.engine.Engine, optional
        Where the chunks of points are tested (default: in this process). The results
        are identical.
    chunk_size : int, default=1_000_000
        Points per chunk of work.
    index : {'auto', 'grid', 'tree'}, default='auto'
        'tree' tests every distinct location exactly; 'grid' first looks each point up in
        a grid whose cells no region boundary comes near and tests only the rest; 'auto'
        uses the grid from 50,000 points on. All three give the same answer.

    Returns
    -------
    ndarray of int
        Row position in ``regions`` (not the region_id), -1 where the point is in no region.

    Notes
    -----
    The predicate is ``intersects``: a point on a region's boundary belongs to it (``within``
    would drop points on edges). A point on an edge shared by several regions, or in their
    overlap, goes to the candidate with the lowest ``region_id`` (string order), so the
    assignment is deterministic and never counts a record twice. A point inside a hole belongs
    to the region only if another polygon (for example an island region) covers it.

    *Exact test.* Repeated coordinates are tested once (hashing, not sorting); candidates come
    from the bounding boxes in an STR-tree and are confirmed with prepared polygons.

    *Grid lookup.* Region boundaries are densified to segments no longer than half a grid
    cell; every cell within reach of a boundary vertex (half a segment plus a margin of 10⁻⁶
    cell) is marked as near a boundary. The remaining cells hold no boundary point, so each
    4-connected group of them lies inside the same set of polygons, found by testing one cell
    centre per group. Points in those cells take the group's answer; the others are tested
    exactly. The margin keeps rounding in the cell arithmetic from crossing a boundary.
    """
    from ..engine import engine_scope, split_counts

    if index not in ("auto", "grid", "tree"):
        raise AnalogError(f"`index` was {index!r} but is expected to be in {{'auto', 'grid', 'tree'}}")
    lon = np.asarray(lon, dtype=float)
    lat = np.asarray(lat, dtype=float)
    if len(lon) == 0 or len(regions) == 0:
        with engine_scope(engine):  # still reject an unknown engine name
            return np.full(len(lon), -1, dtype=np.int64)
    crs = regions.crs
    to_crs = None
    if crs is None:
        warnings.warn("the regions layer has no CRS; it was taken to be longitude/latitude (EPSG:4326)",
                      AnalogWarning, stacklevel=2)
    elif not pyproj.CRS.from_user_input(crs).equals(pyproj.CRS.from_epsg(4326), ignore_axis_order=True):
        to_crs = pyproj.CRS.from_user_input(crs).to_wkt()
    # a private copy: preparing polygons for fast tests must not touch the caller's objects
    geoms = shapely.from_wkb(shapely.to_wkb(np.asarray(regions.geometry.values, dtype=object)))
    # rank of each region_id in string order: the tie-break for shared edges and overlaps
    id_rank = np.empty(len(regions), dtype=np.int64)
    id_rank[np.argsort(regions["region_id"].astype(str).to_numpy(), kind="stable")] = np.arange(len(regions))
    use_grid = index == "grid" or (index == "auto" and len(lon) >= _GRID_FROM)
    grid = _BoundaryGrid.build(geoms, id_rank, n_points=len(lon)) if use_grid else None
    chunks = [(lon[s:e], lat[s:e]) for s, e in split_counts(len(lon), chunk_size)]
    with engine_scope(engine) as eng:
        parts = eng.map(_assign_chunk, chunks, shared=(geoms, id_rank, grid, to_crs))
    return np.concatenate(parts)


_GRID_FROM = 50_000          # points from which 'auto' builds the grid
_GRID_MAX_CELLS = 4_000_000  # 16 MB of int32 lookup table
_NEAR_BOUNDARY = -2


def _distinct_locations(xy: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Code of each point's distinct location (-1 for a missing coordinate) and the locations."""
    ok = np.isfinite(xy).all(axis=1)
    codes = np.full(len(xy), -1, dtype=np.int64)
    # a complex number holds both coordinates, so one hash table finds the distinct pairs
    c, uniq = pd.factorize(xy[ok, 0] + 1j * xy[ok, 1], sort=False, use_na_sentinel=True)
    codes[ok] = c
    uniq = np.asarray(uniq)
    return codes, np.column_stack([uniq.real, uniq.imag])


def _exact(tree, geoms: np.ndarray, id_rank: np.ndarray, xy: np.ndarray) -> np.ndarray:
    """Lowest-ranked region whose polygon intersects each location (-1 for none).

    Bounding-box candidates from the tree, confirmed by ``intersects`` on prepared polygons.
    """
    best = np.full(len(xy), -1, dtype=np.int64)
    if not len(xy):
        return best
    pts = shapely.points(xy)
    pi, ri = tree.query(pts)
    hit = shapely.intersects(geoms[ri], pts[pi])
    pi, ri = pi[hit], ri[hit]
    if len(pi):
        order = np.lexsort((id_rank[ri], pi))
        pi, ri = pi[order], ri[order]
        first = np.r_[True, pi[1:] != pi[:-1]]
        best[pi[first]] = ri[first]
    return best


def _exact_distinct(geoms, id_rank, xy) -> np.ndarray:
    """:func:`_exact` testing each distinct location once."""
    codes, uniq = _distinct_locations(xy)
    shapely.prepare(geoms)
    found = _exact(shapely.STRtree(geoms), geoms, id_rank, uniq)
    return np.where(codes >= 0, found[np.maximum(codes, 0)], -1) if len(found) else np.full(len(xy), -1)


def _assign_chunk(chunk, shared) -> np.ndarray:
    """Region position of each point of one chunk (module level so a cluster can run it)."""
    lon, lat = chunk
    geoms, id_rank, grid, to_crs = shared
    if to_crs is not None:
        lon, lat = pyproj.Transformer.from_crs("EPSG:4326", to_crs, always_xy=True).transform(lon, lat)
    xy = np.column_stack([np.asarray(lon, dtype=float), np.asarray(lat, dtype=float)])
    if grid is None:
        return _exact_distinct(geoms, id_rank, xy)
    best = grid.lookup(xy)
    todo = np.flatnonzero(best == _NEAR_BOUNDARY)
    if len(todo):
        best[todo] = _exact_distinct(geoms, id_rank, xy[todo])
    return best


@dataclass(frozen=True)
class _BoundaryGrid:
    """Regular grid over the regions: each cell's region, or a mark that a boundary is near."""

    x0: float
    y0: float
    dx: float
    dy: float
    table: np.ndarray  # (ny, nx) int32: region position, -1 for none, -2 near a boundary

    @classmethod
    def build(cls, geoms: np.ndarray, id_rank: np.ndarray, *, n_points: int) -> "_BoundaryGrid":
        from scipy import ndimage

        minx, miny, maxx, maxy = shapely.total_bounds(geoms)
        w, h = max(maxx - minx, 1e-9), max(maxy - miny, 1e-9)
        cells = int(np.clip(n_points, 65_536, _GRID_MAX_CELLS))
        side = float(np.sqrt(w * h / cells))
        dx = dy = side
        # one spare cell on every side: the outer ring holds no boundary
        x0, y0 = minx - dx, miny - dy
        nx = int(np.ceil(w / dx)) + 3
        ny = int(np.ceil(h / dy)) + 3
        near = np.zeros((ny, nx), dtype=bool)
        seg = 0.5 * side
        verts = shapely.get_coordinates(shapely.segmentize(shapely.boundary(geoms), seg))
        reach = 0.5 * seg + 1e-6 * side
        for sx in (-reach, reach):
            ix = np.floor((verts[:, 0] + sx - x0) / dx).astype(np.int64)
            for sy in (-reach, reach):
                iy = np.floor((verts[:, 1] + sy - y0) / dy).astype(np.int64)
                near[np.clip(iy, 0, ny - 1), np.clip(ix, 0, nx - 1)] = True
        labels, n_groups = ndimage.label(~near)
        table = np.full((ny, nx), _NEAR_BOUNDARY, dtype=np.int32)
        if n_groups:
            flat = labels.ravel()
            first = np.full(n_groups + 1, len(flat), dtype=np.int64)   # first cell of each group
            np.minimum.at(first, flat, np.arange(len(flat)))
            first = first[1:]                                         # label 0 = near a boundary
            iy, ix = np.divmod(first, nx)
            centres = np.column_stack([x0 + (ix + 0.5) * dx, y0 + (iy + 0.5) * dy])
            shapely.prepare(geoms)
            answer = _exact(shapely.STRtree(geoms), geoms, id_rank, centres)
            lut = np.concatenate([[_NEAR_BOUNDARY], answer]).astype(np.int32)
            table = lut[labels]
        return cls(float(x0), float(y0), dx, dy, table)

    def lookup(self, xy: np.ndarray) -> np.ndarray:
        """Region position per location from the grid; -2 where it must be tested exactly."""
        ny, nx = self.table.shape
        ix = np.floor((xy[:, 0] - self.x0) / self.dx)
        iy = np.floor((xy[:, 1] - self.y0) / self.dy)
        inside = (ix >= 0) & (ix < nx) & (iy >= 0) & (iy < ny)  # False for NaN too
        out = np.full(len(xy), -1, dtype=np.int64)   # off the grid: beyond every polygon's bounds
        out[inside] = self.table[iy[inside].astype(np.int64), ix[inside].astype(np.int64)]
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
