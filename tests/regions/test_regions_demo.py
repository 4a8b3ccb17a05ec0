"""On the invented demo study: the planted high-risk taxa concentrate in the regions where the
generator put them (examples/demo/truth.json, written by examples/generate_demo.py)."""
from __future__ import annotations

import json
import warnings

import numpy as np
import pytest

from analog._resources import resource_dir

pytestmark = pytest.mark.slow


@pytest.fixture(scope="module")
def demo():
    from analog.intake import load_study
    from analog.pipeline import run_study

    folder = resource_dir("demo")
    truth = json.loads((folder / "truth.json").read_text())["regions"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        run = run_study(load_study(folder))
    assert run.regions is not None, run.skipped
    return run, truth


def test_spatial_join_reproduces_the_planted_layout(demo):
    run, truth = demo
    planted = truth["high_risk_taxa"]
    hot = {h["region_id"] for h in truth["hotspots"]}
    p = run.regions.presence
    mine = p[p["taxon_id"].isin(planted)]
    in_hot = mine.loc[mine["region_id"].isin(hot), "n_records"].sum()
    # the generator's share of the planted taxa's in-region records that it placed in the
    # hotspots (rounded to 4 places); records outside every region are not in its denominator
    assert in_hot / mine["n_records"].sum() == pytest.approx(truth["share_of_high_risk_records_in_hotspots"],
                                                             abs=1e-4)
    assert run.regions.unassigned == truth["records_outside_all_regions"]


def test_planted_losses_concentrate_in_the_hotspots(demo):
    run, truth = demo
    planted = truth["high_risk_taxa"]
    hot = sorted(h["region_id"] for h in truth["hotspots"])
    rk = run.combined.rankings.set_index("taxon_id")
    p = run.regions.presence
    p = p[p["present"] & p["taxon_id"].isin(planted)]
    share = p.assign(cp=rk.loc[p["taxon_id"], "combined_p"].to_numpy()).groupby("region_id")["cp"].sum()
    # expected losses among the planted taxa are largest in exactly the three hotspots
    assert sorted(share.sort_values(ascending=False).index[:3]) == hot
    # and each hotspot's mean combined risk is above the middle of the other regions
    s = run.regions.region_summary.set_index("region_id")
    others = s.drop(index=hot)["mean_combined_p"].median()
    assert (s.loc[hot, "mean_combined_p"] > others).all()


def test_planted_taxa_rank_in_the_upper_half(demo):
    run, truth = demo
    rk = run.combined.rankings.set_index("taxon_id")
    n = int((rk["evidence"] != "none").sum())
    ranks = rk.loc[truth["high_risk_taxa"], "combined_rank"].to_numpy(dtype=float)
    assert np.all(ranks <= n / 2), f"planted high-risk taxa ranked {ranks.tolist()} of {n}"


def test_demo_figures_draw(demo):
    from analog.figures import maps, ranking

    run, _ = demo
    figs = {**maps.map_figures(run), **ranking.ranking_figures(run)}
    assert set(figs) == {"risk_map", "risk_map_by_line", "risk_difference_map", "rank_scatter", "top_taxa"}
    # the shipped coastline is drawn under the regions
    ax = figs["risk_map"].axes[0]
    assert [c for c in ax.collections if c.get_zorder() == 1]
