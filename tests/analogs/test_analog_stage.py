"""The analog-evidence stage end to end on simulated studies (and on the demo, marked slow)."""
import json
import warnings

import numpy as np
import pandas as pd
import pytest

from analog_sim import BETA, simulate_study
from analog.analogs import AnalogParams, AnalogResult, run_analog
from analog.analogs.stage import POOLING_COLUMNS, RISK_COLUMNS, SELECTIVITY_COLUMNS
from analog.errors import AnalogWarning
from analog.figures.forest import forest_plots

FAST = dict(age_draws=3, n_bootstrap=20, ci_method="wald")


@pytest.fixture(scope="module")
def sim():
    study, truth = simulate_study(21, n_taxa=500, n_intervals=4, age_halfwidth=0.6)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        result = run_analog(study, AnalogParams(**FAST), rng=np.random.default_rng(5))
    return study, truth, result


def test_tables_follow_the_contract(sim):
    _, _, r = sim
    assert isinstance(r, AnalogResult)
    t = r.tables()
    assert set(t) == {"matches.csv", "selectivity.csv", "pooling.csv", "leave_one_out.csv", "fates.csv",
                      "analog_risk.csv"}
    assert list(t["matches.csv"].columns[:7]) == ["taxon_id", "relative_id", "relative_rank", "similarity",
                                                  "shared_rank", "trait_distance", "reason"]
    assert list(t["selectivity.csv"].columns[:10]) == SELECTIVITY_COLUMNS
    assert list(t["pooling.csv"].columns[:11]) == POOLING_COLUMNS
    assert list(t["leave_one_out.csv"].columns) == ["interval_id", "auc", "n_at_risk", "n_lost"]
    assert list(t["fates.csv"].columns) == ["interval_id", "taxon_id", "p_at_risk", "p_lost"]
    assert list(t["analog_risk.csv"].columns[:7]) == RISK_COLUMNS
    assert list(r.interval_weights.columns[:3]) == ["interval_id", "warming_c", "weight"]
    assert list(r.contributions.columns) == ["taxon_id", "term", "log_odds_contribution"]
    assert set(r.selectivity["scope"]) == {"W0", "W1", "W2", "W3", "pooled"}


def test_planted_signs_and_skill(sim):
    _, _, r = sim
    pooled = r.pooling.set_index("term")
    for term, planted in BETA.items():
        if planted != 0:
            assert np.sign(pooled.at[term, "estimate"]) == np.sign(planted), term
    assert 0.5 < r.skill <= 1.0
    assert r.loo["auc"].notna().all()


def test_risk_values(sim):
    study, _, r = sim
    risk = r.risk
    extant = study.taxa.loc[study.taxa["extant"], "taxon_id"]
    assert set(risk["taxon_id"]) == set(extant)
    for c in ("analog_p", "analog_low", "analog_high"):
        assert risk[c].between(0, 1).all(), c
    assert (risk["analog_low"] <= risk["analog_high"]).all()
    assert r.risk_draws.shape == (len(extant), FAST["n_bootstrap"])
    # contributions add up to the model log odds; the relatives' shift takes it to analog_p
    total = r.contributions.groupby("taxon_id", sort=False)["log_odds_contribution"].sum()
    lo = np.log(risk.set_index("taxon_id")["analog_p"] / (1 - risk.set_index("taxon_id")["analog_p"]))
    assert np.allclose(total.loc[lo.index], lo)
    assert (r.matches["taxon_id"].isin(extant)).all()
    assert r.matches.groupby("taxon_id")["relative_rank"].max().le(AnalogParams().n_relatives).all()


def test_deterministic_for_a_fixed_seed():
    study, _ = simulate_study(3, n_taxa=200, n_intervals=3, age_halfwidth=0.8)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        a = run_analog(study, AnalogParams(**FAST), rng=np.random.default_rng(9))
        b = run_analog(study, AnalogParams(**FAST), rng=np.random.default_rng(9))
        c = run_analog(study, AnalogParams(**FAST), rng=np.random.default_rng(10))
    for name, frame in a.tables().items():
        pd.testing.assert_frame_equal(frame, b.tables()[name])
    pd.testing.assert_frame_equal(a.risk_draws, b.risk_draws)
    assert not np.allclose(a.risk_draws.to_numpy(), c.risk_draws.to_numpy())


def test_profile_intervals_and_progress():
    study, _ = simulate_study(4, n_taxa=250, n_intervals=2)
    calls = []
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        r = run_analog(study, AnalogParams(age_draws=2, n_bootstrap=4),
                       rng=np.random.default_rng(1), progress=lambda *a: calls.append(a))
    sel = r.selectivity[r.selectivity["scope"] != "pooled"]
    assert (sel["ci_low"] < sel["log_odds"]).all() and (sel["log_odds"] < sel["ci_high"]).all()
    assert sel["method"].str.contains("profile").all()
    labels = {c[0] for c in calls}
    assert {"fates", "selectivity", "matching", "bootstrap"} <= labels
    assert all(0 < done <= total for _, done, total in calls)


def test_interval_without_data_is_reported_and_weights_follow_scenario():
    study, _ = simulate_study(6, n_taxa=200, n_intervals=2, warming=[4.0, 8.0])
    extra = study.intervals.iloc[[0]].assign(interval_id="EMPTY", oldest_ma=500.0, youngest_ma=498.0)
    study.intervals = pd.concat([study.intervals, extra], ignore_index=True)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        r = run_analog(study, AnalogParams(**FAST), rng=np.random.default_rng(1))
    w = r.interval_weights.set_index("interval_id")
    # Gaussian kernel of the scenario gap (analog.reference.interval_weights), scale 2 degC
    assert w.at["W0", "weight"] == pytest.approx(1.0)
    assert w.at["W1", "weight"] == pytest.approx(np.exp(-0.5 * (4.0 / 2.0) ** 2))
    assert not w.at["EMPTY", "used"] and "fewer than" in w.at["EMPTY", "reason"]
    assert "EMPTY" not in set(r.selectivity["scope"])


def test_no_usable_interval_gives_unscored_taxa_with_a_warning():
    study, _ = simulate_study(7, n_taxa=60, n_intervals=1)
    with pytest.warns(AnalogWarning) as record:
        r = run_analog(study, AnalogParams(min_at_risk=10_000, n_bootstrap=0), rng=np.random.default_rng(1))
    messages = [str(w.message) for w in record]
    assert any("intervals left out of the selectivity model: W0 (fewer than 10000 taxa at risk" in m
               for m in messages)
    assert any("no warming interval has enough fossil data" in m for m in messages)
    assert r.risk["analog_p"].isna().all() and r.risk["note"].str.contains("not scored").all()
    assert np.isnan(r.skill) and r.pooling.empty
    assert "not computable" in r.summary()


def test_thin_classes_warn():
    # a tiny interval: some classes have no losses
    study, _ = simulate_study(8, n_taxa=60, n_intervals=1)
    with pytest.warns(AnalogWarning, match="too thin to estimate well"):
        run_analog(study, AnalogParams(age_draws=1, n_bootstrap=0, ci_method="wald", min_class_size=15),
                   rng=np.random.default_rng(1))


def test_forest_plots(sim):
    study, _, r = sim
    figs = forest_plots(r, study.traits)
    assert set(figs) == {f"forest_{t}" for t in study.traits}
    fig = figs["forest_depth_zone"]
    ax = fig.axes[0]
    assert ax.get_xscale() == "log"
    title = " ".join(t.get_text() for t in fig.texts)
    assert "depth zone" in title and "compared with shelf" in title
    labels = [t.get_text().strip() for t in ax.get_yticklabels()]
    # two class terms, each: header, four intervals, pooled
    assert labels.count("Pooled (random effects)") == 2 and len(labels) == 2 * (1 + 4 + 1)


@pytest.mark.slow
def test_demo_recovers_planted_signs():
    from analog._resources import resource_dir
    from analog.intake import load_study
    from analog.rng import stage_generators

    folder = resource_dir("demo")
    if not (folder / "study.toml").is_file():
        pytest.skip("demo study not generated")
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        study = load_study(folder)
        r = run_analog(study, study.config.params("analog"), rng=stage_generators(study.config.seed)["analog"])
    truth = json.loads((folder / "truth.json").read_text())["selectivity"]
    pooled = r.pooling.set_index("term")
    for term, planted in truth["mean_effects"].items():
        if term in truth["null_terms"] or planted == 0:
            continue
        assert np.sign(pooled.at[term, "estimate"]) == np.sign(planted), term
    assert r.skill > 0.5
    assert r.risk["analog_p"].between(0, 1).all()


def test_missing_trait_of_a_modern_taxon_is_noted():
    study, _ = simulate_study(12, n_taxa=250, n_intervals=2)
    extant = study.taxa.index[study.taxa["extant"]]
    study.taxa.loc[extant[0], "depth_zone"] = np.nan
    tid = study.taxa.at[extant[0], "taxon_id"]
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        r = run_analog(study, AnalogParams(**FAST), rng=np.random.default_rng(2))
    note = r.risk.set_index("taxon_id").at[tid, "note"]
    assert "Depth zone missing; its average effect used" in note
    assert r.risk.set_index("taxon_id").drop(tid)["note"].str.contains("Depth zone").sum() == 0
    c = r.contributions[r.contributions["taxon_id"] == tid].set_index("term")["log_odds_contribution"]
    assert c.loc["depth_zone[basin]"] != 0 and c.loc["depth_zone[slope]"] != 0  # average, not the reference


def test_block_sizes_do_not_change_any_result(monkeypatch):
    # the stage computes age draws and matching distances in blocks to bound memory; with
    # tiny blocks (one draw, a few pairs at a time) every table, draw and note is the same
    import analog.analogs.fates as fates_mod
    import analog.analogs.matching as matching_mod

    study, _ = simulate_study(21, n_taxa=250)
    params = AnalogParams(age_draws=4, n_bootstrap=6)

    def run():
        with warnings.catch_warnings():
            warnings.simplefilter("ignore", AnalogWarning)
            return run_analog(study, params, rng=np.random.default_rng(8))

    whole = run()
    assert fates_mod.DRAW_BLOCK_VALUES >= 4 * len(study.fossil_occurrences)   # one block by default
    assert matching_mod.BLOCK_PAIRS >= len(study.taxa) ** 2
    monkeypatch.setattr(fates_mod, "DRAW_BLOCK_VALUES", 1)                     # one draw per block
    monkeypatch.setattr(matching_mod, "BLOCK_PAIRS", 1)                        # one modern taxon per block
    blocked = run()
    for name, table in whole.tables().items():
        pd.testing.assert_frame_equal(blocked.tables()[name], table, check_exact=True, obj=name)
    pd.testing.assert_frame_equal(blocked.risk_draws, whole.risk_draws, check_exact=True)
    pd.testing.assert_frame_equal(blocked.contributions, whole.contributions, check_exact=True)
    assert blocked.notes == whole.notes
    assert len(whole.matches) > 0 and whole.risk["analog_p"].notna().any()
