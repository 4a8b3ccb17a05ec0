import types
import warnings

import numpy as np
import pytest
from scipy import stats
from statsmodels.imputation.mice import MICE
from statsmodels.regression.linear_model import OLS

from analog.errors import AnalogError, AnalogWarning
from analog.stats import RubinResult, rubin_combine


def test_hand_worked_example():
    # Rubin's rules as set out in van Buuren (2018), Flexible Imputation of Missing Data,
    # sec. 2.3 (Rubin 1987, eqs. 3.1.2-3.1.6), worked by hand for m = 3:
    # Q = (1, 2, 3), U = 0.5 each -> Q_bar = 2, W = 0.5, B = 1, T = 0.5 + (4/3) 1 = 11/6,
    # r = (4/3) / 0.5 = 8/3, lambda = (4/3) / (11/6) = 8/11,
    # nu_old = (m - 1) (1 + 1/r)^2 = 2 * (11/8)^2 = 3.78125,
    # fmi = (r + 2/(nu + 3)) / (1 + r) = (8/3 + 2/6.78125) / (11/3)
    got = rubin_combine([1.0, 2.0, 3.0], [0.5, 0.5, 0.5])
    assert isinstance(got, RubinResult) and got.m == 3
    assert got.estimate == pytest.approx(2.0)
    assert got.within == pytest.approx(0.5)
    assert got.between == pytest.approx(1.0)
    assert got.total == pytest.approx(11 / 6) and got.variance == got.total
    assert got.se == pytest.approx(np.sqrt(11 / 6))
    assert got.riv == pytest.approx(8 / 3)
    assert got.lambda_ == pytest.approx(8 / 11)
    assert got.df == pytest.approx(3.78125)
    assert got.fmi == pytest.approx((8 / 3 + 2 / 6.78125) / (11 / 3))
    half = stats.t.isf(0.025, 3.78125) * np.sqrt(11 / 6)
    np.testing.assert_allclose(got.conf_int(), (2 - half, 2 + half))


def test_barnard_rubin_degrees_of_freedom_by_hand():
    # Barnard & Rubin (1999), as in van Buuren (2018) sec. 2.3.6, same data, nu_com = 10:
    # nu_obs = 11/13 * 10 * (1 - 8/11) = 30/13; nu = nu_old nu_obs / (nu_old + nu_obs)
    got = rubin_combine([1.0, 2.0, 3.0], [0.5, 0.5, 0.5], df_complete=10)
    nu_old, nu_obs = 3.78125, 30 / 13
    assert got.df == pytest.approx(nu_old * nu_obs / (nu_old + nu_obs))
    # properties stated by Barnard & Rubin (1999): nu <= nu_com, and nu -> nu_old as nu_com grows
    assert got.df <= 10
    assert rubin_combine([1.0, 2.0, 3.0], [0.5] * 3, df_complete=1e12).df == pytest.approx(
        nu_old, rel=1e-6)


def test_matches_statsmodels_mice_combine():
    # reference library: statsmodels.imputation.mice.MICE.combine, the pooling step of its
    # MICE implementation (T = W + (1 + 1/m) B and its frac_miss_info = (1 + 1/m) B / T),
    # fed with m = 5 OLS fits on perturbed data sets
    rng = np.random.default_rng(0)
    fits = []
    for _ in range(5):
        X = np.column_stack([np.ones(50), rng.normal(size=50), rng.normal(size=50)])
        fits.append(OLS(X @ [1.0, 2.0, -0.5] + rng.normal(size=50), X).fit())
    holder = types.SimpleNamespace(results_list=fits, exog_names=["c", "x1", "x2"],
                                   endog_names="y", model_class=OLS)
    ref = MICE.combine(holder)
    got = rubin_combine(np.array([f.params for f in fits]), np.array([f.bse ** 2 for f in fits]))
    np.testing.assert_allclose(got.estimate, ref.params, rtol=1e-12)
    np.testing.assert_allclose(got.total, np.diag(ref.cov_params()), rtol=1e-12)
    np.testing.assert_allclose(got.lambda_, ref.frac_miss_info, rtol=1e-12)
    assert got.estimate.shape == (3,) and got.conf_int()[0].shape == (3,)


def test_columns_are_combined_independently_and_nan_draws_dropped():
    est = np.array([[1.0, 2.0], [2.0, np.nan], [3.0, 4.0]])
    var = np.full((3, 2), 0.5)
    got = rubin_combine(est, var)
    single = rubin_combine([2.0, 4.0], [0.5, 0.5])
    np.testing.assert_array_equal(got.m, [3, 2])
    assert got.estimate[0] == pytest.approx(2.0)
    assert got.estimate[1] == pytest.approx(single.estimate)
    assert got.total[1] == pytest.approx(single.total)
    assert got.df[1] == pytest.approx(single.df)


def test_identical_draws_give_within_variance_and_normal_interval():
    got = rubin_combine([1.5, 1.5, 1.5, 1.5], [0.04, 0.09, 0.04, 0.09])
    assert got.between == 0.0 and got.total == pytest.approx(0.065)
    assert np.isinf(got.df) and got.fmi == 0.0
    z = stats.norm.isf(0.05)
    np.testing.assert_allclose(got.conf_int(alpha=0.1),
                               (1.5 - z * np.sqrt(0.065), 1.5 + z * np.sqrt(0.065)))
    # with a complete-data df the Barnard-Rubin df equals nu_obs at lambda = 0
    assert rubin_combine([1.5] * 4, [0.04] * 4, df_complete=20).df == pytest.approx(21 / 23 * 20)


def test_single_draw_warns_and_uses_within_variance():
    with pytest.warns(AnalogWarning, match="fewer than 2 usable draws"):
        got = rubin_combine([0.3], [0.01])
    assert got.total == pytest.approx(0.01) and got.m == 1
    with pytest.warns(AnalogWarning, match="fewer than 2 usable draws"):
        empty = rubin_combine(np.array([[np.nan, 1.0], [np.nan, 2.0]]), np.full((2, 2), 0.1))
    assert np.isnan(empty.estimate[0]) and np.isnan(empty.total[0]) and np.isnan(empty.df[0])
    assert empty.estimate[1] == pytest.approx(1.5)


def test_no_warning_in_the_normal_case():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        rubin_combine(np.random.default_rng(1).normal(size=(20, 4)), np.full((20, 4), 0.2))


def test_errors():
    with pytest.raises(AnalogError, match=r"`estimates` has shape \(3,\) but `variances` has \(2,\)"):
        rubin_combine([1, 2, 3], [1, 1])
    with pytest.raises(AnalogError, match="must be 1-D"):
        rubin_combine(np.ones((2, 2, 2)), np.ones((2, 2, 2)))
    with pytest.raises(AnalogError, match="must be >= 0"):
        rubin_combine([1, 2], [0.1, -0.1])
    with pytest.raises(AnalogError, match="`df_complete` must be > 0"):
        rubin_combine([1, 2], [0.1, 0.1], df_complete=0)
    with pytest.raises(AnalogError, match="`alpha` must be in"):
        rubin_combine([1, 2], [0.1, 0.1]).conf_int(alpha=2)
