"""The regions stage on invented inputs: presence, indices, flags, layer."""
from __future__ import annotations

import sys
import warnings
from pathlib import Path

import geopandas as gpd
import networkx as nx
import numpy as np
import pytest
from shapely.geometry import Point

from analog.combine import PARAMS as COMBINE
from analog.combine import combine_evidence
from analog.errors import AnalogWarning
from analog.regions import PARAMS, RegionResult, assess_regions
from analog.taxonomy import build_rank_tree

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "combine"))
from synthetic_inputs import make_lines, make_study  # noqa: E402


@pytest.fixture(scope="module")
def setup():
    study = make_study()
    analog, traj = make_lines(study)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        combined = combine_evidence(study, analog, traj, COMBINE(n_boot=50), rng=np.random.default_rng(1))
        regions = assess_regions(study, combined, PARAMS(), rng=np.random.default_rng(2))
    return study, combined, regions


def _brute_presence(study):
    """Region of each record by testing every polygon with shapely ``covers`` (lowest id on ties)."""
    reg = study.regions
    out = []
    for row in study.modern_occurrences.itertuples():
        pt = Point(row.decimalLongitude, row.decimalLatitude)
        hits = sorted(rid for rid, g in zip(reg["region_id"], reg.geometry) if g.covers(pt))
        out.append(hits[0] if hits else None)
    return np.array(out, dtype=object)


def test_presence_and_counts_match_brute_force(setup):
    study, combined, res = setup
    where = _brute_presence(study)
    occ = study.modern_occurrences.assign(region=where)
    assert res.unassigned == int((where == None).sum())  # noqa: E711
    assert len(res.unassigned_occurrences) == res.unassigned
    counts = occ.dropna(subset=["region"]).groupby(["region", "taxon_id"]).size()
    got = res.presence.set_index(["region_id", "taxon_id"])["n_records"]
    assert got.to_dict() == {k: v for k, v in counts.items()}
    assert res.presence["present"].all()  # min_records = 1
    s = res.region_summary.set_index("region_id")
    assert s["n_records"].to_dict() == occ.groupby("region").size().reindex(s.index, fill_value=0).to_dict()


def test_region_indices_by_hand(setup):
    study, combined, res = setup
    rk = combined.rankings.set_index("taxon_id")
    s = res.region_summary.set_index("region_id")
    pres = res.presence[res.presence["present"]]
    for rid, grp in pres.groupby("region_id"):
        ids = grp["taxon_id"].tolist()
        p = rk.loc[ids, "combined_p"].dropna()
        assert s.at[rid, "n_taxa"] == len(p)
        assert s.at[rid, "expected_losses"] == pytest.approx(p.sum())
        assert s.at[rid, "mean_combined_p"] == pytest.approx(p.mean())
        summed = combined.draws.loc[p.index].sum(axis=0)
        assert s.at[rid, "expected_losses_low"] == pytest.approx(np.quantile(summed, 0.05))
        assert s.at[rid, "expected_losses_high"] == pytest.approx(np.quantile(summed, 0.95))
        assert s.at[rid, "n_top_tier"] == int((rk.loc[p.index, "tier"] == "highest").sum())
        for line in ("analog", "trajectory"):
            q = rk.loc[ids, f"{line}_p"].dropna()
            assert s.at[rid, f"{line}_n_taxa"] == len(q)
            assert s.at[rid, f"{line}_expected_losses"] == pytest.approx(q.sum())
            assert s.at[rid, f"{line}_mean_p"] == pytest.approx(q.mean())
        both = rk.loc[ids].dropna(subset=["analog_p", "trajectory_p"])
        assert s.at[rid, "mean_difference"] == pytest.approx((both["analog_p"] - both["trajectory_p"]).mean())


def test_diversity_loss_by_enumerating_branches(setup):
    """Faith (2008) expected loss with unit branches, recomputed directly on the rank tree from
    analog.taxonomy.build_rank_tree: Σ over branches with a present taxon below of Π p."""
    study, combined, res = setup
    tree = build_rank_tree(study.taxa)
    rk = combined.rankings.set_index("taxon_id")
    node_of = {d["taxon_id"]: n for n, d in tree.nodes(data=True) if "taxon_id" in d}
    s = res.region_summary.set_index("region_id")
    for rid, grp in res.presence[res.presence["present"]].groupby("region_id"):
        ids = [t for t in grp["taxon_id"] if np.isfinite(rk.at[t, "combined_p"])]
        below = {}
        for t in ids:
            for n in nx.ancestors(tree, node_of[t]) | {node_of[t]}:
                below.setdefault(n, []).append(rk.at[t, "combined_p"])
        want = sum(np.prod(v) for n, v in below.items() if tree.in_degree(n) > 0)
        assert s.at[rid, "diversity_loss"] == pytest.approx(want, rel=1e-10)
        assert s.at[rid, "diversity_total"] == sum(1 for n in below if tree.in_degree(n) > 0)
        assert s.at[rid, "diversity_loss_low"] <= s.at[rid, "diversity_loss_high"]


def test_regions_with_too_little_data_are_flagged(setup):
    _, _, res = setup
    s = res.region_summary.set_index("region_id")
    assert s.loc[["R5", "R6"], "data_flag"].tolist() == ["insufficient data"] * 2
    assert (s.loc[["R1", "R2", "R3", "R4"], "data_flag"] == "ok").all()
    assert "fewer than 5" in s.at["R5", "flag_reason"] and "fewer than 20" in s.at["R5", "flag_reason"]


def test_minimum_records_rule(setup):
    study, combined, res1 = setup
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        res3 = assess_regions(study, combined, PARAMS(min_records=3), rng=np.random.default_rng(2))
    p = res3.presence
    assert (p["present"] == (p["n_records"] >= 3)).all()
    s1 = res1.region_summary.set_index("region_id")
    s3 = res3.region_summary.set_index("region_id")
    assert (s3["n_taxa"] <= s1["n_taxa"]).all() and (s3["n_taxa"] < s1["n_taxa"]).any()
    assert (s3["n_records"] == s1["n_records"]).all()  # records still counted


def test_unassigned_records_warn(setup):
    study, combined, _ = setup
    with pytest.warns(AnalogWarning, match=r"modern occurrences fall in no region"):
        assess_regions(study, combined, PARAMS(), rng=np.random.default_rng(2))


def test_layer_and_tables_follow_the_contract(setup, tmp_path):
    study, _, res = setup
    assert isinstance(res, RegionResult)
    t = res.tables()
    assert list(t["region_summary.csv"].columns[:10]) == [
        "region_id", "name", "n_taxa", "n_records", "expected_losses", "expected_losses_low",
        "expected_losses_high", "mean_combined_p", "n_top_tier", "data_flag"]
    for c in ("analog_expected_losses", "trajectory_expected_losses", "analog_mean_p", "trajectory_mean_p",
              "analog_n_top_tier", "diversity_loss"):
        assert c in t["region_summary.csv"].columns
    assert list(t["region_taxa.csv"].columns[:4]) == ["region_id", "taxon_id", "n_records", "present"]
    assert res.layer.crs == study.regions.crs
    assert res.projection.startswith("+proj=laea")
    # the layer is readable back from a GeoPackage (the writer saves it this way)
    path = tmp_path / "regions.gpkg"
    res.layer.to_file(path, driver="GPKG", layer="regions", engine="pyogrio")
    back = gpd.read_file(path, layer="regions")
    assert back["region_id"].tolist() == res.layer["region_id"].tolist()
    np.testing.assert_allclose(back["expected_losses"], res.layer["expected_losses"])
    assert "Regions" in res.summary()


def test_region_without_records_is_flagged_and_hatched(setup):
    import pandas as pd
    from shapely.geometry import box

    from analog.figures import maps

    study, combined, _ = setup
    extra = gpd.GeoDataFrame({"region_id": ["R9"], "name": ["Empty Reach"]}, geometry=[box(17, 40, 18, 41)],
                             crs="EPSG:4326")
    study2 = type(study)(**{**vars(study), "regions": pd.concat([study.regions, extra], ignore_index=True)})
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        res = assess_regions(study2, combined, PARAMS(), rng=np.random.default_rng(2))
    row = res.region_summary.set_index("region_id").loc["R9"]
    assert row["n_taxa"] == 0 and row["n_records"] == 0 and row["expected_losses"] == 0
    assert np.isnan(row["mean_combined_p"]) and row["data_flag"] == "insufficient data"
    fig = maps.risk_map(res)
    hatched = [c for c in fig.axes[0].collections if c.get_zorder() == 2 and c.get_hatch()]
    assert len(hatched) == 1 and len(hatched[0].get_paths()) == 3  # R5, R6 and the empty R9


def test_expected_losses_outside_their_interval_are_noted():
    import pandas as pd

    from analog.regions.core import _note_off_centre

    out = pd.DataFrame({"expected_losses": [5.0, 306.5, 2.0, float("nan")],
                        "expected_losses_low": [4.0, 307.7, 1.0, 0.0],
                        "expected_losses_high": [6.0, 317.7, 3.0, 1.0]})
    notes: list[str] = []
    _note_off_centre(out, notes)
    assert len(notes) == 1
    assert notes[0].startswith("in 1 of 4 regions the expected number of taxa lost lies outside its own interval")
    assert "run mostly above the point scores" in notes[0]
    inside: list[str] = []
    _note_off_centre(out.iloc[[0, 2, 3]], inside)
    assert inside == []
