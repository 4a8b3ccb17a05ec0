import numpy as np
import pytest
from statsmodels.tools import eval_measures

from analog.stats import aicc, akaike_weights


def test_aicc_hand_computation():
    # Hurvich & Tsai (1989, Biometrika 76:297): AICc = -2 logL + 2k + 2k(k+1)/(n-k-1).
    # logL = -12.3, k = 3, n = 20: 24.6 + 6 + 24/16 = 32.1
    assert aicc(-12.3, 3, 20) == pytest.approx(32.1, abs=1e-12)
    # logL = 4.0, k = 2, n = 6: -8 + 4 + 12/3 = 0.0
    assert aicc(4.0, 2, 6) == pytest.approx(0.0, abs=1e-12)
    assert isinstance(aicc(-12.3, 3, 20), float)


@pytest.mark.parametrize("ll, k, n", [(-12.3, 3, 20), (-250.7, 5, 41), (3.2, 1, 4), (-7.0, 4, 7)])
def test_aicc_matches_statsmodels(ll, k, n):
    # reference library: statsmodels.tools.eval_measures.aicc(llf, nobs, df_modelwc)
    assert aicc(ll, k, n) == pytest.approx(eval_measures.aicc(ll, n, k), rel=1e-12)


def test_aicc_broadcasts_and_tends_to_aic():
    ll = np.array([[-10.0], [-20.0]])
    k = np.array([1, 2, 3])
    got = aicc(ll, k, 30)
    assert got.shape == (2, 3)
    want = np.array([[eval_measures.aicc(a, 30, b) for b in k] for a in ll[:, 0]])
    np.testing.assert_allclose(got, want, rtol=1e-12)
    # the correction vanishes as n grows (Hurvich & Tsai 1989): AICc -> AIC
    assert aicc(-10.0, 3, 1e9) == pytest.approx(eval_measures.aic(-10.0, 1e9, 3), rel=1e-8)


def test_aicc_undefined_cases():
    # n - k - 1 <= 0: +inf, as statsmodels.tools.eval_measures.aicc returns
    got = aicc([-5.0, -5.0, np.nan, -5.0, -5.0], [3, 4, 1, np.nan, -1], [4, 4, 10, 10, 10])
    assert got[0] == np.inf and got[1] == np.inf
    assert eval_measures.aicc(-5.0, 4, 3) == np.inf
    assert np.all(np.isnan(got[2:]))


def test_akaike_weights_hand_case():
    # Burnham & Anderson (2002, sec. 2.9): w_i = exp(-D_i/2) / sum_j exp(-D_j/2).
    # D = (0, 2, 10): weights 1, e^-1, e^-5 over their sum
    w = akaike_weights([100.0, 102.0, 110.0])
    raw = np.array([1.0, np.exp(-1.0), np.exp(-5.0)])
    np.testing.assert_allclose(w, raw / raw.sum(), rtol=1e-14)
    assert w.sum() == pytest.approx(1.0)


def test_akaike_weights_shift_invariant_and_no_underflow():
    a = np.array([3.0, 4.5, 9.0])
    np.testing.assert_allclose(akaike_weights(a + 1e6), akaike_weights(a), rtol=1e-12)
    np.testing.assert_allclose(akaike_weights([0.0, 5000.0]), [1.0, 0.0])


def test_akaike_weights_nonfinite_and_rows():
    a = np.array([[10.0, np.inf, 12.0],
                  [np.nan, 5.0, 5.0],
                  [np.nan, np.inf, -np.inf],
                  [7.0, 7.0, 7.0]])
    w = akaike_weights(a)
    raw = np.array([1.0, 0.0, np.exp(-1.0)])
    np.testing.assert_allclose(w[0], raw / raw.sum())
    np.testing.assert_allclose(w[1], [0.0, 0.5, 0.5])
    assert np.all(np.isnan(w[2]))
    np.testing.assert_allclose(w[3], [1 / 3] * 3)
    # models along axis 0 give the transposed answer
    np.testing.assert_allclose(akaike_weights(a.T, axis=0), w.T)
    # rows are independent: same as one call per row
    for i in (0, 1, 3):
        np.testing.assert_allclose(akaike_weights(a[i]), w[i])
    assert akaike_weights(4.0) == 1.0


def test_weights_from_aicc_end_to_end():
    # a model with too many parameters for n gets AICc = inf and weight 0
    w = akaike_weights(aicc(np.array([-10.0, -9.0, -1.0]), np.array([1, 2, 5]), 6))
    assert w[2] == 0.0
    # hand values: AICc(-10, k=1, n=6) = 20 + 2 + 4/4 = 23; AICc(-9, 2, 6) = 18 + 4 + 12/3 = 26
    assert aicc(-10.0, 1, 6) == pytest.approx(23.0) and aicc(-9.0, 2, 6) == pytest.approx(26.0)
    np.testing.assert_allclose(w[:2], np.array([1.0, np.exp(-1.5)]) / (1 + np.exp(-1.5)))
