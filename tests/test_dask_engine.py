"""Engines: the Dask engine gives exactly the numbers of the local engine.

A real local Dask cluster (two worker processes) runs the occupancy binning, the spatial
assignment, the whole trajectory stage (age draws, parametric bootstrap, hindcast
resampling) and the regions stage on small invented studies; every table must equal the
local engine's, value for value. Faster checks at the end cover the grid lookup of the
spatial assignment (against a one-polygon-at-a-time reference) and the engine errors.
"""
from __future__ import annotations

import sys
import warnings
from pathlib import Path

import geopandas as gpd
import numpy as np
import pandas as pd
import pytest
import shapely
from pandas.testing import assert_frame_equal
from shapely.geometry import Point

from analog.engine import DaskEngine, LocalEngine, get_engine
from analog.errors import AnalogError, AnalogWarning
from analog.regions import assign_points
from analog.study import Study, StudyConfig
from analog.trajectory import PARAMS as TRAJ
from analog.trajectory import run_trajectory
from analog.trajectory.occupancy import build_occupancy

sys.path.insert(0, str(Path(__file__).resolve().parent / "combine"))
from synthetic_inputs import make_lines, make_regions, make_taxa  # noqa: E402


# ----------------------------------------------------------------- invented inputs

def fossil_study(seed: int = 4, n_taxa: int = 36, n_bins: int = 14) -> Study:
    """Invented fossil record: rise-and-fall, declining and flat taxa over 10-Myr bins.

    Locality ages are ranges of 2-14 Myr, so many occurrences span two bins and are
    redrawn in every age draw; coordinates repeat by locality.
    """
    rng = np.random.default_rng(seed)
    n_loc = 90
    rows = []
    for j in range(n_bins):
        young = j * 10.0 + rng.uniform(0, 8, n_loc)
        old = young + rng.uniform(2, 14, n_loc)
        lat, lon = rng.uniform(-50, 50, n_loc), rng.uniform(-160, 160, n_loc)
        loc = [f"L{j}_{k}" for k in range(n_loc)]
        for i in range(n_taxa):
            kind = i % 3
            if kind == 0:   # a hat ending at bin 1 + i // 3 % 4 (extinct)
                end, peak = 1 + (i // 3) % 4, 7 + (i // 3) % 4
                p = 0.4 * np.exp(-((j - peak) / 3.0) ** 2) if end <= j <= peak + 6 else 0.0
            elif kind == 1:  # declining toward the present
                p = min(0.05 + 0.03 * j, 0.5)
            else:           # flat
                p = 0.25
            hit = rng.random(n_loc) < p
            rows += [(f"g{i:02d}", old[k], young[k], lat[k], lon[k], loc[k]) for k in np.flatnonzero(hit)]
        rows += [("filler", old[k], young[k], lat[k], lon[k], loc[k]) for k in range(n_loc)]
    occ = pd.DataFrame(rows, columns=["taxon_id", "oldest_ma", "youngest_ma", "decimalLatitude",
                                      "decimalLongitude", "locationID"])
    occ.insert(0, "occurrenceID", [f"o{i}" for i in range(len(occ))])
    occ = occ.astype({"occurrenceID": "str", "taxon_id": "str", "locationID": "str"})
    ids = [f"g{i:02d}" for i in range(n_taxa)] + ["filler"]
    taxa = pd.DataFrame({"taxon_id": pd.array(ids, dtype="str"),
                         "scientificName": [f"Fictia {t}" for t in ids],
                         "extant": [i % 3 != 0 for i in range(n_taxa)] + [True]})
    intervals = pd.DataFrame({"interval_id": ["W1"], "name": ["Invented warming"], "oldest_ma": [45.0],
                              "youngest_ma": [35.0]})
    return Study(config=StudyConfig(name="engine check", seed=seed, folder=Path(".")), taxa=taxa,
                 fossil_occurrences=occ, modern_occurrences=pd.DataFrame(), regions=None, intervals=intervals)


def modern_study(seed: int = 8, n_taxa: int = 30, n_points: int = 60_000) -> Study:
    """Invented modern records over the six test regions: random points, repeated coordinates,
    and points exactly on shared edges, corners and the island's rim."""
    rng = np.random.default_rng(seed)
    taxa = make_taxa(n_taxa)
    lon = np.round(rng.uniform(9.5, 16.5, n_points), 4)
    lat = np.round(rng.uniform(39.5, 44.5, n_points), 4)
    edge = np.array([(12.0, 43.0), (14.0, 43.3), (12.0, 42.0), (12.0, 40.1), (12.8, 43.0), (12.9, 43.0),
                     (13.1, 42.95), (20.0, 50.0)] * 25)
    lon, lat = np.r_[lon, edge[:, 0]], np.r_[lat, edge[:, 1]]
    occ = pd.DataFrame({"occurrenceID": pd.array([f"m{i}" for i in range(len(lon))], dtype="str"),
                        "taxon_id": pd.array(taxa["taxon_id"].to_numpy()[rng.integers(0, n_taxa, len(lon))],
                                             dtype="str"),
                        "decimalLatitude": lat, "decimalLongitude": lon})
    cfg = StudyConfig(name="engine check", seed=seed, folder=None)
    empty = pd.DataFrame(columns=["occurrenceID", "taxon_id", "oldest_ma", "youngest_ma", "decimalLatitude",
                                  "decimalLongitude", "locationID"])
    return Study(config=cfg, taxa=taxa, fossil_occurrences=empty, modern_occurrences=occ, regions=make_regions(),
                 intervals=pd.DataFrame(), context=None)


def voronoi_regions(n: int = 40, seed: int = 2, crs: str = "EPSG:4326") -> gpd.GeoDataFrame:
    """Irregular invented regions sharing slanted edges, with one hole filled by an island."""
    rng = np.random.default_rng(seed)
    seeds = shapely.multipoints(np.column_stack([rng.uniform(0, 10, n), rng.uniform(0, 8, n)]))
    frame = shapely.box(0, 0, 10, 8)
    cells = [shapely.intersection(g, frame) for g in shapely.get_parts(shapely.voronoi_polygons(seeds))]
    big = int(np.argmax(shapely.area(cells)))
    c = shapely.centroid(cells[big]).buffer(0.15)
    cells[big] = cells[big].difference(c)
    cells.append(c.buffer(-0.05))             # island inside the hole, leaving an empty ring
    ids = [f"V{i:03d}" for i in range(len(cells))]
    gdf = gpd.GeoDataFrame({"region_id": ids, "name": ids}, geometry=cells, crs="EPSG:4326")
    return gdf.to_crs(crs) if crs != "EPSG:4326" else gdf


def _brute_force(lon, lat, regions):
    """Reference: each point against each polygon with shapely ``covers``, lowest region_id on ties
    (points are projected to the regions' CRS first, as the assignment does)."""
    import pyproj

    x, y = np.asarray(lon, float), np.asarray(lat, float)
    if regions.crs != "EPSG:4326":
        x, y = pyproj.Transformer.from_crs("EPSG:4326", regions.crs, always_xy=True).transform(x, y)
    ids = regions["region_id"].tolist()
    geoms = list(regions.geometry)
    out = []
    for px, py in zip(x, y):
        pt = Point(px, py)
        hits = [ids[i] for i, g in enumerate(geoms) if g.covers(pt)]
        out.append(ids.index(min(hits)) if hits else -1)
    return np.array(out)


# ----------------------------------------------------------------- a real local cluster

@pytest.fixture(scope="module")
def dask_engine():
    distributed = pytest.importorskip("distributed")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")  # port notices from a shared machine
        cluster = distributed.LocalCluster(n_workers=2, threads_per_worker=1, processes=True,
                                           dashboard_address=None, silence_logs=40)
    client = distributed.Client(cluster, set_as_default=False)
    engine = DaskEngine(client=client)
    try:
        yield engine
    finally:
        engine.close()  # leaves a client it did not create open
        client.close()
        cluster.close()
    assert client.status == "closed"


@pytest.mark.dask
@pytest.mark.parametrize("quota", [0, 8])
def test_occupancy_binning_is_identical_on_dask(dask_engine, quota):
    study = fossil_study()
    kw = dict(age_handling="monte_carlo", age_draws=12, quota=quota, subsample_reps=3)  # 3 chunks of draws
    local = build_occupancy(study.fossil_occurrences, study.taxa, rng=np.random.default_rng(21), engine="local", **kw)
    dask = build_occupancy(study.fossil_occurrences, study.taxa, rng=np.random.default_rng(21),
                           engine=dask_engine, **kw)
    assert len(local.table) > 200 and local.table["occupied"].gt(0).sum() > 100
    assert_frame_equal(local.table, dask.table, check_exact=True)
    assert_frame_equal(local.bins, dask.bins, check_exact=True)
    # a different seed moves the counts: the comparison above is not vacuous
    other = build_occupancy(study.fossil_occurrences, study.taxa, rng=np.random.default_rng(22), **kw)
    assert not other.table["occupied"].equals(local.table["occupied"])


@pytest.mark.dask
@pytest.mark.parametrize("index", ["grid", "tree"])
def test_spatial_assignment_is_identical_on_dask(dask_engine, index):
    occ = modern_study().modern_occurrences
    lon, lat = occ["decimalLongitude"].to_numpy(), occ["decimalLatitude"].to_numpy()
    regions = make_regions()
    local = assign_points(lon, lat, regions, engine=LocalEngine(), index=index, chunk_size=7_000)
    dask = assign_points(lon, lat, regions, engine=dask_engine, index=index, chunk_size=7_000)
    np.testing.assert_array_equal(local, dask)
    assert (local == -1).sum() > 0 and len(np.unique(local)) == 7  # six regions and 'none'


@pytest.mark.dask
def test_trajectory_stage_is_identical_on_dask(dask_engine, monkeypatch):
    import analog.trajectory.extinction as extinction

    monkeypatch.setattr(extinction, "_ROWS_PER_CHUNK", 150)  # several bootstrap chunks for a small study
    study = fossil_study()
    params = TRAJ(age_draws=10, n_bootstrap=40, n_null=200, n_skill_boot=150, min_series_bins=4)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        local = run_trajectory(study, params, rng=np.random.default_rng(5), engine="local")
        dask = run_trajectory(study, params, rng=np.random.default_rng(5), engine=dask_engine)
    for name, table in local.tables().items():
        assert_frame_equal(table, dask.tables()[name], check_exact=True, obj=name)
    assert_frame_equal(local.risk_draws, dask.risk_draws, check_exact=True)
    assert local.risk_draws.notna().any(axis=None) and local.risk_draws.shape[1] == 40
    assert np.isfinite(local.hindcast["auc_low"]).any()
    assert local.skill == dask.skill or (np.isnan(local.skill) and np.isnan(dask.skill))


@pytest.mark.dask
def test_regions_stage_is_identical_on_dask(dask_engine):
    from analog.combine import PARAMS as COMBINE
    from analog.combine import combine_evidence
    from analog.regions import PARAMS as REGIONS
    from analog.regions import assess_regions

    study = modern_study()
    analog, traj = make_lines(study)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        combined = combine_evidence(study, analog, traj, COMBINE(n_boot=30), rng=np.random.default_rng(1))
        local = assess_regions(study, combined, REGIONS(), rng=np.random.default_rng(2), engine="local")
        dask = assess_regions(study, combined, REGIONS(), rng=np.random.default_rng(2), engine=dask_engine)
    for name, table in local.tables().items():
        assert_frame_equal(table, dask.tables()[name], check_exact=True, obj=name)
    assert local.unassigned == dask.unassigned > 0
    # the integer-coded presence counts equal a plain pandas count of the brute-force assignment
    occ = study.modern_occurrences.iloc[:3000]
    pos = _brute_force(occ["decimalLongitude"], occ["decimalLatitude"], study.regions)
    ids = study.regions["region_id"].to_numpy()
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)  # about half the points lie outside the regions
        sub = assess_regions(Study(**{**study.__dict__, "modern_occurrences": occ}), combined, REGIONS(),
                             rng=np.random.default_rng(2))
    want = (pd.DataFrame({"region_id": ids[pos[pos >= 0]], "taxon_id": occ["taxon_id"].to_numpy()[pos >= 0]})
            .groupby(["region_id", "taxon_id"]).size().rename("n_records").reset_index())
    got = sub.presence[["region_id", "taxon_id", "n_records"]]
    assert_frame_equal(got.astype({"region_id": object, "taxon_id": object}),
                       want.astype({"region_id": object, "taxon_id": object}), check_dtype=False)


# ----------------------------------------------------------------- grid lookup and errors (no cluster)

@pytest.mark.parametrize("crs", ["EPSG:4326", "EPSG:3035"])
def test_grid_lookup_matches_tree_and_brute_force(crs):
    rng = np.random.default_rng(11)
    regions = voronoi_regions(crs=crs)
    geo = regions.to_crs("EPSG:4326")
    # random points, plus every boundary vertex and midpoints of boundary segments
    verts = shapely.get_coordinates(shapely.boundary(geo.geometry.values))
    mids = (verts[:-1] + verts[1:]) / 2.0
    pts = np.vstack([np.column_stack([rng.uniform(-0.5, 10.5, 4000), rng.uniform(-0.5, 8.5, 4000)]),
                     verts, mids[::3]])
    grid = assign_points(pts[:, 0], pts[:, 1], regions, index="grid")
    tree = assign_points(pts[:, 0], pts[:, 1], regions, index="tree")
    np.testing.assert_array_equal(grid, tree)
    np.testing.assert_array_equal(grid, _brute_force(pts[:, 0], pts[:, 1], regions))
    assert (grid == len(regions) - 1).any() and (grid == -1).any()  # the island and the empty ring/outside


def test_missing_dask_gives_the_install_hint(monkeypatch):
    monkeypatch.setitem(sys.modules, "distributed", None)  # import fails as if not installed
    with pytest.raises(AnalogError, match=r'pip install "analog\[dask\]"'):
        get_engine("dask")


def test_engine_names_and_options_are_checked():
    with pytest.raises(AnalogError, match="`engine` was 'spark'"):
        get_engine("spark")
    with pytest.raises(AnalogError, match="scheduler address .* engine 'local'"):
        get_engine("local", scheduler="tcp://127.0.0.1:8786")
    engine = LocalEngine()
    assert get_engine(engine) is engine and isinstance(get_engine(None), LocalEngine)
    assert engine.map(divmod, [7, 9], shared=4) == [(1, 3), (2, 1)]


def test_cli_rejects_a_scheduler_with_the_local_engine(tmp_path, capsys):
    from analog.cli import main

    code = main(["demo", "--out", str(tmp_path / "out"), "--engine", "local", "--scheduler", "tcp://127.0.0.1:1"])
    assert code == 2
    assert "--scheduler needs --engine dask" in capsys.readouterr().err
    assert not (tmp_path / "out").exists()
