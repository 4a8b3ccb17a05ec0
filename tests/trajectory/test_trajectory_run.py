"""The whole trajectory stage on planted histories, its output contract, and the demo study."""
import json
from pathlib import Path

import numpy as np
import pandas as pd
import pytest

from analog.errors import InputError
from analog.trajectory import (FIT_COLUMNS, HINDCAST_COLUMNS, OCCUPANCY_COLUMNS, RISK_COLUMNS, TrajectoryParams,
                               run_trajectory)
from trajectory_sim import planted_histories

FAST = TrajectoryParams(units="locality", age_handling="single_bin", n_bootstrap=40, n_null=400,
                        n_skill_boot=200)


@pytest.fixture(scope="module")
def run():
    study = planted_histories()
    return study, run_trajectory(study, FAST, rng=np.random.default_rng(42))


def test_tables_follow_the_output_contract(run):
    _, res = run
    tables = res.tables()
    assert list(tables) == ["occupancy.csv", "trajectory_fits.csv", "trajectory_risk.csv", "hindcast.csv",
                            "noise_null.csv"]
    assert list(tables["occupancy.csv"].columns[:6]) == OCCUPANCY_COLUMNS
    assert list(tables["trajectory_fits.csv"].columns[:6]) == FIT_COLUMNS
    assert list(tables["trajectory_risk.csv"].columns[:7]) == RISK_COLUMNS
    assert list(tables["hindcast.csv"].columns[:7]) == HINDCAST_COLUMNS[:7]
    assert set(tables["noise_null.csv"]["level"]) == {"taxon", "dataset"}
    fits = tables["trajectory_fits.csv"]
    assert np.allclose(fits.groupby("taxon_id")["weight"].sum(), 1.0)
    assert (fits.groupby("taxon_id")["preferred"].sum() == 1).all()


def test_risk_covers_every_extant_taxon_and_invents_nothing(run):
    study, res = run
    risk = res.risk.set_index("taxon_id")
    extant = study.taxa.loc[study.taxa["extant"], "taxon_id"]
    assert set(risk.index) == set(extant)
    assert np.isnan(risk.at["nofossil", "trajectory_p"])
    assert "no fossil occurrences" in risk.at["nofossil", "note"]
    est = risk["trajectory_p"].notna()
    assert risk.loc[est, "note"].str.contains("geological time").all()
    assert risk.loc[est, "note"].str.contains("ranking").all()
    low, p, high = risk.loc[est, "trajectory_low"], risk.loc[est, "trajectory_p"], risk.loc[est, "trajectory_high"]
    assert ((low >= 0) & (high <= 1) & (low <= high)).all()
    assert list(res.risk_draws.index) == list(risk.index[est])
    assert list(res.risk_draws.columns) == list(range(FAST.n_bootstrap))


def test_planted_declines_rank_above_flat_histories(run):
    _, res = run
    risk = res.risk.set_index("taxon_id")["trajectory_p"]
    rank = risk.rank(ascending=False)
    declines = rank[[f"decline{i}" for i in range(4)]]
    flats = rank[[f"flat{i}" for i in range(4)]]
    assert declines.mean() < flats.mean()
    assert risk[[f"decline{i}" for i in range(1, 4)]].min() > risk[[f"flat{i}" for i in range(4)]].max()


def test_completed_hats_read_as_past_their_peak(run):
    _, res = run
    pref = res.fits.loc[res.fits["preferred"]].set_index("taxon_id")
    hats = pref.loc[[f"hat{i}" for i in range(4)]]
    assert (hats["reading"] == "past its peak").sum() >= 3
    assert res.skill == res.hindcast.set_index("model").at["model_average", "auc"]
    assert "geological time" in res.summary() and "skill" in res.summary()


def test_same_seed_same_result():
    study = planted_histories()
    a = run_trajectory(study, FAST, rng=np.random.default_rng(7))
    b = run_trajectory(study, FAST, rng=np.random.default_rng(7))
    for name, table in a.tables().items():
        pd.testing.assert_frame_equal(table, b.tables()[name], obj=name)
    pd.testing.assert_frame_equal(a.risk_draws, b.risk_draws)


def test_progress_is_reported():
    seen = []
    run_trajectory(planted_histories(), FAST, rng=np.random.default_rng(1),
                   progress=lambda label, done, total: seen.append((label, done, total)))
    labels = [s[0] for s in seen]
    assert labels[0] == "occupancy" and labels[-1] == "done"
    assert "bootstrap" in labels and seen[-1][1] == seen[-1][2]


def test_options_are_validated():
    with pytest.raises(InputError, match="models"):
        TrajectoryParams.from_section({"models": ["stasis", "logistic"]}, name="trajectory")
    with pytest.raises(InputError, match="did you mean 'bin_width_ma'"):
        TrajectoryParams.from_section({"bin_width": 5}, name="trajectory")
    with pytest.raises(InputError, match="one of \\['fixed', 'stages'\\]"):
        TrajectoryParams.from_section({"bins": "epochs"}, name="trajectory")
    p = TrajectoryParams.from_section({"models": ["stasis", "random_walk_drift"], "horizon_bins": 2})
    assert p.models == ("stasis", "random_walk_drift") and p.horizon_bins == 2


DEMO = Path(__file__).resolve().parents[2] / "examples" / "demo"


@pytest.mark.slow
@pytest.mark.skipif(not (DEMO / "study.toml").is_file(), reason="demo study not generated")
def test_demo_planted_declines_rank_above_noise():
    import warnings

    from analog.intake import load_study
    from analog.rng import stage_generators
    from analog.stats import roc_auc

    with warnings.catch_warnings():
        warnings.simplefilter("ignore")
        study = load_study(DEMO)
        res = run_trajectory(study, study.config.params("trajectory"),
                             rng=stage_generators(study.config.seed)["trajectory"])
    truth = json.loads((DEMO / "truth.json").read_text())["trajectories"]
    p = res.risk.set_index("taxon_id")["trajectory_p"].dropna()
    decline = [t for t in truth["extant_decline"] if t in p.index]
    noise = [t for t in truth["extant_wander"] + truth["extant_stable"] if t in p.index]
    assert len(decline) >= 10 and len(noise) >= 20
    y = np.r_[np.ones(len(decline)), np.zeros(len(noise))]
    auc = roc_auc(y, p.loc[decline + noise].to_numpy())
    rank = p.rank(ascending=False)
    assert auc > 0.8, f"declines vs wandering/stable AUC {auc:.3f}"
    assert rank[decline].mean() < rank[noise].mean()
    assert res.hindcast["auc"].between(0, 1).all() and np.isfinite(res.skill)
