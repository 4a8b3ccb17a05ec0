"""Occupancy series on hand-built examples with counts worked out by hand."""
import numpy as np
import pandas as pd
import pytest
from pyproj import Geod, Transformer
from scipy import stats as sps
import shapely
from shapely.geometry import Polygon

from analog.errors import AnalogError
from analog.reference import load_timescale
from analog.trajectory.occupancy import EQUAL_AREA_CRS, build_occupancy, sampling_units, time_bins


def _occ(rows):
    """rows: (taxon, youngest, oldest, locationID, lat, lon)."""
    df = pd.DataFrame(rows, columns=["taxon_id", "youngest_ma", "oldest_ma", "locationID", "decimalLatitude",
                                     "decimalLongitude"])
    df.insert(0, "occurrenceID", [f"o{i}" for i in range(len(df))])
    return df


# Bin 0 = 0-10 Ma, bin 1 = 10-20 Ma, bin 2 = 20-30 Ma.
# Bin 0 localities: L1 L2 L3 (3 sampled); bin 1: L4 L5 (2); bin 2: L6 L7 L8 L9 (4).
TINY = _occ([
    ("A", 1, 9, "L1", 0, 0), ("A", 2, 8, "L1", 0, 0),      # same locality twice: counts once
    ("A", 1, 9, "L2", 0, 5),
    ("B", 1, 9, "L3", 0, 10),
    ("A", 11, 19, "L4", 0, 20),
    ("B", 11, 19, "L5", 0, 25),
    ("B", 21, 29, "L6", 0, 30), ("B", 21, 29, "L7", 0, 35), ("B", 21, 29, "L8", 0, 40),
    ("C", 21, 29, "L9", 0, 45),
    ("C", 8, 12, "L9", 0, 45),                               # straddles 10 Ma: dropped by single_bin
])
TAXA = pd.DataFrame({"taxon_id": ["A", "B", "C"], "extant": [False, False, True]})


def test_locality_counts_by_hand():
    res = build_occupancy(TINY, TAXA, units="locality", age_handling="single_bin", min_sampled=3)
    t = res.table.set_index(["taxon_id", "bin_index"])
    # worked by hand from TINY
    expected = {("A", 0): (2, 3), ("A", 1): (1, 2),
                ("B", 0): (1, 3), ("B", 1): (1, 2), ("B", 2): (3, 4),
                ("C", 2): (1, 4), ("C", 1): (0, 2), ("C", 0): (0, 3)}   # C is extant: runs on to bin 0
    assert set(t.index) == set(expected)
    for key, (occ, samp) in expected.items():
        assert t.at[key, "occupied"] == occ
        assert t.at[key, "sampled"] == samp
        assert t.at[key, "occupancy"] == pytest.approx(occ / samp)
        # empirical logit with the +0.5 continuity correction
        assert t.at[key, "empirical_logit"] == pytest.approx(np.log((occ + 0.5) / (samp - occ + 0.5)))
    assert t.at[("A", 1), "low_sample"] and not t.at[("A", 0), "low_sample"]
    assert res.dropped.set_index("reason")["count"].sum() == 1
    assert "spans more than one bin" in res.dropped["reason"].iloc[0]
    # rows run old -> young within each taxon
    for _, g in res.table.groupby("taxon_id"):
        assert np.all(np.diff(g["bin_oldest_ma"].to_numpy()) < 0)


def test_grid_cells_follow_the_equal_area_projection():
    # reference: pyproj Transformer to EPSG:6933, floor(x / size), floor(y / size)
    lat = np.array([10.0, 10.1, 10.0, -45.0, 60.0])
    lon = np.array([20.0, 20.1, 25.0, 100.0, -30.0])
    occ = pd.DataFrame({"decimalLatitude": lat, "decimalLongitude": lon, "locationID": list("abcde")})
    codes = sampling_units(occ, units="grid", cell_km=100)
    x, y = Transformer.from_crs("EPSG:4326", "EPSG:6933", always_xy=True).transform(lon, lat)
    cells = list(zip(np.floor(x / 1e5).astype(int), np.floor(y / 1e5).astype(int)))
    same = np.array([[a == b for b in cells] for a in cells])
    assert np.array_equal(same, codes[:, None] == codes[None, :])
    assert codes[0] == codes[1] and codes[0] != codes[2]


def test_projection_is_equal_area():
    # a 1-degree box has the same projected area as its geodesic area (pyproj.Geod), at any latitude
    geod = Geod(ellps="WGS84")
    fwd = Transformer.from_crs("EPSG:4326", EQUAL_AREA_CRS, always_xy=True).transform
    for lat in (0.0, 40.0, 70.0):
        box = Polygon([(10, lat), (11, lat), (11, lat + 1), (10, lat + 1)]).segmentize(0.01)
        geodesic = abs(geod.geometry_area_perimeter(box)[0])
        projected = shapely.transform(box, lambda xy: np.column_stack(fwd(xy[:, 0], xy[:, 1])))
        assert projected.area == pytest.approx(geodesic, rel=1e-4)


def test_grid_and_locality_differ_when_localities_share_a_cell():
    occ = _occ([("A", 1, 9, "L1", 0, 0), ("A", 1, 9, "L2", 0, 0.01), ("B", 1, 9, "L3", 30, 30)])
    taxa = pd.DataFrame({"taxon_id": ["A", "B"], "extant": [False, False]})
    by_loc = build_occupancy(occ, taxa, units="locality", age_handling="single_bin").table.set_index("taxon_id")
    by_grid = build_occupancy(occ, taxa, units="grid", cell_km=50, age_handling="single_bin").table.set_index(
        "taxon_id")
    assert (by_loc.at["A", "occupied"], by_loc.at["A", "sampled"]) == (2, 3)
    assert (by_grid.at["A", "occupied"], by_grid.at["A", "sampled"]) == (1, 2)


def test_monte_carlo_splits_a_straddling_occurrence():
    occ = _occ([("A", 5, 15, "L1", 0, 0), ("F", 1, 9, "L1", 0, 0), ("F", 11, 19, "L1", 0, 0)])
    taxa = pd.DataFrame({"taxon_id": ["A", "F"], "extant": [False, False]})
    res = build_occupancy(occ, taxa, units="locality", age_handling="monte_carlo", age_draws=2000,
                          rng=np.random.default_rng(0))
    a = res.table.loc[res.table["taxon_id"] == "A"].set_index("bin_index")
    # a uniform age on [5, 15] falls in each bin half the time; binomial sd 0.011 at 2000 draws
    assert a.at[0, "occupied"] == pytest.approx(0.5, abs=0.04)
    assert a.at[1, "occupied"] == pytest.approx(0.5, abs=0.04)
    assert res.dropped.empty


def test_subsampling_keeps_the_hypergeometric_mean():
    # one bin with 6 sampled localities, taxon A in 2 of them; quota 3
    rows = [("F", 1, 9, f"L{i}", 0, i) for i in range(6)] + [("A", 1, 9, "L0", 0, 0), ("A", 1, 9, "L1", 0, 1)]
    taxa = pd.DataFrame({"taxon_id": ["A", "F"], "extant": [False, False]})
    res = build_occupancy(_occ(rows), taxa, units="locality", age_handling="single_bin", quota=3,
                          subsample_reps=4000, rng=np.random.default_rng(1))
    a = res.table.loc[res.table["taxon_id"] == "A"].iloc[0]
    assert a["sampled"] == 3
    # reference: scipy.stats.hypergeom (population 6, 2 marked, 3 drawn) mean = 1.0, sd 0.63
    ref = sps.hypergeom(6, 2, 3)
    assert a["occupied"] == pytest.approx(ref.mean(), abs=4 * ref.std() / np.sqrt(4000))


def test_stage_bins_follow_the_time_scale():
    ts = load_timescale()
    bins = time_bins(0, bins="stages", timescale=ts)
    assert np.allclose(bins["bin_oldest_ma"].to_numpy()[:-1], bins["bin_youngest_ma"].to_numpy()[1:])
    # the Pridoli series has no stages: it becomes one bin of its own
    assert (bins["label"] == "Pridoli").sum() == 1
    toarcian = bins.loc[bins["label"] == "Toarcian"].iloc[0]
    # ICS chart v2023/09: base Toarcian 184.2 Ma
    assert toarcian["bin_oldest_ma"] == pytest.approx(184.2)
    occ = _occ([("A", 180, 182, "L1", 0, 0)])
    res = build_occupancy(occ, pd.DataFrame({"taxon_id": ["A"], "extant": [False]}), units="locality",
                          bins="stages", age_handling="single_bin", timescale=ts)
    assert res.table["bin_oldest_ma"].iloc[0] == pytest.approx(184.2)


def test_gap_bin_has_no_occupancy():
    occ = _occ([("A", 1, 9, "L1", 0, 0), ("A", 21, 29, "L2", 0, 0)])
    res = build_occupancy(occ, pd.DataFrame({"taxon_id": ["A"], "extant": [False]}), units="locality",
                          age_handling="single_bin")
    gap = res.table.set_index("bin_index").loc[1]
    assert gap["sampled"] == 0 and np.isnan(gap["occupancy"]) and np.isnan(gap["empirical_logit"])


def test_bad_choice_is_rejected():
    with pytest.raises(AnalogError, match="`age_handling` was 'nearest'"):
        build_occupancy(TINY, TAXA, age_handling="nearest")
    with pytest.raises(AnalogError, match="needs|needed"):
        build_occupancy(TINY, TAXA, age_handling="monte_carlo", rng=None)
