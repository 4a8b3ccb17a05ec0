import numpy as np
import pandas as pd
import pytest
from scipy import stats

from analog.errors import AnalogError
from analog.stats import bootstrap_skill, brier_score, roc_auc


def _sample(seed, n1, n0, shift=1.0, step=None):
    rng = np.random.default_rng(seed)
    s = np.r_[rng.normal(shift, 1, n1), rng.normal(0, 1, n0)]
    if step:  # rounding makes ties across classes
        s = np.round(s / step) * step
    y = np.r_[np.ones(n1), np.zeros(n0)]
    perm = rng.permutation(n1 + n0)
    return y[perm], s[perm]


def _pairwise_auc(y, s):
    """Brute force: share of (event, non-event) pairs ordered correctly, ties 1/2."""
    pos, neg = s[y == 1], s[y == 0]
    diff = pos[:, None] - neg[None, :]
    return ((diff > 0) + 0.5 * (diff == 0)).mean()


def test_auc_hand_cases():
    # pairs (event, non-event): (.9,.5) 1, (.9,.1) 1, (.4,.5) 0, (.4,.1) 1 -> 3/4
    assert roc_auc([1, 1, 0, 0], [0.9, 0.4, 0.5, 0.1]) == pytest.approx(0.75)
    # a tie across classes counts 1/2: (.5,.5) .5, (.5,.1) 1, (.4,.5) 0, (.4,.1) 1 -> 2.5/4
    assert roc_auc([1, 1, 0, 0], [0.5, 0.4, 0.5, 0.1]) == pytest.approx(0.625)
    assert roc_auc([True, False], [0.2, 0.1]) == 1.0
    assert roc_auc([1, 0], [0.1, 0.2]) == 0.0


@pytest.mark.parametrize("seed, n1, n0, step",
                         [(1, 30, 50, None), (2, 17, 9, 0.5), (3, 5, 80, 1.0)])
def test_auc_matches_mann_whitney(seed, n1, n0, step):
    y, s = _sample(seed, n1, n0, step=step)
    # reference library: scipy.stats.mannwhitneyu, AUC = U_events / (n1 n0)
    u = stats.mannwhitneyu(s[y == 1], s[y == 0]).statistic
    assert roc_auc(y, s) == pytest.approx(u / (n1 * n0), rel=1e-12)
    assert roc_auc(y, s) == pytest.approx(_pairwise_auc(y, s), rel=1e-12)


def test_auc_matches_sklearn():
    metrics = pytest.importorskip("sklearn.metrics")
    y, s = _sample(4, 40, 60, step=0.25)
    # reference library: sklearn.metrics.roc_auc_score (trapezoidal ROC area, ties 1/2)
    assert roc_auc(y, s) == pytest.approx(metrics.roc_auc_score(y, s), rel=1e-12)


def test_auc_missing_and_one_class():
    y = pd.Series([1, 0, None, 1, 0], dtype="Float64")
    s = [0.9, 0.1, 0.5, np.nan, 0.3]
    assert roc_auc(y, s) == 1.0  # pairs 0, 1, 4 remain
    assert np.isnan(roc_auc([1, 1, np.nan], [0.2, 0.3, 0.1]))
    assert np.isnan(roc_auc([], []))
    with pytest.raises(AnalogError, match="coded 0/1 or True/False; found 2.0"):
        roc_auc([0, 1, 2], [0.1, 0.2, 0.3])
    with pytest.raises(AnalogError, match="same length; got 2 and 3"):
        roc_auc([0, 1], [0.1, 0.2, 0.3])


def test_brier_hand_case():
    y = [1, 0, 1, 0]
    p = [0.8, 0.3, 0.6, 0.1]
    # (0.2^2 + 0.3^2 + 0.4^2 + 0.1^2) / 4 = 0.3 / 4 = 0.075 (hand computation)
    assert brier_score(y, p) == pytest.approx(0.075)
    # Brier (1950, Mon. Weather Rev. 78:1, eq. 1) sums over both classes, event and
    # no event: (1/n) sum_i sum_j (f_ij - E_ij)^2, which is twice the one-class form
    f = np.c_[p, 1 - np.array(p)]
    e = np.c_[y, 1 - np.array(y)]
    assert 2 * brier_score(y, p) == pytest.approx(((f - e) ** 2).sum(axis=1).mean())
    assert brier_score([1, 0], [0.5, 0.5]) == 0.25
    assert brier_score([1, 0], [1.0, 0.0]) == 0.0


def test_brier_matches_sklearn():
    metrics = pytest.importorskip("sklearn.metrics")
    rng = np.random.default_rng(5)
    p = rng.uniform(size=50)
    y = (rng.uniform(size=50) < p).astype(float)
    # reference library: sklearn.metrics.brier_score_loss
    assert brier_score(y, p) == pytest.approx(metrics.brier_score_loss(y, p), rel=1e-12)


def test_brier_missing_and_invalid():
    assert brier_score([1, np.nan, 0], [0.9, 0.5, np.nan]) == pytest.approx(0.01)
    assert np.isnan(brier_score([np.nan], [0.5]))
    with pytest.raises(AnalogError, match=r"probabilities in \[0, 1\]; found 1.5"):
        brier_score([1, 0], [1.5, 0.2])


def test_bootstrap_skill_point_values_and_intervals():
    y, s = _sample(6, 40, 60)
    p = stats.norm.cdf(s - 0.5)  # a probability scale for the Brier score
    res = bootstrap_skill(y, p, n_boot=800, rng=np.random.default_rng(7))
    assert set(res) == {"auc", "auc_low", "auc_high", "brier", "brier_low", "brier_high"}
    assert res["auc"] == pytest.approx(roc_auc(y, p))
    assert res["brier"] == pytest.approx(brier_score(y, p))
    assert res["auc_low"] < res["auc"] < res["auc_high"]
    assert res["brier_low"] < res["brier"] < res["brier_high"]
    assert res == bootstrap_skill(y, p, n_boot=800, rng=np.random.default_rng(7))


def test_bootstrap_auc_spread_matches_delong():
    # DeLong, DeLong & Clarke-Pearson (1988, Biometrics 44:837): variance of the AUC from
    # placement values, var = s10 / n1 + s01 / n0. The stratified bootstrap estimates the
    # same quantity; its 95% interval half-width should be near 1.96 * SE (within 20%,
    # allowing for resampling noise and skewness of the AUC).
    y, s = _sample(8, 60, 80, shift=0.8)
    pos, neg = s[y == 1], s[y == 0]
    psi = (pos[:, None] > neg[None, :]) + 0.5 * (pos[:, None] == neg[None, :])
    se = np.sqrt(psi.mean(axis=1).var(ddof=1) / pos.size + psi.mean(axis=0).var(ddof=1) / neg.size)
    res = bootstrap_skill(y, s, n_boot=2000, rng=9)
    half = (res["auc_high"] - res["auc_low"]) / 2
    assert half == pytest.approx(1.96 * se, rel=0.2)
    assert np.isnan(res["brier"]) and np.isnan(res["brier_low"])  # scores are not probabilities


def test_bootstrap_skill_edge_cases():
    res = bootstrap_skill([1, 1, 1], [0.2, 0.5, 0.7], rng=0)
    assert all(np.isnan(v) for v in res.values())
    res = bootstrap_skill([1, 0, 1, 0], [0.8, 0.3, 0.6, 0.1], n_boot=0, rng=0)
    assert res["auc"] == 1.0 and res["brier"] == pytest.approx(0.075)
    assert np.isnan(res["auc_low"]) and np.isnan(res["brier_high"])
    # one event: every resample keeps it, so the AUC interval stays defined
    res = bootstrap_skill([1, 0, 0, 0], [0.4, 0.1, 0.5, 0.2], n_boot=200, rng=0)
    assert np.isfinite(res["auc_low"]) and res["auc_low"] <= res["auc"] <= res["auc_high"]
    with pytest.raises(AnalogError, match="'n_boot' parameter of bootstrap_skill .* Got 2.5"):
        bootstrap_skill([1, 0], [0.5, 0.5], n_boot=2.5, rng=0)
    with pytest.raises(AnalogError, match="`rng` is required"):
        bootstrap_skill([1, 0], [0.5, 0.5], rng=None)
