"""The combine stage: pooling, single-line taxa, intervals, tiers, comparison, disagreements,
sensitivity."""
from __future__ import annotations

import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import special, stats

from analog.combine import PARAMS, CombinedResult, combine_evidence, skill_weights
from analog.errors import AnalogWarning, InputError
from synthetic_inputs import make_lines, make_study

FAST = PARAMS(n_boot=200)


@pytest.fixture(scope="module")
def inputs():
    study = make_study()
    analog, traj = make_lines(study)
    return study, analog, traj


@pytest.fixture(scope="module")
def result(inputs):
    study, analog, traj = inputs
    return combine_evidence(study, analog, traj, FAST, rng=np.random.default_rng(1))


# -- weights ------------------------------------------------------------------------------------

def test_skill_weights_formula():
    # w ∝ max(AUC - 0.5, floor): margins 0.22 and 0.14
    wa, wt = skill_weights(0.72, 0.64, floor=0.05)
    assert (wa, wt) == pytest.approx((0.22 / 0.36, 0.14 / 0.36))
    assert skill_weights(np.nan, np.nan) == (0.5, 0.5)          # both unknown -> equal
    assert skill_weights(0.45, 0.75, floor=0.05) == pytest.approx((0.05 / 0.30, 0.25 / 0.30))  # below chance -> floor
    assert skill_weights(None, 0.55, floor=0.05) == pytest.approx((0.5, 0.5))


def test_weights_from_skill_and_user(inputs, result):
    study, analog, traj = inputs
    assert result.weights["source"] == "skill"
    assert result.weights["analog"] == pytest.approx(0.22 / 0.36)
    user = combine_evidence(study, analog, traj, PARAMS(n_boot=50, analog_weight=0.25), rng=np.random.default_rng(1))
    assert user.weights == {"analog": 0.25, "trajectory": 0.75, "source": "user"}


def test_nan_skill_warns_and_gives_equal_weights(inputs):
    study, analog, traj = inputs
    a2 = type(analog)(**{**vars(analog), "skill": np.nan})
    t2 = type(traj)(**{**vars(traj), "skill": np.nan})
    with pytest.warns(AnalogWarning, match="no measured skill"):
        r = combine_evidence(study, a2, t2, PARAMS(n_boot=50), rng=np.random.default_rng(1))
    assert r.weights["analog"] == r.weights["trajectory"] == 0.5


# -- pooling ------------------------------------------------------------------------------------

def test_pooled_probability_is_weighted_logit_mean(result):
    r = result.rankings
    both = r[r["evidence"] == "both"]
    wa, wt = result.weights["analog"], result.weights["trajectory"]
    # reference: logarithmic opinion pool written as a normalised weighted geometric mean of the
    # odds (Genest & Zidek 1986), computed here without any logit
    pa, pt = both["analog_p"].to_numpy(), both["trajectory_p"].to_numpy()
    num = pa ** wa * pt ** wt
    want = num / (num + (1 - pa) ** wa * (1 - pt) ** wt)
    np.testing.assert_allclose(both["combined_p"], want, rtol=1e-10)


def test_identical_inputs_with_any_weights_return_the_input(inputs):
    study, analog, traj = inputs
    risk_t = traj.risk.copy()
    risk_t["trajectory_p"] = analog.risk["analog_p"].to_numpy()
    t_same = type(traj)(risk=risk_t, risk_draws=analog.risk_draws.copy(), skill=0.9)
    for w in (None, 0.1, 0.5):
        r = combine_evidence(study, analog, t_same, PARAMS(n_boot=50, analog_weight=w), rng=np.random.default_rng(2))
        got = r.rankings.set_index("taxon_id")
        ok = got["analog_p"].notna()
        np.testing.assert_allclose(got.loc[ok, "combined_p"], got.loc[ok, "analog_p"], rtol=1e-9)
        np.testing.assert_allclose(r.draws.loc[analog.risk_draws.index], analog.risk_draws, rtol=1e-9)


def test_swapping_the_lines_and_their_weights_changes_nothing(inputs):
    study, analog, traj = inputs
    r1 = combine_evidence(study, analog, traj, PARAMS(n_boot=50, analog_weight=0.3), rng=np.random.default_rng(3))
    ra = analog.risk.rename(columns={"analog_p": "trajectory_p", "analog_low": "trajectory_low",
                                     "analog_high": "trajectory_high"}).assign(preferred_model="x", note="")
    rt = traj.risk.rename(columns={"trajectory_p": "analog_p", "trajectory_low": "analog_low",
                                   "trajectory_high": "analog_high"})
    a_sw = type(analog)(risk=rt, risk_draws=traj.risk_draws, contributions=analog.contributions, skill=0.6)
    t_sw = type(traj)(risk=ra, risk_draws=analog.risk_draws, skill=0.6)
    r2 = combine_evidence(study, a_sw, t_sw, PARAMS(n_boot=50, analog_weight=0.7), rng=np.random.default_rng(3))
    c1 = r1.rankings.set_index("taxon_id")["combined_p"]
    c2 = r2.rankings.set_index("taxon_id")["combined_p"]
    np.testing.assert_allclose(c1.sort_index(), c2.sort_index(), rtol=1e-10)


def test_single_line_taxa_keep_their_line_and_are_marked(inputs, result):
    study, analog, traj = inputs
    r = result.rankings.set_index("taxon_id")
    a_only = r[r["evidence"] == "analog only"]
    t_only = r[r["evidence"] == "trajectory only"]
    assert len(a_only) == 4 and len(t_only) == 3  # the synthetic inputs leave these gaps
    assert a_only["trajectory_p"].isna().all() and t_only["analog_p"].isna().all()
    np.testing.assert_allclose(a_only["combined_p"], a_only["analog_p"])
    np.testing.assert_allclose(t_only["combined_p"], t_only["trajectory_p"])
    np.testing.assert_allclose(result.draws.loc[a_only.index], analog.risk_draws.loc[a_only.index])
    np.testing.assert_allclose(result.draws.loc[t_only.index], traj.risk_draws.loc[t_only.index])


def test_interval_from_aligned_draws(inputs, result):
    study, analog, traj = inputs
    r = result.rankings.set_index("taxon_id")
    both = r.index[r["evidence"] == "both"]
    wa = result.weights["analog"]
    # draw i of one line pooled with draw i of the other, then central 90 % percentiles
    la = special.logit(analog.risk_draws.loc[both].to_numpy())
    lt = special.logit(traj.risk_draws.loc[both].to_numpy())
    pooled = special.expit(wa * la + (1 - wa) * lt)
    np.testing.assert_allclose(r.loc[both, "combined_low"], np.quantile(pooled, 0.05, axis=1), rtol=1e-9)
    np.testing.assert_allclose(r.loc[both, "combined_high"], np.quantile(pooled, 0.95, axis=1), rtol=1e-9)
    assert (r["combined_low"] <= r["combined_high"]).all()


def test_different_draw_counts_are_cut_to_the_shorter_with_a_warning(inputs):
    study, analog, traj = inputs
    t_short = type(traj)(risk=traj.risk, risk_draws=traj.risk_draws.iloc[:, :120], skill=traj.skill)
    with pytest.warns(AnalogWarning, match="different numbers of bootstrap draws.*first 120"):
        r = combine_evidence(study, analog, t_short, PARAMS(n_boot=50), rng=np.random.default_rng(1))
    assert r.draws.shape[1] == 120


def test_one_line_missing_ranks_by_the_other(inputs):
    study, analog, _ = inputs
    with pytest.warns(AnalogWarning, match="trajectory line of evidence is missing"):
        r = combine_evidence(study, analog, None, PARAMS(n_boot=50), rng=np.random.default_rng(1))
    assert r.weights["source"] == "single line"
    ranked = r.rankings[r.rankings["evidence"] != "none"]
    assert set(ranked["evidence"]) == {"analog only"}
    np.testing.assert_allclose(ranked["combined_p"], ranked["analog_p"])
    # taxa without any evidence stay in the table, at the bottom, unranked
    none = r.rankings[r.rankings["evidence"] == "none"]
    assert len(none) == 3 and none["combined_rank"].isna().all()
    assert r.rankings.index[r.rankings["evidence"] == "none"].min() == len(ranked)


# -- ranks and tiers ----------------------------------------------------------------------------

def test_ranks_and_quantile_tiers(result):
    r = result.rankings
    assert r["combined_rank"].tolist() == sorted(r["combined_rank"].tolist())
    np.testing.assert_array_equal(r["combined_rank"], stats.rankdata(-r["combined_p"], method="min"))
    # 40 taxa, quantiles (0.9, 0.75, 0.5): ranks 1-4 highest, 5-10 high, 11-20 moderate, 21-40 lower
    want = ["highest"] * 4 + ["high"] * 6 + ["moderate"] * 10 + ["lower"] * 20
    assert r["tier"].tolist() == want


def test_threshold_tiers(inputs):
    study, analog, traj = inputs
    p = PARAMS(n_boot=50, tier_rule="threshold", tier_thresholds=(0.6, 0.4, 0.2))
    r = combine_evidence(study, analog, traj, p, rng=np.random.default_rng(1)).rankings
    cp = r["combined_p"].to_numpy()
    want = np.where(cp >= 0.6, "highest", np.where(cp >= 0.4, "high", np.where(cp >= 0.2, "moderate", "lower")))
    assert r["tier"].tolist() == want.tolist()


def test_rank_method_orders_by_weighted_percentiles(inputs):
    study, analog, traj = inputs
    r = combine_evidence(study, analog, traj, PARAMS(n_boot=50, method="rank", analog_weight=0.4),
                         rng=np.random.default_rng(1)).rankings
    a = r["analog_p"].to_numpy()
    t = r["trajectory_p"].to_numpy()

    def pct(x):  # mid-rank percentile (r - 0.5) / n within one line, computed with scipy.stats.rankdata
        out = np.full(len(x), np.nan)
        ok = ~np.isnan(x)
        out[ok] = (stats.rankdata(x[ok]) - 0.5) / ok.sum()
        return out

    pa, pt = pct(a), pct(t)
    want = np.where(np.isnan(pa), pt, np.where(np.isnan(pt), pa, 0.4 * pa + 0.6 * pt))
    np.testing.assert_allclose(r["rank_score"], want, rtol=1e-12)
    np.testing.assert_array_equal(r["combined_rank"], stats.rankdata(-want, method="min"))


# -- comparison, disagreements, sensitivity -----------------------------------------------------

def test_rank_statistics_match_scipy(result):
    r = result.rankings
    both = r[r["evidence"] == "both"]
    comp = result.comparison.set_index("statistic")
    assert comp.at["n_taxa_both_lines", "estimate"] == len(both)
    # reference: scipy.stats.kendalltau (variant 'b') and scipy.stats.spearmanr
    tau = stats.kendalltau(both["analog_p"], both["trajectory_p"], variant="b").statistic
    rho = stats.spearmanr(both["analog_p"], both["trajectory_p"]).statistic
    assert comp.at["kendall_tau_b", "estimate"] == pytest.approx(tau, rel=1e-12)
    assert comp.at["spearman_rho", "estimate"] == pytest.approx(rho, rel=1e-12)
    for stat in ("kendall_tau_b", "spearman_rho"):
        assert comp.at[stat, "low"] <= comp.at[stat, "estimate"] <= comp.at[stat, "high"]
    for k in (5, 10, 20):
        top_a = set(both.nlargest(k, "analog_p")["taxon_id"])
        top_t = set(both.nlargest(k, "trajectory_p")["taxon_id"])
        assert comp.at[f"top_{k}_overlap", "estimate"] == pytest.approx(len(top_a & top_t) / k)
        assert 0 <= comp.at[f"top_{k}_overlap", "low"] <= comp.at[f"top_{k}_overlap", "high"] <= 1


def test_disagreement_table(inputs, result):
    study, analog, traj = inputs
    d = result.disagreements
    r = result.rankings
    both = r[r["evidence"] == "both"]
    ra = pd.Series(stats.rankdata(-both["analog_p"]), index=both["taxon_id"])
    rt = pd.Series(stats.rankdata(-both["trajectory_p"]), index=both["taxon_id"])
    diff = (ra - rt)
    largest = diff.abs().sort_values(ascending=False, kind="stable")
    assert d["rank_difference"].abs().tolist() == sorted(d["rank_difference"].abs(), reverse=True)
    assert d["rank_difference"].abs().iloc[0] == largest.iloc[0]
    for row in d.itertuples():
        assert row.rank_difference == diff[row.taxon_id]
        assert row.higher_on == ("analog" if row.rank_difference < 0 else "trajectory")
        c = analog.contributions[analog.contributions["taxon_id"] == row.taxon_id]
        top = c.reindex(c["log_odds_contribution"].abs().sort_values(ascending=False).index).head(3)
        assert row.analog_drivers.split("; ")[0].startswith(top["term"].iloc[0])
        assert len(row.analog_drivers.split("; ")) == 3
        pm = traj.risk.set_index("taxon_id").at[row.taxon_id, "preferred_model"]
        assert row.trajectory_driver.startswith(pm)


def test_sensitivity_table(inputs, result):
    s = result.sensitivity
    assert s["analog_weight"].is_monotonic_increasing
    assert s.loc[s["is_default"], "jaccard_vs_default"].tolist() == [1.0]
    assert len(s) == 12  # 11 grid weights + the skill-based weight
    # at analog weight 1 the top 10 is the top 10 by analog_p (single-line taxa by their own line)
    r = result.rankings
    score = r["analog_p"].fillna(r["trajectory_p"])
    top1 = set(r.loc[score.nlargest(10).index, "taxon_id"])
    base = set(r.head(10)["taxon_id"])
    row = s[s["analog_weight"] == 1.0].iloc[0]
    assert row["jaccard_vs_default"] == pytest.approx(len(top1 & base) / len(top1 | base))
    assert set(filter(None, row["entered"].split(";"))) == top1 - base


def test_tables_follow_the_contract(result):
    assert isinstance(result, CombinedResult)
    t = result.tables()
    assert list(t) == ["rankings.csv", "comparison.csv", "disagreements.csv", "sensitivity.csv"]
    assert list(t["rankings.csv"].columns[:10]) == ["taxon_id", "scientificName", "analog_p", "trajectory_p",
                                                     "combined_p", "combined_low", "combined_high", "combined_rank",
                                                     "tier", "evidence"]
    assert list(t["comparison.csv"].columns) == ["statistic", "estimate", "low", "high", "note"]
    assert "Combined ranking" in result.summary()


def test_reruns_are_identical(inputs):
    study, analog, traj = inputs
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        a = combine_evidence(study, analog, traj, PARAMS(n_boot=100), rng=np.random.default_rng(5))
        b = combine_evidence(study, analog, traj, PARAMS(n_boot=100), rng=np.random.default_rng(5))
    for name in a.tables():
        pd.testing.assert_frame_equal(a.tables()[name], b.tables()[name])


@pytest.mark.parametrize("section, match", [
    ({"tier_quantiles": [0.5, 0.75, 0.9]}, "tier_quantiles must be three distinct descending"),
    ({"method": "median"}, r"one of \['logit', 'rank'\]"),
    ({"analog_weight": 1.5}, r"a number in \[0.0, 1.0\]"),
    ({"top_k": [0, 5]}, "top_k must list whole numbers"),
])
def test_bad_options_are_reported(section, match):
    with pytest.raises(InputError, match=match):
        PARAMS.from_section(section, name="combine")


def test_too_few_shared_taxa_leave_statistics_blank_with_a_note(inputs):
    study, analog, traj = inputs
    keep = traj.risk["taxon_id"].isin(["t010", "t011"])
    t2 = type(traj)(risk=traj.risk[keep], risk_draws=traj.risk_draws.loc[["t010", "t011"]], skill=traj.skill)
    r = combine_evidence(study, analog, t2, PARAMS(n_boot=50), rng=np.random.default_rng(1))
    comp = r.comparison.set_index("statistic")
    assert comp.at["n_taxa_both_lines", "estimate"] == 2
    assert np.isnan(comp.at["kendall_tau_b", "estimate"])
    assert "need at least 3" in comp.at["kendall_tau_b", "note"]
    assert "exceeds the 2 taxa" in comp.at["top_5_overlap", "note"]
    assert len(r.disagreements) <= 2
