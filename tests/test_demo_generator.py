"""The invented demo generator: reproducible, seed-sensitive, and the committed demo is its output."""
import importlib.util
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

REPO = Path(__file__).resolve().parent.parent
SCRIPT = REPO / "examples" / "generate_demo.py"
DEMO = REPO / "examples" / "demo"
TEXT_FILES = ("study.toml", "taxa.csv", "fossil_occurrences.csv", "modern_occurrences.csv", "truth.json")


def _load_generator():
    spec = importlib.util.spec_from_file_location("generate_demo", SCRIPT)
    module = importlib.util.module_from_spec(spec)
    spec.loader.exec_module(module)
    return module


GENERATOR = _load_generator()


def _generate(out: Path, *extra: str) -> Path:
    """Run the script's command line in this process (same code path as `python generate_demo.py`)."""
    assert GENERATOR.main(["--out", str(out), "--coastline", str(out / "coast.gpkg"), *extra]) == 0
    return out


def _same_geometries(a: Path, b: Path, key: str):
    import geopandas as gpd

    ga, gb = gpd.read_file(a), gpd.read_file(b)
    assert ga.crs == gb.crs
    assert ga.drop(columns="geometry").equals(gb.drop(columns="geometry"))
    assert list(ga.geometry.to_wkb()) == list(gb.geometry.to_wkb()), key


@pytest.fixture(scope="module")
def small_pair(tmp_path_factory):
    a = _generate(tmp_path_factory.mktemp("a"), "--seed", "7", "--scale", "0.2")
    b = _generate(tmp_path_factory.mktemp("b"), "--seed", "7", "--scale", "0.2")
    return a, b


def test_same_seed_gives_identical_files(small_pair):
    a, b = small_pair
    for name in TEXT_FILES:
        assert (a / name).read_bytes() == (b / name).read_bytes(), name
    _same_geometries(a / "regions.gpkg", b / "regions.gpkg", "regions")
    _same_geometries(a / "coast.gpkg", b / "coast.gpkg", "coastline")


def test_different_seed_gives_different_data(small_pair, tmp_path):
    a, _ = small_pair
    c = _generate(tmp_path / "c", "--seed", "8", "--scale", "0.2")
    for name in ("taxa.csv", "fossil_occurrences.csv", "modern_occurrences.csv", "truth.json"):
        assert (a / name).read_bytes() != (c / name).read_bytes(), name
    # The invented geography does not depend on the seed.
    _same_geometries(a / "regions.gpkg", c / "regions.gpkg", "regions")


def test_files_are_plain_deterministic_text(small_pair):
    a, _ = small_pair
    for name in TEXT_FILES:
        raw = (a / name).read_bytes()
        assert b"\r" not in raw and raw.endswith(b"\n"), name
    occ = pd.read_csv(a / "fossil_occurrences.csv", dtype=str, keep_default_na=False)
    assert occ["occurrenceID"].is_monotonic_increasing and occ["occurrenceID"].is_unique


def test_planted_truth_is_consistent_with_the_tables(small_pair):
    from analog.reference import load_intervals, resolve_stages

    a, _ = small_pair
    truth = json.loads((a / "truth.json").read_text())
    taxa = pd.read_csv(a / "taxa.csv", dtype=str, keep_default_na=False)
    occ = pd.read_csv(a / "fossil_occurrences.csv", dtype=str, keep_default_na=False)
    ids = set(taxa["taxon_id"])
    assert set(occ["taxon_id"]) <= ids
    # Ages: numbers, or stage names that resolve through the bundled time scale.
    numeric = occ["oldest_ma"] != ""
    assert (occ.loc[~numeric, "earliestAgeOrLowestStage"] != "").all()
    staged = resolve_stages(occ.loc[~numeric, "earliestAgeOrLowestStage"])
    assert staged["oldest_ma"].notna().all()
    old = pd.to_numeric(occ.loc[numeric, "oldest_ma"])
    young = pd.to_numeric(occ.loc[numeric, "youngest_ma"])
    width = old - young
    assert (width >= 0.49).all() and (width <= 12.01).all() and (young >= 0).all()
    # Each planted victim has an occurrence dated wholly inside its window; each survivor has
    # one whose range reaches below the window (its true age is after the window).
    iv = load_intervals().set_index("interval_id")
    ages = pd.DataFrame({"taxon_id": occ["taxon_id"],
                         "old": pd.to_numeric(occ["oldest_ma"]).fillna(staged["oldest_ma"]),
                         "young": pd.to_numeric(occ["youngest_ma"]).fillna(
                             resolve_stages(occ["latestAgeOrHighestStage"])["youngest_ma"])})
    assert ages[["old", "young"]].notna().all().all()
    for wid, rec in truth["selectivity"]["intervals"].items():
        assert set(rec["lost_taxa"]) <= set(rec["at_risk_taxa"]) <= ids
        assert rec["n_lost"] == len(rec["lost_taxa"])
        wo, wy = iv.loc[wid, "oldest_ma"], iv.loc[wid, "youngest_ma"]
        inside = ages[(ages["old"] <= wo) & (ages["young"] >= wy)]
        assert set(rec["lost_taxa"]) <= set(inside["taxon_id"]), wid
        reaches_after = set(ages.loc[ages["young"] < wy, "taxon_id"])
        assert set(rec["at_risk_taxa"]) - set(rec["lost_taxa"]) <= reaches_after, wid
    extant = set(taxa.loc[taxa["extant"] == "true", "taxon_id"])
    traj = truth["trajectories"]
    groups = [set(traj["extant_decline"]), set(traj["extant_wander"]), set(traj["extant_stable"]),
              set(traj["extant_no_fossil_record"])]
    assert set().union(*groups) == extant
    assert sum(len(g) for g in groups) == len(extant)
    assert not set(occ["taxon_id"]) & set(traj["extant_no_fossil_record"])
    assert set(truth["regions"]["high_risk_taxa"]) <= set(traj["extant_decline"])


def test_modern_names_and_regions(small_pair):
    import geopandas as gpd

    a, _ = small_pair
    truth = json.loads((a / "truth.json").read_text())
    taxa = pd.read_csv(a / "taxa.csv", dtype=str, keep_default_na=False)
    mod = pd.read_csv(a / "modern_occurrences.csv", dtype=str, keep_default_na=False)
    known = set(taxa["scientificName"].str.casefold())
    folded = mod["scientificName"].str.strip().str.casefold()
    unmatched = set(mod.loc[~folded.isin(known), "scientificName"])
    assert unmatched == set(truth["names"]["unmatched_names"])
    assert len(unmatched) == 20
    assert (mod["scientificName"] != mod["scientificName"].str.strip()).any()  # whitespace variants present
    regions = gpd.read_file(a / "regions.gpkg")
    assert len(regions) == 12 and regions["region_id"].is_unique and regions.crs.to_epsg() == 4326
    assert regions.is_valid.all()
    # Polygons share edges exactly: no overlaps, and neighbours touch along a line.
    geoms = list(regions.geometry)
    for i in range(len(geoms)):
        for j in range(i + 1, len(geoms)):
            assert geoms[i].intersection(geoms[j]).area == 0.0
    pts = gpd.GeoDataFrame(geometry=gpd.points_from_xy(pd.to_numeric(mod["decimalLongitude"]),
                                                       pd.to_numeric(mod["decimalLatitude"])), crs=4326)
    hit = gpd.sjoin(pts, regions, how="left", predicate="within")
    assert not hit.index.duplicated().any()
    assert hit["region_id"].isna().sum() == truth["regions"]["records_outside_all_regions"] > 0
    # The invented geography stays in open ocean, 40-50°S, 115-130°W.
    lon, lat = pd.to_numeric(mod["decimalLongitude"]), pd.to_numeric(mod["decimalLatitude"])
    assert lon.between(-130, -115).all() and lat.between(-50, -40).all()


@pytest.mark.slow
def test_committed_demo_equals_a_fresh_generation(tmp_path):
    fresh = _generate(tmp_path / "demo")  # committed seed and full size
    for name in TEXT_FILES:
        assert (fresh / name).read_bytes() == (DEMO / name).read_bytes(), name
    _same_geometries(fresh / "regions.gpkg", DEMO / "regions.gpkg", "regions")
    _same_geometries(fresh / "coast.gpkg", REPO / "maps" / "demo_coastline.gpkg", "coastline")


def test_committed_demo_sizes():
    truth = json.loads((DEMO / "truth.json").read_text())
    s = truth["sizes"]
    assert 270 <= s["fossil_genera"] <= 330
    assert 100 <= s["extant_genera"] <= 140
    assert 16_000 <= s["fossil_occurrences"] <= 24_000
    assert 16_000 <= s["modern_occurrences"] <= 24_000
    assert s["regions"] == 12
    assert truth["generator"]["scale"] == 1.0
    assert set(truth["selectivity"]["intervals"]) >= {"ptb", "tjb", "toa", "ctb", "petm"}
    assert 3 <= len(truth["regions"]["hotspots"]) <= 4
    assert np.isclose(sum(truth["missing_trait_cells"].values()) / (5 * s["taxa"]), 0.03, atol=0.015)
