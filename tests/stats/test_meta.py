import warnings

import numpy as np
import pytest
from scipy import optimize, stats
from statsmodels.stats.meta_analysis import combine_effects

from analog.errors import AnalogError, AnalogWarning
from analog.stats import PooledResult, pool_random_effects

# BCG vaccine trials (13 trials; Colditz et al. 1994, JAMA 271:698), as tabulated in
# van Houwelingen, Arends & Stijnen (2002, Stat. Med. 21:589), Table I: TB cases / non-cases
# among vaccinated (tpos, tneg) and unvaccinated (cpos, cneg).
TPOS = np.array([4, 6, 3, 62, 33, 180, 8, 505, 29, 17, 186, 5, 27], dtype=float)
TNEG = np.array([119, 300, 228, 13536, 5036, 1361, 2537, 87886, 7470, 1699, 50448, 2493, 16886],
                dtype=float)
CPOS = np.array([11, 29, 11, 248, 47, 372, 10, 499, 45, 65, 141, 3, 29], dtype=float)
CNEG = np.array([128, 274, 209, 12619, 5761, 1079, 619, 87892, 7232, 1600, 27197, 2338, 17825],
                dtype=float)


def _log_rr():
    """Log relative risks and their large-sample variances."""
    y = np.log(TPOS / (TPOS + TNEG)) - np.log(CPOS / (CPOS + CNEG))
    v = 1 / TPOS - 1 / (TPOS + TNEG) + 1 / CPOS - 1 / (CPOS + CNEG)
    return y, v


def _log_or():
    y = np.log(TPOS * CNEG / (TNEG * CPOS))
    v = 1 / TPOS + 1 / TNEG + 1 / CPOS + 1 / CNEG
    return y, v


def test_transcribed_data_reproduce_published_log_odds_ratios():
    # metafor's replication of van Houwelingen et al. (2002), metafor-project.org
    # "analyses:vanhouwelingen2002": yi, vi of trials 1-7 printed to 4 decimals
    y, v = _log_or()
    np.testing.assert_allclose(y[:7], [-0.9387, -1.6662, -1.3863, -1.4564, -0.2191, -0.9581,
                                       -1.6338], atol=5e-5)
    np.testing.assert_allclose(v[:7], [0.3571, 0.2081, 0.4334, 0.0203, 0.0520, 0.0099, 0.2270],
                               atol=5e-5)


def test_reml_bcg_log_relative_risk_matches_published_output():
    # metafor rma(yi, vi) REML on the BCG log relative risks (Viechtbauer 2010, J. Stat. Softw.
    # 36(3), sec. 3 -- from memory for the section; the printed output is reproduced in the
    # public course page cttir.github.io/courses/course3_design_causal/...): tau^2 0.3132,
    # I^2 92.22%, Q(df = 12) 152.2330, estimate -0.7145, se 0.1798, CI -1.0669 to -0.3622
    y, v = _log_rr()
    got = pool_random_effects(y, v, method="REML")
    assert got.tau2 == pytest.approx(0.3132, abs=5e-5)
    assert got.i2 == pytest.approx(0.9222, abs=5e-5)
    assert got.q == pytest.approx(152.2330, abs=5e-5)
    assert got.estimate == pytest.approx(-0.7145, abs=5e-5)
    assert got.se == pytest.approx(0.1798, abs=5e-5)
    lo, hi = got.conf_int()
    assert (lo, hi) == (pytest.approx(-1.0669, abs=5e-5), pytest.approx(-0.3622, abs=5e-5))
    assert got.q_p < 1e-4 and got.k == 13


def test_dl_matches_statsmodels_combine_effects():
    # reference library: statsmodels.stats.meta_analysis.combine_effects(method_re="dl")
    for y, v in (_log_rr(), _log_or()):
        ref = combine_effects(y, v, method_re="dl")
        got = pool_random_effects(y, v, method="DL")
        assert got.estimate == pytest.approx(ref.mean_effect_re, rel=1e-12)
        assert got.se == pytest.approx(ref.sd_eff_w_re, rel=1e-12)
        assert got.tau2 == pytest.approx(ref.tau2, rel=1e-12)
        assert got.q == pytest.approx(ref.q, rel=1e-12)
        assert got.i2 == pytest.approx(ref.i2, rel=1e-10)   # statsmodels: 1 - 1/H^2 = (Q-df)/Q
        assert got.q_p == pytest.approx(ref.test_homogeneity().pvalue, rel=1e-10)
        np.testing.assert_allclose(got.conf_int(), ref.conf_int(use_t=False)[1], rtol=1e-12)
        np.testing.assert_allclose(got.weights, ref.weights_rel_re, rtol=1e-12)


def test_dl_bcg_values_as_published():
    # DerSimonian-Laird on the BCG log relative risks: tau^2 0.3088, estimate -0.7141,
    # se 0.1787 (metafor rma(method = "DL"); from memory)
    got = pool_random_effects(*_log_rr(), method="DL")
    assert (got.tau2, got.estimate, got.se) == (pytest.approx(0.3088, abs=5e-5),
                                                pytest.approx(-0.7141, abs=5e-5),
                                                pytest.approx(0.1787, abs=5e-5))


def test_fixed_effect_matches_statsmodels():
    # reference library: statsmodels combine_effects, fixed-effect part
    y, v = _log_or()
    ref = combine_effects(y, v, method_re="dl")
    got = pool_random_effects(y, v, method="FE")
    assert got.tau2 == 0.0
    assert got.estimate == pytest.approx(ref.mean_effect_fe, rel=1e-12)
    assert got.se == pytest.approx(ref.sd_eff_w_fe, rel=1e-12)
    assert got.i2 == pytest.approx(ref.i2, rel=1e-10)   # FE reports the data's I^2
    np.testing.assert_allclose(got.weights, ref.weights_rel_fe, rtol=1e-12)


def test_hksj_matches_statsmodels_wls_scale():
    # reference library: statsmodels combine_effects var_hksj_re and conf_int(use_t=True),
    # whose random-effects "wls" interval is the HKSJ one (t with k-1 df)
    y, v = _log_rr()
    ref = combine_effects(y, v, method_re="dl")
    got = pool_random_effects(y, v, method="DL", hksj=True)
    assert got.se == pytest.approx(np.sqrt(ref.var_hksj_re), rel=1e-12)
    np.testing.assert_allclose(got.conf_int(), ref.conf_int(use_t=True)[3], rtol=1e-12)
    assert got.se_model == pytest.approx(ref.sd_eff_w_re, rel=1e-12)


def _reml_brute_force(y, v):
    """Independent REML: bounded scalar maximization of the restricted log-likelihood."""
    def neg(t2):
        w = 1 / (v + t2)
        mu = np.sum(w * y) / np.sum(w)
        return 0.5 * (np.sum(np.log(v + t2)) + np.log(np.sum(w)) + np.sum(w * (y - mu) ** 2))
    res = optimize.minimize_scalar(neg, bounds=(0, 10), method="bounded",
                                   options={"xatol": 1e-12})
    return res.x


def test_reml_matches_direct_maximization_of_restricted_likelihood():
    # restricted log-likelihood of the normal random-effects model (Viechtbauer 2005, eq. 8)
    rng = np.random.default_rng(8)
    for _ in range(5):
        k = int(rng.integers(3, 15))
        v = rng.uniform(0.02, 0.5, k)
        y = rng.normal(0.3, np.sqrt(v + rng.uniform(0, 0.4)))
        got = pool_random_effects(y, v, method="REML")
        ref = _reml_brute_force(y, v)
        assert got.tau2 == pytest.approx(ref, abs=1e-7)


def test_prediction_interval_formula():
    # Higgins, Thompson & Spiegelhalter (2009), eq. for the predictive interval:
    # mu -+ t_{k-2} sqrt(tau^2 + se^2); here applied to the REML fit above
    y, v = _log_rr()
    got = pool_random_effects(y, v, method="REML")
    half = stats.t.isf(0.025, 11) * np.sqrt(got.tau2 + got.se ** 2)
    np.testing.assert_allclose(got.prediction_interval(), (got.estimate - half, got.estimate + half))
    lo, hi = got.prediction_interval(alpha=0.2)
    assert got.prediction_interval()[0] < lo < got.estimate < hi


def test_homogeneous_estimates_give_zero_tau2_for_every_method():
    y = np.array([0.5, 0.5, 0.5, 0.5])
    v = np.array([0.1, 0.2, 0.3, 0.4])
    for method in ("DL", "REML", "FE"):
        got = pool_random_effects(y, v, method=method)
        assert got.tau2 == 0.0 and got.i2 == 0.0 and got.q == pytest.approx(0.0, abs=1e-15)
        assert got.estimate == pytest.approx(0.5)
        assert got.se == pytest.approx(np.sqrt(1 / np.sum(1 / v)))


def test_single_estimate_is_returned_as_is_without_warnings():
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        for method in ("DL", "REML", "FE"):
            got = pool_random_effects([0.7], [0.04], method=method)
            assert isinstance(got, PooledResult)
            assert (got.estimate, got.se, got.tau2, got.i2, got.q, got.k) == (
                pytest.approx(0.7), pytest.approx(0.2), 0.0, 0.0, 0.0, 1)
            assert np.isnan(got.q_p)
            np.testing.assert_allclose(got.conf_int(), (0.7 - 1.959964 * 0.2, 0.7 + 1.959964 * 0.2),
                                       rtol=1e-6)
            assert np.isnan(got.prediction_interval()).all()
    with pytest.warns(AnalogWarning, match="HKSJ variance needs at least 2"):
        got = pool_random_effects([0.7], [0.04], hksj=True)
    assert got.se == pytest.approx(0.2)


def test_non_finite_pairs_are_dropped_with_a_warning():
    y, v = _log_rr()
    y2 = np.r_[y, np.nan, 0.3]
    v2 = np.r_[v, 0.1, np.inf]
    with pytest.warns(AnalogWarning, match="dropped 2 of 15 estimates"):
        got = pool_random_effects(y2, v2, method="REML")
    ref = pool_random_effects(y, v, method="REML")
    assert got.estimate == pytest.approx(ref.estimate) and got.k == 13
    with pytest.warns(AnalogWarning, match="no finite estimate"):
        empty = pool_random_effects([np.nan], [0.1])
    assert empty.k == 0 and np.isnan(empty.estimate) and np.isnan(empty.conf_int()).all()


def test_errors():
    with pytest.raises(AnalogError, match="`method` was 'PM'"):
        pool_random_effects([0.1, 0.2], [0.1, 0.1], method="PM")
    with pytest.raises(AnalogError, match="`effects` has 2 values but `variances` has 3"):
        pool_random_effects([0.1, 0.2], [0.1, 0.1, 0.1])
    with pytest.raises(AnalogError, match="must be > 0"):
        pool_random_effects([0.1, 0.2], [0.1, 0.0])
    with pytest.raises(AnalogError, match="`alpha` must be in"):
        pool_random_effects([0.1, 0.2], [0.1, 0.1]).conf_int(alpha=0)
