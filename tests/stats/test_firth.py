import warnings

import numpy as np
import pandas as pd
import pytest
from statsmodels.datasets import spector
from statsmodels.discrete.discrete_model import Logit
from statsmodels.genmod import families
from statsmodels.genmod.generalized_linear_model import GLM
from statsmodels.tools import add_constant
from scipy import optimize, special, stats

from analog.errors import AnalogError, AnalogWarning
from analog.stats import FirthResult, firth_logit

# Endometrial cancer data (n = 79): NV (neovasculization 0/1), PI (pulsatility index),
# EH (endometrium height), HG (histology grade 0/1), first analysed by Heinze & Schemper
# (2002, Stat. Med. 21:2409); copied from the data file distributed with Agresti (2015),
# Foundations of Linear and Generalized Linear Models (Endometrial.dat). NV = 1 only with
# HG = 1: quasi-complete separation.
_ENDOMETRIAL = """
0 13 1.64 0|0 16 2.26 0|0 8 3.14 0|0 34 2.68 0|0 20 1.28 0|0 5 2.31 0|0 17 1.80 0|0 10 1.68 0
0 26 1.56 0|0 17 2.31 0|0 8 2.01 0|0 7 1.89 0|0 20 3.15 0|0 10 1.23 0|0 18 1.27 0|0 16 1.76 0
0 18 2.00 0|0 8 2.64 1|0 29 0.88 1|0 12 1.27 1|0 20 1.37 1|1 38 0.97 1|1 22 1.14 1|1 7 0.88 1
1 25 0.91 1|1 15 0.58 1|0 7 0.97 1|0 28 1.50 0|0 11 1.33 0|0 19 2.37 0|0 10 1.82 0|0 10 3.13 0
0 18 1.31 0|0 14 1.92 0|0 21 1.64 0|0 11 2.01 0|0 17 1.88 0|0 25 1.93 0|0 16 2.11 0|0 19 1.29 0
0 15 1.72 0|0 33 0.75 0|0 24 1.92 0|0 48 1.84 1|0 12 1.11 1|0 19 1.61 1|0 2 1.18 1|1 22 1.44 1
1 40 1.18 1|1 5 0.93 1|1 0 1.17 1|0 21 1.19 1|0 15 1.06 1|0 29 2.02 0|0 15 2.29 0|0 12 2.33 0
0 3 2.90 0|0 20 1.70 0|0 23 1.41 0|0 12 2.25 0|0 22 1.54 0|0 42 1.97 0|0 15 1.75 0|0 13 2.16 0
0 14 2.57 0|0 19 1.37 0|0 12 3.61 0|0 13 2.04 0|0 10 2.17 0|0 12 1.69 1|1 49 0.27 1|0 6 1.84 1
0 5 1.30 1|0 17 0.96 1|1 11 1.01 1|1 21 0.98 1|0 5 0.35 1|1 19 1.02 1|0 33 0.85 1
"""


def _endometrial():
    rows = [r.split() for r in _ENDOMETRIAL.replace("\n", "|").split("|") if r.strip()]
    data = np.array(rows, dtype=float)
    assert data.shape == (79, 4)
    X = pd.DataFrame({"const": 1.0, "NV": data[:, 0], "PI": data[:, 1], "EH": data[:, 2]})
    return X, data[:, 3]


def _penalized_loglik(beta, X, y):
    """Firth's objective written out directly: l(b) + 0.5 log det(X' diag(p(1-p)) X)."""
    eta = X @ beta
    p = special.expit(eta)
    loglik = np.sum(y * eta - np.logaddexp(0.0, eta))
    _, logdet = np.linalg.slogdet(X.T @ (X * (p * (1 - p))[:, None]))
    return loglik + 0.5 * logdet


def _brute_force_firth(X, y):
    """Independent second implementation: maximize the explicit objective with scipy (BFGS)."""
    res = optimize.minimize(lambda b: -_penalized_loglik(b, X, y), np.zeros(X.shape[1]),
                            method="BFGS", options={"gtol": 1e-9})
    return res.x, -res.fun


def _brute_force_profile_limit(X, y, j, lmax, q, side):
    """Profile limit by a plain root search on an explicitly maximized constrained objective."""
    others = [k for k in range(X.shape[1]) if k != j]

    def prof(v):
        def negobj(b_other):
            b = np.empty(X.shape[1])
            b[j] = v
            b[others] = b_other
            return -_penalized_loglik(b, X, y)
        res = optimize.minimize(negobj, np.zeros(len(others)), method="BFGS",
                                options={"gtol": 1e-10})
        return 2 * (lmax + res.fun) - q

    b_hat = _brute_force_firth(X, y)[0][j]
    far = b_hat + side * 20.0
    return optimize.brentq(prof, *sorted((b_hat, far)), xtol=1e-7)


# ---------------------------------------------------------------------------------------
# (a) penalty='none' is ordinary ML: reference library statsmodels (Logit, GLM)

def test_ml_matches_statsmodels_logit_on_spector_data():
    # reference library: statsmodels.api.Logit on statsmodels' bundled Spector & Mazzeo
    # (1980) data (no separation)
    data = spector.load_pandas()
    X = add_constant(data.exog)
    y = data.endog.to_numpy()
    ref = Logit(y, X).fit(disp=0)
    got = firth_logit(X, y, penalty="none")
    assert got.converged
    np.testing.assert_allclose(got.params, ref.params.to_numpy(), rtol=1e-8)
    np.testing.assert_allclose(got.bse, ref.bse.to_numpy(), rtol=1e-7)
    assert got.loglik == pytest.approx(ref.llf, rel=1e-10)
    # Wald intervals as statsmodels' conf_int
    np.testing.assert_allclose(got.conf_int(method="wald"), ref.conf_int().to_numpy(), rtol=1e-7)


def test_ml_profile_interval_matches_statsmodels_refits():
    # reference library: statsmodels GLM(Binomial) refitted with one coefficient as an offset;
    # the profile limit is where 2 (llf_full - llf_constrained) = chi2_1(0.95)
    data = spector.load_pandas()
    X = add_constant(data.exog).to_numpy()
    y = data.endog.to_numpy()
    full = GLM(y, X, family=families.Binomial()).fit()
    q = stats.chi2.isf(0.05, 1)
    got = firth_logit(X, y, penalty="none").conf_int()
    j = 3  # PSI
    others = [0, 1, 2]

    def dev(v):
        fit = GLM(y, X[:, others], family=families.Binomial(), offset=v * X[:, j]).fit()
        return 2 * (full.llf - fit.llf) - q

    assert dev(got[j, 0]) == pytest.approx(0.0, abs=1e-6)
    assert dev(got[j, 1]) == pytest.approx(0.0, abs=1e-6)
    assert got[j, 0] < full.params[j] < got[j, 1]


def test_ml_frequency_weights_match_statsmodels_glm():
    # reference library: statsmodels GLM(Binomial, freq_weights=...)
    rng = np.random.default_rng(11)
    X = np.column_stack([np.ones(60), rng.normal(size=60), rng.integers(0, 2, 60)])
    y = (rng.random(60) < special.expit(X @ [-0.3, 0.8, 0.5])).astype(float)
    w = rng.integers(1, 4, 60).astype(float)
    ref = GLM(y, X, family=families.Binomial(), freq_weights=w).fit()
    got = firth_logit(X, y, penalty="none", weights=w)
    np.testing.assert_allclose(got.params, ref.params, rtol=1e-8)
    np.testing.assert_allclose(got.bse, ref.bse, rtol=1e-7)


def test_ml_under_quasi_separation_warns_and_other_terms_reach_glm_limits():
    # With NV quasi-separated, ML diverges in NV only. The other estimates tend to the values
    # printed by R glm() for HG ~ NV + PI + EH on these data (intercept 4.30452, PI -0.04218,
    # EH -2.90261; R output reproduced in a public course page on the Agresti 2015 data,
    # jingshuw.org/materials/stat347_2023/example3_2).
    X, y = _endometrial()
    with pytest.warns(AnalogWarning, match="(did not converge|numerically 0 or 1).*penalty='firth'"):
        got = firth_logit(X, y, penalty="none")
    assert not got.converged
    assert got.params[1] > 20
    np.testing.assert_allclose(got.params[[0, 2, 3]], [4.30452, -0.04218, -2.90261], atol=1e-5)
    with pytest.warns(AnalogWarning, match="need a converged fit"):
        assert np.isnan(got.conf_int()).all()


# ---------------------------------------------------------------------------------------
# (b) Firth estimates: independent brute-force implementation, plus recalled published values

def test_firth_matches_brute_force_maximization_on_endometrial_data():
    # independent second implementation: scipy.optimize BFGS on the explicit penalized
    # log-likelihood l(b) + 0.5 log|I(b)| (Firth 1993, eq. for the Jeffreys-prior penalty)
    X, y = _endometrial()
    got = firth_logit(X, y)
    ref_beta, ref_ll = _brute_force_firth(X.to_numpy(), y)
    assert got.converged
    np.testing.assert_allclose(got.params, ref_beta, atol=2e-5)   # BFGS gtol limits agreement
    assert got.loglik == pytest.approx(ref_ll, abs=1e-8)
    assert got.loglik == pytest.approx(_penalized_loglik(got.params, X.to_numpy(), y), abs=1e-10)


def test_firth_endometrial_values_as_published():
    # Heinze & Schemper (2002), endometrial example, penalized estimates and the NV profile
    # interval (from memory: 3.7746, 2.9293, -0.0348, -2.6042; NV 95% PL CI 0.61 to 7.85)
    X, y = _endometrial()
    got = firth_logit(X, y)
    np.testing.assert_allclose(got.params, [3.7746, 2.9293, -0.0348, -2.6042], atol=1e-4)
    ci = got.conf_int()
    np.testing.assert_allclose(ci[1], [0.61, 7.85], atol=5e-3)


def test_firth_profile_limits_match_brute_force_profile():
    # independent second implementation of the profile penalized likelihood interval
    # (Heinze & Schemper 2002, sec. 2): constrained objective maximized with scipy BFGS
    X, y = _endometrial()
    Xa = X.to_numpy()
    got = firth_logit(X, y)
    ci = got.conf_int()
    q = stats.chi2.isf(0.05, 1)
    lmax = _brute_force_firth(Xa, y)[1]
    for j, side in [(1, 1)]:   # NV upper limit, on the side of the separation
        ref = _brute_force_profile_limit(Xa, y, j, lmax, q, side)
        assert ci[j, 0 if side < 0 else 1] == pytest.approx(ref, abs=1e-4)


def test_firth_summary_frame_columns_and_names():
    X, y = _endometrial()
    frame = firth_logit(X, y).summary_frame()
    assert list(frame.index) == ["const", "NV", "PI", "EH"]
    assert frame.index.name == "term"
    assert list(frame.columns) == ["estimate", "se", "ci_low", "ci_high", "p_value", "odds_ratio"]
    np.testing.assert_allclose(frame["odds_ratio"], np.exp(frame["estimate"]))
    assert (frame["ci_low"] < frame["estimate"]).all() and (frame["estimate"] < frame["ci_high"]).all()
    # the profile p-value is the penalized LR test; PI's interval covers 0, so p > 0.05
    assert frame.loc["PI", "p_value"] > 0.05 and frame.loc["EH", "p_value"] < 0.05
    wald = firth_logit(X, y).summary_frame(["a", "b", "c", "d"], method="wald")
    np.testing.assert_allclose(wald["p_value"],
                               2 * stats.norm.sf(np.abs(wald["estimate"] / wald["se"])))


# ---------------------------------------------------------------------------------------
# (c) separation: finite estimates and finite profile intervals

@pytest.fixture
def complete_separation():
    x = np.array([-3.0, -2.0, -1.0, 1.0, 2.0, 3.0])
    return np.column_stack([np.ones(6), x]), (x > 0).astype(float)


def test_firth_is_finite_under_complete_separation(complete_separation):
    # Firth estimates exist under separation (Heinze & Schemper 2002; Kosmidis & Firth 2021)
    X, y = complete_separation
    got = firth_logit(X, y)
    assert got.converged and np.all(np.isfinite(got.params)) and np.all(np.isfinite(got.bse))
    assert got.params[1] > 0
    assert got.params[0] == pytest.approx(0.0, abs=1e-10)   # the data are symmetric about x = 0
    ci = got.conf_int()
    assert np.all(np.isfinite(ci))
    assert ci[1, 0] > 0   # separation is evidence of a positive slope
    assert got.params[1] == pytest.approx(_brute_force_firth(X, y)[0][1], abs=1e-5)


@pytest.mark.parametrize("seed", [0, 1, 2])
def test_firth_matches_brute_force_on_small_sparse_designs(seed):
    # small samples with rare events and binary columns (seeds 0 and 2 are separated: ML
    # diverges there; seed 1 is not). Independent second implementation
    # (scipy BFGS on the explicit penalized likelihood)
    rng = np.random.default_rng(seed)
    n = 14
    X = np.column_stack([np.ones(n), rng.integers(0, 2, n), rng.integers(0, 2, n),
                         rng.normal(size=n)]).astype(float)
    y = (rng.random(n) < 0.25).astype(float)
    y[:2] = [1.0, 0.0]
    got = firth_logit(X, y)
    ref_beta, ref_ll = _brute_force_firth(X, y)
    assert got.converged
    assert got.loglik == pytest.approx(ref_ll, abs=1e-7)
    np.testing.assert_allclose(got.params, ref_beta, atol=1e-4)
    ci = got.conf_int()
    assert np.all(np.isfinite(ci)) and np.all((ci[:, 0] < got.params) & (got.params < ci[:, 1]))


def test_firth_quasi_separation_gives_finite_profile_interval():
    X, y = _endometrial()
    got = firth_logit(X, y)
    ci = got.conf_int()
    assert np.all(np.isfinite(ci))
    # profile interval is asymmetric: much longer on the side of the separation
    assert ci[1, 1] - got.params[1] > got.params[1] - ci[1, 0]


def _penalized_loglik_svd(beta, X, y):
    """Firth's objective with log det(X'WX) from the singular values of W^1/2 X (numpy SVD),
    accurate where the fitted probabilities saturate and X'WX itself is numerically singular."""
    eta = X @ beta
    v = special.expit(eta) * special.expit(-eta)
    sv = np.linalg.svd(X * np.sqrt(v)[:, None], compute_uv=False)
    return np.sum(y * eta - np.logaddexp(0.0, eta)) + np.sum(np.log(sv))


def _grid_profile_limit(X, y, j, side, q, steps=(1.0, 0.05)):
    """Brute-force profile limit of b_j on one side (side = -1 lower, +1 upper).

    The constrained objective is maximized with scipy BFGS at b_j = b_hat + side * k * step,
    k = 0, 1, ..., each point started from the constrained maximum of the previous one
    (following the profile path outward) and from the full estimate, keeping the better. At
    the first grid cell where the deviance passes q the walk restarts from the cell's inner
    end with the next, finer step; the crossing is finally interpolated linearly on the signed
    root of the deviance. Returns (coarse limit, fine limit)."""
    full, lmax = _brute_force_firth(X, y)
    others = [k for k in range(X.shape[1]) if k != j]

    def deviance(value, starts):
        def negobj(b_other):
            b = np.empty(X.shape[1])
            b[j] = value
            b[others] = b_other
            return -_penalized_loglik_svd(b, X, y)
        best = min((optimize.minimize(negobj, s0, method="BFGS", options={"gtol": 1e-10})
                    for s0 in starts), key=lambda r: r.fun)
        return 2.0 * (lmax + best.fun), best.x

    value, dev, warm = full[j], 0.0, full[others]
    limits = []
    for step in steps:
        values, devs, fits = [value], [dev], [warm]
        while devs[-1] < q:
            assert abs(values[-1] - full[j]) < 100, "no crossing within 100 logit units"
            values.append(values[-1] + side * step)
            dev, warm = deviance(values[-1], [fits[-1], full[others]])
            devs.append(dev)
            fits.append(warm)
        root = np.sqrt(np.clip(devs[-2:], 0.0, None))
        limits.append(float(np.interp(np.sqrt(q), root, values[-2:])))
        value, dev, warm = values[-2], devs[-2], fits[-2]   # inner end of the crossing cell
    return tuple(limits)


def test_firth_profile_limit_in_sparse_design_matches_grid_profile():
    # five rows, one event, two integer covariates: the Wald guess for the lower limit of b1
    # (-19.5) lies where the fitted probabilities of some rows saturate (X'WX numerically
    # singular), far beyond the actual limit (-11.09). The profile penalized-likelihood limit
    # (method: Heinze & Schemper 2002, sec. 2) is checked against an independent brute-force
    # profile (reference library: scipy.optimize BFGS on the explicit objective over a grid,
    # coarse then fine, with the cut-off crossing interpolated)
    X = np.array([[1.0, -3.0, 2.0], [1.0, 0.0, -3.0], [1.0, 2.0, -2.0], [1.0, -3.0, 3.0],
                  [1.0, 2.0, -3.0]])
    y = np.array([1.0, 0.0, 0.0, 0.0, 0.0])
    got = firth_logit(X, y)
    np.testing.assert_allclose(got.params, _brute_force_firth(X, y)[0], atol=1e-5)
    with warnings.catch_warnings():
        warnings.simplefilter("error", AnalogWarning)   # no limit may be left NaN
        ci = got.conf_int()
    q = stats.chi2.isf(0.05, 1)
    coarse, fine = _grid_profile_limit(X, y, 1, -1.0, q)
    assert ci[1, 0] == pytest.approx(coarse, abs=0.2)
    assert ci[1, 0] == pytest.approx(fine, abs=1e-4)
    assert np.all(np.isfinite(ci)) and np.all((ci[:, 0] < got.params) & (got.params < ci[:, 1]))


def test_ml_under_complete_separation_does_not_converge(complete_separation):
    X, y = complete_separation
    with pytest.warns(AnalogWarning, match="did not converge|numerically 0 or 1"):
        got = firth_logit(X, y, penalty="none")
    assert not got.converged


# ---------------------------------------------------------------------------------------
# (d) exact small cases

@pytest.mark.parametrize("k, n", [(0, 10), (3, 10), (10, 10), (7, 25)])
def test_intercept_only_is_jeffreys_posterior_mode(k, n):
    # Firth (1993): for one binomial proportion the modified score gives
    # logit((k + 1/2) / (n + 1)), the Jeffreys-prior (Beta(1/2, 1/2)) posterior mode
    y = np.r_[np.ones(k), np.zeros(n - k)]
    got = firth_logit(np.ones((n, 1)), y, tol=1e-13)
    assert got.params[0] == pytest.approx(special.logit((k + 0.5) / (n + 1)), abs=1e-10)
    assert np.all(np.isfinite(got.conf_int()))


def test_two_by_two_table_adds_one_half_to_each_cell():
    # Saturated two-group model: det I = n0 v0 * n1 v1, so the penalty separates by group and
    # each group's logit is logit((k + 1/2)/(n + 1)) as above; the log odds ratio is that of
    # the table with 1/2 added to every cell (Firth 1993; Heinze & Schemper 2002, sec. 2).
    k0, n0, k1, n1 = 7, 363, 0, 22    # zero cell: the ML odds ratio is infinite
    x = np.r_[np.zeros(n0), np.ones(n1)]
    y = np.r_[np.ones(k0), np.zeros(n0 - k0), np.ones(k1), np.zeros(n1 - k1)]
    got = firth_logit(np.column_stack([np.ones(x.size), x]), y, tol=1e-13)
    expected = np.log((k1 + 0.5) / (n1 - k1 + 0.5)) - np.log((k0 + 0.5) / (n0 - k0 + 0.5))
    assert got.params[1] == pytest.approx(expected, abs=1e-10)
    assert got.params[0] == pytest.approx(special.logit((k0 + 0.5) / (n0 + 1)), abs=1e-10)


# ---------------------------------------------------------------------------------------
# invariances and behaviour

def test_integer_weights_equal_repeated_rows():
    rng = np.random.default_rng(3)
    X = np.column_stack([np.ones(30), rng.normal(size=30), rng.integers(0, 2, 30)])
    y = rng.integers(0, 2, 30).astype(float)
    w = rng.integers(1, 4, 30)
    weighted = firth_logit(X, y, weights=w)
    repeated = firth_logit(np.repeat(X, w, axis=0), np.repeat(y, w))
    np.testing.assert_allclose(weighted.params, repeated.params, atol=1e-10)
    np.testing.assert_allclose(weighted.bse, repeated.bse, atol=1e-10)
    np.testing.assert_allclose(weighted.conf_int(), repeated.conf_int(), atol=1e-7)


def test_predict_and_result_type():
    X, y = _endometrial()
    got = firth_logit(X, y)
    assert isinstance(got, FirthResult) and got.penalty == "firth" and got.n_obs == 79
    np.testing.assert_allclose(got.predict(X), special.expit(X.to_numpy() @ got.params))
    assert got.predict(X.iloc[0].to_numpy()) == pytest.approx(
        special.expit(X.iloc[0].to_numpy() @ got.params))
    # penalized estimates shrink toward 0 relative to ML on the non-separated terms
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        ml = firth_logit(X, y, penalty="none")
    assert abs(got.params[3]) < abs(ml.params[3])


def test_wald_and_profile_agree_for_large_well_behaved_sample():
    # with n = 2000 the likelihood is close to quadratic: profile ~ Wald (common practice)
    rng = np.random.default_rng(5)
    n = 2000
    X = np.column_stack([np.ones(n), rng.normal(size=(n, 4))])
    y = (rng.random(n) < special.expit(X @ [-0.5, 0.4, -0.3, 0.2, 0.0])).astype(float)
    got = firth_logit(X, y)
    np.testing.assert_allclose(got.conf_int(), got.conf_int(method="wald"), atol=0.01)


@pytest.mark.parametrize("kwargs, message", [
    ({"penalty": "ridge"}, "`penalty` was 'ridge'"),
    ({"max_iter": 0}, "`max_iter` must be a positive integer"),
    ({"tol": 0}, "`tol` must be positive"),
    ({"weights": -np.ones(6)}, "`weights` must be finite and non-negative"),
    ({"weights": np.ones(5)}, "`weights` has 5 values"),
])
def test_bad_options_are_rejected(complete_separation, kwargs, message):
    X, y = complete_separation
    with pytest.raises(AnalogError, match=message):
        firth_logit(X, y, **kwargs)


def test_bad_data_are_rejected(complete_separation):
    X, y = complete_separation
    with pytest.raises(AnalogError, match="must be 2-D"):
        firth_logit(X[:, 1], y)
    with pytest.raises(AnalogError, match="only 0 and 1"):
        firth_logit(X, y * 2)
    with pytest.raises(AnalogError, match="`y` has 5 values"):
        firth_logit(X, y[:5])
    with pytest.raises(AnalogError, match="NaN or infinite"):
        firth_logit(np.where(X == 1.0, np.nan, X), y)
    with pytest.raises(AnalogError, match=r"rank deficient \(rank 2 < 3"):
        firth_logit(np.column_stack([X, 2 * X[:, 1]]), y)
    got = firth_logit(X, y)
    with pytest.raises(AnalogError, match="`method` was 'exact'"):
        got.conf_int(method="exact")
    with pytest.raises(AnalogError, match="`alpha` must be in"):
        got.conf_int(alpha=1.5)
    with pytest.raises(AnalogError, match="`names` has 1 entries"):
        got.summary_frame(["a"])


# ---------------------------------------------------------------------------------------
# warm start

def test_warm_start_reaches_the_brute_force_maximum_in_fewer_iterations():
    # reference: scipy BFGS on the explicit penalized log-likelihood (as above); the
    # endometrial data have a single maximum, so any reasonable start must end there
    X, y = _endometrial()
    cold = firth_logit(X, y)
    ref_beta, _ = _brute_force_firth(X.to_numpy(), y)
    warm = firth_logit(X, y, start=cold.params + np.array([0.3, -0.5, 0.02, 0.4]))
    assert warm.converged
    np.testing.assert_allclose(warm.params, ref_beta, atol=2e-5)
    np.testing.assert_allclose(warm.params, cold.params, atol=1e-7)
    np.testing.assert_allclose(warm.bse, cold.bse, rtol=1e-6)
    at_solution = firth_logit(X, y, start=cold.params)
    assert at_solution.n_iter <= 1 < cold.n_iter


def test_start_where_the_information_is_singular_falls_back_to_zeros():
    # |x'b| ~ 1e4 at this start: every fitted probability is 0 or 1 in double precision
    X, y = _endometrial()
    got = firth_logit(X, y, start=[0.0, 0.0, 500.0, 0.0])
    np.testing.assert_allclose(got.params, firth_logit(X, y).params, atol=1e-10)


def test_bad_start_is_rejected(complete_separation):
    X, y = complete_separation
    with pytest.raises(AnalogError, match="`start` has 3 values but `X` has 2 columns"):
        firth_logit(X, y, start=[0.0, 1.0, 0.0])
    with pytest.raises(AnalogError, match="`start` holds NaN"):
        firth_logit(X, y, start=[0.0, np.nan])
