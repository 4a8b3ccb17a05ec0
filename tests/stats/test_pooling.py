import math

import numpy as np
import pytest
from scipy import stats

from analog.errors import AnalogError
from analog.stats import logit_pool, rank_average


@pytest.fixture
def probs():
    rng = np.random.default_rng(42)
    return rng.uniform(0.01, 0.99, size=(30, 3))


def test_logit_pool_hand_computation():
    # logit(0.2) = ln(0.25), logit(0.7) = ln(7/3); weights 1:3 ->
    # (ln 0.25 + 3 ln(7/3)) / 4 = 0.288900..., expit -> 0.571727 (hand computation)
    z = (math.log(0.25) + 3 * math.log(7 / 3)) / 4
    assert logit_pool([0.2, 0.7], [1, 3]) == pytest.approx(1 / (1 + math.exp(-z)), rel=1e-12)
    assert logit_pool([0.2, 0.7], [1, 3]) == pytest.approx(0.5717268, abs=1e-7)


def test_logit_pool_is_geometric_pool_of_odds(probs):
    # Genest & Zidek (1986, Statist. Sci. 1:114), logarithmic opinion pool for a binary
    # event: prod p^w / (prod p^w + prod (1-p)^w), weights summing to one
    w = np.array([0.5, 0.3, 0.2])
    num = np.prod(probs**w, axis=1)
    want = num / (num + np.prod((1 - probs) ** w, axis=1))
    np.testing.assert_allclose(logit_pool(probs, w), want, rtol=1e-12)


def test_identical_inputs_return_the_input(probs):
    col = probs[:, :1]
    np.testing.assert_allclose(logit_pool(np.repeat(col, 4, axis=1), [1, 2, 3, 4]), col[:, 0],
                               rtol=1e-12)


def test_complementary_inputs_give_one_half(probs):
    pair = np.c_[probs[:, 0], 1 - probs[:, 0]]
    np.testing.assert_allclose(logit_pool(pair, [2.5, 2.5]), 0.5, atol=1e-12)


def test_permutation_and_scale_invariance(probs):
    w = np.array([0.2, 1.0, 3.0])
    base = logit_pool(probs, w)
    perm = [2, 0, 1]
    np.testing.assert_allclose(logit_pool(probs[:, perm], w[perm]), base, rtol=1e-12)
    np.testing.assert_allclose(logit_pool(probs, 7.5 * w), base, rtol=1e-12)


def test_missing_sources_renormalize():
    p = np.array([[0.2, np.nan, 0.7],
                  [np.nan, 0.4, np.nan],
                  [np.nan, np.nan, np.nan],
                  [0.3, 0.9, np.nan]])
    w = np.array([1.0, 0.0, 3.0])
    got = logit_pool(p, w)
    assert got[0] == pytest.approx(logit_pool([0.2, 0.7], [1, 3]))
    assert np.isnan(got[1])  # only a zero-weight source present
    assert np.isnan(got[2])
    assert got[3] == pytest.approx(0.3)  # the zero-weight source does not count


def test_clipping_and_shapes():
    assert logit_pool([0.0, 1.0], [1, 1]) == pytest.approx(0.5)
    assert logit_pool([0.0], [1.0], eps=1e-3) == pytest.approx(1e-3)
    assert isinstance(logit_pool([0.2, 0.4], [1, 1]), float)
    cube = np.full((2, 4, 3), 0.25)
    assert logit_pool(cube, [1, 1, 1]).shape == (2, 4)
    # per-row weights, broadcast against p
    p = np.array([[0.2, 0.7], [0.2, 0.7]])
    rows = logit_pool(p, np.array([[1.0, 3.0], [1.0, 0.0]]))
    np.testing.assert_allclose(rows, [logit_pool([0.2, 0.7], [1, 3]), 0.2])


@pytest.mark.parametrize("p, w, kwargs, message", [
    ([0.2, 1.2], [1, 1], {}, r"probabilities in \[0, 1\]; found 1.2"),
    ([0.2, 0.3], [1, 1, 1], {}, r"one entry per source \(2\); got 3"),
    ([0.2, 0.3], [1, -1], {}, "finite and non-negative"),
    ([0.2, 0.3], [0, 0], {}, "positive weight; all are 0"),
    ([0.2, 0.3], [1, 1], {"eps": 0.5}, r"'eps' parameter of logit_pool .* Got 0.5"),
])
def test_logit_pool_errors(p, w, kwargs, message):
    with pytest.raises(AnalogError, match=message):
        logit_pool(p, w, **kwargs)


def test_rank_average_hand_computation():
    s = np.array([[3.0, 10.0], [1.0, 30.0], [2.0, 20.0]])
    # source 1 mid-ranks 3,1,2 -> (r - 0.5)/3 = 5/6, 1/6, 1/2; source 2 -> 1/6, 5/6, 1/2
    np.testing.assert_allclose(rank_average(s), [0.5, 0.5, 0.5])
    np.testing.assert_allclose(rank_average(s, [3, 1]),
                               [(3 * 5 / 6 + 1 / 6) / 4, (3 / 6 + 5 / 6) / 4, 0.5])
    # ties share the mid-rank: 1, 1, 2 -> ranks 1.5, 1.5, 3 -> 1/3, 1/3, 5/6
    np.testing.assert_allclose(rank_average([1.0, 1.0, 2.0]), [1 / 3, 1 / 3, 5 / 6])


def test_rank_average_matches_percentileofscore():
    # reference library: scipy.stats.percentileofscore(kind='mean') / 100 per source
    rng = np.random.default_rng(3)
    s = np.round(rng.normal(size=(25, 3)), 1)
    s[[2, 7], 1] = np.nan
    w = np.array([1.0, 2.0, 0.5])
    pct = np.full(s.shape, np.nan)
    for j in range(3):
        col = s[:, j]
        valid = col[~np.isnan(col)]
        for i in np.flatnonzero(~np.isnan(col)):
            pct[i, j] = stats.percentileofscore(valid, col[i], kind="mean") / 100
    want = np.nansum(pct * w, axis=1) / np.sum(np.where(np.isnan(pct), 0, w), axis=1)
    np.testing.assert_allclose(rank_average(s, w), want, rtol=1e-12)


def test_rank_average_invariances():
    rng = np.random.default_rng(4)
    s = rng.normal(size=(12, 3))
    w = np.array([1.0, 2.0, 4.0])
    base = rank_average(s, w)
    perm = [1, 2, 0]
    np.testing.assert_allclose(rank_average(s[:, perm], w[perm]), base)
    np.testing.assert_allclose(rank_average(s, 10 * w), base)
    # only order matters: a monotone transform of one source changes nothing
    t = s.copy()
    t[:, 0] = np.exp(3 * t[:, 0])
    np.testing.assert_allclose(rank_average(t, w), base)
    # identical sources give the single-source ranks
    np.testing.assert_allclose(rank_average(np.c_[s[:, 0], s[:, 0]]), rank_average(s[:, 0]))


def test_rank_average_missing_and_errors():
    s = np.array([[3.0, np.nan], [1.0, 30.0], [np.nan, 20.0], [np.nan, np.nan]])
    got = rank_average(s)
    np.testing.assert_allclose(got[:3], [0.75, 0.5, 0.25])
    assert np.isnan(got[3])
    assert rank_average(np.empty((0, 2))).shape == (0,)
    with pytest.raises(AnalogError, match="one entry per source"):
        rank_average(s, [1.0])
    with pytest.raises(AnalogError, match="1-D or 2-D; got 3"):
        rank_average(np.zeros((2, 2, 2)))
