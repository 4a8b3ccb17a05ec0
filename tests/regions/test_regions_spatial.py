"""Point assignment and the equal-area projection."""
from __future__ import annotations

import sys
from pathlib import Path

import geopandas as gpd
import numpy as np
import pyproj
import pytest
import shapely
from shapely.geometry import Point, box

from analog.errors import InputError
from analog.regions import assign_points, equal_area_crs, region_areas_km2

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "combine"))
from synthetic_inputs import make_regions  # noqa: E402


def _brute_force(lon, lat, regions):
    """Reference: test every point against every polygon with shapely's ``covers`` (interior or
    boundary), one pair at a time, and keep the lowest region_id among the hits."""
    ids = regions["region_id"].tolist()
    geoms = list(regions.geometry)
    out = []
    for x, y in zip(lon, lat):
        pt = Point(x, y)
        hits = [ids[i] for i, g in enumerate(geoms) if g.covers(pt)]
        out.append(ids.index(min(hits)) if hits else -1)
    return np.array(out)


def _edge_and_hole_points(rng):
    # points on shared edges (x=12 between R1/R2, x=14 between R2/R3, y=42 between R1/R4), on the
    # shared corner (12, 42), on the edge shared by R4 and the small R5 (x=12, y in 40..40.3),
    # inside R2's hole but outside the island, on the hole's rim, and on the island's boundary
    pts = [(12.0, 43.0), (12.0, 42.5), (14.0, 43.3), (11.0, 42.0), (12.0, 42.0), (12.0, 40.1),
           (12.85, 43.15), (12.8, 43.0), (13.2, 42.9), (12.9, 43.0), (13.1, 42.95), (16.0, 43.0),
           (10.0, 40.0), (20.0, 50.0)]
    ys = rng.uniform(42, 44, 20)
    pts += [(12.0, y) for y in ys] + [(14.0, y) for y in ys]
    return np.array(pts)


def test_assignment_matches_brute_force_point_in_polygon():
    rng = np.random.default_rng(3)
    regions = make_regions()
    rand = np.column_stack([rng.uniform(9.5, 16.5, 600), rng.uniform(39.5, 44.5, 600)])
    pts = np.vstack([rand, _edge_and_hole_points(rng), rand[:50]])  # repeated coordinates too
    got = assign_points(pts[:, 0], pts[:, 1], regions)
    want = _brute_force(pts[:, 0], pts[:, 1], regions)
    np.testing.assert_array_equal(got, want)
    ids = regions["region_id"].to_numpy()
    # the specific edge cases, spelled out
    lookup = {tuple(p): (ids[g] if g >= 0 else None) for p, g in zip(pts, got)}
    assert lookup[(12.0, 43.0)] == "R1"       # R1 | R2 shared edge -> lowest id
    assert lookup[(14.0, 43.3)] == "R2"       # R2 | R3 shared edge
    assert lookup[(12.0, 42.0)] == "R1"       # corner of R1, R2, R4
    assert lookup[(12.0, 40.1)] == "R4"       # R4 | R5 shared edge
    assert lookup[(12.85, 43.15)] is None     # in R2's hole, off the island
    assert lookup[(12.8, 43.0)] == "R2"       # on the hole's rim: R2's boundary
    assert lookup[(12.9, 43.0)] == "R6"       # on the island's boundary
    assert lookup[(20.0, 50.0)] is None


def test_assignment_in_projected_crs_matches_geographic():
    rng = np.random.default_rng(5)
    regions = make_regions()
    lon, lat = rng.uniform(10, 16, 400), rng.uniform(40, 44, 400)
    # keep points clear of the polygon boundaries, where reprojection rounding may move them across
    clear = regions.boundary.union_all().distance(shapely.points(lon, lat)) > 1e-3
    lon, lat = lon[clear], lat[clear]
    a = assign_points(lon, lat, regions)
    b = assign_points(lon, lat, regions.to_crs("EPSG:3035"))
    np.testing.assert_array_equal(a, b)


@pytest.mark.dask
def test_dask_engine_gives_identical_assignment():
    rng = np.random.default_rng(9)
    regions = make_regions()
    pts = np.vstack([np.column_stack([rng.uniform(9.5, 16.5, 3000), rng.uniform(39.5, 44.5, 3000)]),
                     _edge_and_hole_points(rng)])
    local = assign_points(pts[:, 0], pts[:, 1], regions)
    chunked = assign_points(pts[:, 0], pts[:, 1], regions, engine="dask", chunk_size=1000)
    np.testing.assert_array_equal(local, chunked)


def test_bad_engine_is_rejected():
    with pytest.raises(ValueError, match="`engine` was 'spark'"):
        assign_points([11.0], [41.0], make_regions(), engine="spark")


def test_auto_projection_centred_on_extent():
    ea = equal_area_crs(make_regions())
    assert "+proj=laea" in ea.proj and "+lat_0=42.00" in ea.proj and "+lon_0=13.00" in ea.proj
    assert ea.label == "Lambert azimuthal equal-area, centred 42.00°N 13.00°E"


def test_user_projection_is_checked():
    with pytest.raises(InputError, match=r"\[regions\] projection"):
        equal_area_crs(make_regions(), projection="not a crs at all")
    assert equal_area_crs(make_regions(), projection="EPSG:3035").crs.to_epsg() == 3035


def _zone_area_km2(lat1, lat2, dlon_deg, a=6378137.0, f=1 / 298.257223563):
    """Area of an ellipsoidal quadrangle bounded by two parallels and two meridians.

    Snyder (1987), Map Projections: A Working Manual, USGS Prof. Paper 1395, eq. 3-12 for q;
    the area between parallels over Δλ is a²Δλ(q2 - q1)/2 (for a sphere this reduces to
    a²Δλ(sin φ2 - sin φ1)).
    """
    e2 = f * (2 - f)
    e = np.sqrt(e2)

    def q(phi):
        s = np.sin(np.radians(phi))
        return (1 - e2) * (s / (1 - e2 * s * s) - 1 / (2 * e) * np.log((1 - e * s) / (1 + e * s)))

    return a * a * np.radians(dlon_deg) * (q(lat2) - q(lat1)) / 2 / 1e6


@pytest.mark.parametrize("lat0", [0.0, 45.0, 70.0])
def test_equal_area_matches_geodesic_area_of_one_degree_cell(lat0):
    cell = box(10.0, lat0, 11.0, lat0 + 1.0)
    # densify so the projected polygon and the geodesic polygon follow the parallels closely
    dense = shapely.segmentize(cell, max_segment_length=0.005)
    regions = gpd.GeoDataFrame({"region_id": ["c"], "name": ["cell"]}, geometry=[dense], crs="EPSG:4326")
    ea = equal_area_crs(regions)
    got = float(region_areas_km2(regions, ea.crs).iloc[0])
    # reference library: pyproj.Geod.geometry_area_perimeter on the WGS84 ellipsoid
    geod_area, _ = pyproj.Geod(ellps="WGS84").geometry_area_perimeter(dense)
    assert got == pytest.approx(abs(geod_area) / 1e6, rel=1e-5)  # rel 1e-5: densified edges, float32-free
    # and the closed form for the quadrangle (Snyder 1987 eq. 3-12); the densified edges are
    # chords, so allow 1e-5
    assert got == pytest.approx(_zone_area_km2(lat0, lat0 + 1.0, 1.0), rel=1e-5)
