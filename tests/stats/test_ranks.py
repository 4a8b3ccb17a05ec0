import itertools

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from analog.errors import AnalogError
from analog.stats import RankAgreement, rank_agreement, top_k_overlap
from analog.stats import ranks as ranks_module


def _data(seed, n, tie_step=None):
    rng = np.random.default_rng(seed)
    x = rng.normal(size=n)
    y = 0.6 * x + 0.8 * rng.normal(size=n)
    if tie_step:  # coarse rounding makes ties on both sides
        x, y = np.round(x / tie_step) * tie_step, np.round(y / tie_step) * tie_step
    return x, y


@pytest.mark.parametrize("seed, n, tie_step", [(1, 25, None), (2, 60, 0.5), (3, 12, 1.0),
                                               (4, 300, 0.25)])
def test_point_estimates_match_scipy(seed, n, tie_step):
    x, y = _data(seed, n, tie_step)
    res = rank_agreement(x, y, n_boot=0, rng=0)
    # reference library: scipy.stats.kendalltau(variant='b') and scipy.stats.spearmanr
    assert res.kendall_tau_b == pytest.approx(stats.kendalltau(x, y, variant="b").statistic,
                                              rel=1e-12)
    assert res.spearman_rho == pytest.approx(stats.spearmanr(x, y).statistic, rel=1e-12)
    assert res.n == n and np.isnan(res.kendall_low) and np.isnan(res.spearman_high)


def test_weighted_tau_b_equals_scipy_on_each_resample():
    # the count-weighted concordance form must equal tau-b of the explicitly resampled data
    # (reference library: scipy.stats.kendalltau, variant 'b')
    x, y = _data(5, 30, 0.5)
    rng = np.random.default_rng(6)
    idx = rng.integers(0, 30, size=(40, 30))
    counts = np.stack([np.bincount(i, minlength=30) for i in idx]).astype(float)
    got = ranks_module._tau_b_counts(x, y, counts)
    want = [stats.kendalltau(x[i], y[i], variant="b").statistic for i in idx]
    np.testing.assert_allclose(got, want, rtol=1e-12, atol=1e-14)


def test_spearman_rows_equal_scipy():
    # reference library: scipy.stats.spearmanr, row by row
    x, y = _data(7, 20, 0.5)
    rng = np.random.default_rng(8)
    idx = rng.integers(0, 20, size=(25, 20))
    got = ranks_module._spearman_rows(x[idx], y[idx])
    want = [stats.spearmanr(x[i], y[i]).statistic for i in idx]
    np.testing.assert_allclose(got, want, rtol=1e-12)


def test_large_input_path_gives_same_intervals(monkeypatch):
    # the per-replicate scipy path and the matrix path see the same resamples
    x, y = _data(9, 40, 0.5)
    fast = rank_agreement(x, y, n_boot=200, rng=11)
    monkeypatch.setattr(ranks_module, "_KENDALL_MATRIX_MAX_N", 10)
    slow = rank_agreement(x, y, n_boot=200, rng=11)
    assert slow.kendall_tau_b == pytest.approx(fast.kendall_tau_b, rel=1e-12)
    assert (slow.kendall_low, slow.kendall_high) == pytest.approx(
        (fast.kendall_low, fast.kendall_high), rel=1e-12)


def test_intervals_reproducible_and_ordered():
    x, y = _data(12, 50)
    a = rank_agreement(x, y, n_boot=500, rng=np.random.default_rng(3))
    b = rank_agreement(x, y, n_boot=500, rng=np.random.default_rng(3))
    assert isinstance(a, RankAgreement) and a == b
    assert a.kendall_low < a.kendall_tau_b < a.kendall_high
    assert a.spearman_low < a.spearman_rho < a.spearman_high
    frame = a.to_frame()
    assert list(frame.columns) == ["statistic", "estimate", "low", "high", "n"]
    assert frame["statistic"].tolist() == ["kendall_tau_b", "spearman_rho"]
    assert "Kendall's tau-b" in a.summary() and "95%" in a.summary()


def test_missing_and_degenerate():
    x = np.array([1.0, 2.0, np.nan, 4.0, 5.0, 6.0])
    y = np.array([2.0, 1.0, 3.0, np.nan, 5.0, 7.0])
    res = rank_agreement(x, y, n_boot=50, rng=0)
    assert res.n == 4
    assert res.kendall_tau_b == pytest.approx(
        stats.kendalltau([1, 2, 5, 6], [2, 1, 5, 7]).statistic)
    one = rank_agreement([1.0, np.nan], [2.0, 3.0], n_boot=10, rng=0)
    assert one.n == 1 and np.isnan(one.kendall_tau_b) and np.isnan(one.spearman_low)
    flat = rank_agreement([1.0, 1.0, 1.0], [1.0, 2.0, 3.0], n_boot=10, rng=0)
    assert np.isnan(flat.kendall_tau_b) and np.isnan(flat.spearman_rho)
    # infinite scores are ranked, not turned into NaN
    inf = rank_agreement([1.0, 2.0, np.inf], [1.0, 2.0, 3.0], n_boot=0, rng=0)
    assert inf.kendall_tau_b == pytest.approx(1.0)


@pytest.mark.parametrize("kwargs, message", [
    ({"n_boot": -1}, "'n_boot' parameter of rank_agreement must be an integer >= 0. Got -1"),
    ({"alpha": 1.5}, "'alpha' parameter of rank_agreement must be a number in \\(0, 1\\)"),
    ({"rng": None}, "`rng` is required"),
])
def test_bad_options(kwargs, message):
    opts = {"n_boot": 10, "rng": 0, **kwargs}
    with pytest.raises(AnalogError, match=message):
        rank_agreement([1, 2, 3], [1, 3, 2], **opts)
    with pytest.raises(AnalogError, match="same length; got 3 and 2"):
        rank_agreement([1, 2, 3], [1, 2], rng=0)


@pytest.mark.slow
def test_interval_coverage_bivariate_normal():
    # For a bivariate normal with correlation r, tau = (2/pi) arcsin(r) (Greiner's relation;
    # Kendall 1948, Rank Correlation Methods) and rho_S = (6/pi) arcsin(r/2) (Pearson 1907).
    # Percentile intervals at n = 40 should cover near 95% (slightly less is usual).
    r, n, reps = 0.5, 40, 200
    tau, rho = 2 / np.pi * np.arcsin(r), 6 / np.pi * np.arcsin(r / 2)
    rng = np.random.default_rng(2024)
    cov = [[1, r], [r, 1]]
    hit_k = hit_s = 0
    for _ in range(reps):
        x, y = rng.multivariate_normal([0, 0], cov, size=n).T
        res = rank_agreement(x, y, n_boot=400, rng=rng)
        hit_k += res.kendall_low <= tau <= res.kendall_high
        hit_s += res.spearman_low <= rho <= res.spearman_high
    assert 0.85 <= hit_k / reps <= 0.99
    assert 0.85 <= hit_s / reps <= 0.99


# ---- top-k overlap ----------------------------------------------------------------------

def _brute_force_overlap(x, y, k):
    """Average overlap over all orders that break ties, each equally likely."""
    def tops(v):
        out = []
        for perm in itertools.permutations(range(len(v))):
            if all(v[perm[i]] >= v[perm[i + 1]] for i in range(len(v) - 1)):
                out.append(set(perm[:k]))
        return out
    tx, ty = tops(x), tops(y)
    return np.mean([len(a & b) / k for a in tx for b in ty])


def test_top_k_hand_cases():
    x = [5, 4, 3, 2, 1]
    y = [1, 2, 3, 4, 5]
    assert top_k_overlap(x, y, 2) == 0.0  # {0,1} vs {3,4}
    assert top_k_overlap(x, y, 3) == pytest.approx(1 / 3)  # {0,1,2} vs {2,3,4}
    assert top_k_overlap(x, y, 5) == 1.0
    assert top_k_overlap(x, x, 2) == 1.0
    # ties at the cut-off: x tops {0} + one of {1,2}; y tops {0} + one of {1,3}
    # expected overlap = (1 + 1/2 * 1/2) / 2 = 0.625 (hand count)
    assert top_k_overlap([3, 2, 2, 1], [3, 2, 1, 2], 2) == pytest.approx(0.625)


@pytest.mark.parametrize("seed", range(4))
def test_top_k_ties_equal_random_tie_breaking(seed):
    rng = np.random.default_rng(seed)
    x = rng.integers(0, 3, size=6).astype(float)
    y = rng.integers(0, 3, size=6).astype(float)
    for k in (1, 2, 3, 5):
        assert top_k_overlap(x, y, k) == pytest.approx(_brute_force_overlap(x, y, k))
        # order of the items does not matter
        perm = rng.permutation(6)
        assert top_k_overlap(x[perm], y[perm], k) == pytest.approx(top_k_overlap(x, y, k))


def test_top_k_missing_and_errors():
    x = [5.0, np.nan, 3.0, 2.0]
    y = [5.0, 4.0, np.nan, 1.0]
    assert top_k_overlap(x, y, 1) == 1.0  # complete pairs: items 0 and 3
    assert np.isnan(top_k_overlap(x, y, 3))
    assert isinstance(top_k_overlap(pd.Series([1.0, 2.0]), [1.0, 2.0], 1), float)
    with pytest.raises(AnalogError, match="'k' parameter of top_k_overlap .* Got 0"):
        top_k_overlap([1, 2], [1, 2], 0)
