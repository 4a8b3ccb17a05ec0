import numpy as np
import pytest
from scipy import stats

from analog.stats import first_passage_probability

# Closed form: Lande & Orzack (1988, PNAS 85:7418); Dennis, Munholland & Scott (1991,
# Ecol. Monogr. 61:115), their eq. for the probability of reaching the threshold by T.
CASES = [  # distance, drift, variance, horizon
    (1.5, -0.4, 0.8, 3.0),
    (0.3, -2.0, 0.5, 0.7),
    (2.0, -0.05, 0.2, 40.0),
    (4.0, -1.0, 3.0, 1.0),
]


def _invgauss_cdf(t, d, nu, var):
    """Passage time for drift nu > 0 towards the threshold, as scipy.stats.invgauss.

    The hitting time of level d by BM with drift nu and variance var is inverse
    Gaussian IG(mean m = d / nu, shape lam = d**2 / var) (Cox & Miller 1965, sec. 5.7;
    Chhikara & Folks 1989, ch. 1). scipy.stats.invgauss(mu_s, scale=s) is IG with mean
    mu_s * s and shape s, hence s = lam = d**2 / var and mu_s = m / lam = var / (d * nu).
    """
    return stats.invgauss.cdf(t, var / (d * nu), scale=d**2 / var)


@pytest.mark.parametrize("d, mu, var, t", CASES)
def test_drift_towards_matches_scipy_invgauss(d, mu, var, t):
    # reference library: scipy.stats.invgauss (mapping derived in _invgauss_cdf)
    got = first_passage_probability(d, mu, var, t)
    assert got == pytest.approx(_invgauss_cdf(t, d, -mu, var), rel=1e-10, abs=1e-14)


@pytest.mark.parametrize("d, mu, var, t", CASES)
def test_drift_away_is_defective_invgauss(d, mu, var, t):
    # drift away: P(pass by T) = exp(-2 mu d / var) * IG cdf with drift |mu|
    # (Cox & Miller 1965, sec. 5.7: eventual passage has probability exp(-2 mu d / var));
    # reference library: scipy.stats.invgauss
    nu = -mu  # positive drift away from the threshold
    got = first_passage_probability(d, nu, var, t)
    want = np.exp(-2 * nu * d / var) * _invgauss_cdf(t, d, nu, var)
    assert got == pytest.approx(want, rel=1e-10, abs=1e-14)


def test_zero_drift_is_levy_law():
    # mu = 0: passage time is Levy with scale d**2/var; reference: scipy.stats.levy
    d = np.array([0.5, 1.0, 3.0])
    var, t = 0.7, np.array([[0.2], [5.0]])
    want = stats.levy.cdf(t, scale=d**2 / var)
    got = first_passage_probability(d, 0.0, var, t)
    assert got.shape == (2, 3)
    np.testing.assert_allclose(got, want, rtol=1e-12)
    # and it equals the reflection principle 2 Phi(-d / (sigma sqrt T)) exactly
    np.testing.assert_allclose(got, 2 * stats.norm.cdf(-d / np.sqrt(var * t)), rtol=1e-12)


def test_small_drift_is_continuous_at_zero():
    near = first_passage_probability(1.0, np.array([-1e-9, 1e-9]), 1.0, 2.0)
    np.testing.assert_allclose(near, first_passage_probability(1.0, 0.0, 1.0, 2.0), atol=1e-8)


def test_special_cases_exact():
    d = np.array([0.0, -1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, 1.0, np.inf])
    mu = np.array([1.0, 1.0, -5.0, -1.0, -1.0, 1.0, -1.0, 0.0, 0.5, -np.inf, -1.0])
    var = np.array([1.0, 1.0, 1.0, 0.0, 0.0, 0.0, 2.0, 2.0, 2.0, 1.0, 1.0])
    t = np.array([1.0, 1.0, 0.0, 1.0, 0.5, 10.0, np.inf, np.inf, np.inf, 1.0, 1.0])
    want = [1, 1, 0, 1, 0, 0, 1, 1, np.exp(-2 * 0.5 * 1 / 2), 1, 0]
    np.testing.assert_array_equal(first_passage_probability(d, mu, var, t), want)


def test_large_drift_no_overflow():
    # exp(-2 mu d / var) alone would be exp(+-1e6): must not overflow or give NaN
    mu = np.array([-5e5, -50.0, 50.0, 5e5])
    got = first_passage_probability(1.0, mu, 1e-6, 1.0)
    assert np.all(np.isfinite(got))
    np.testing.assert_array_equal(got, [1.0, 1.0, 0.0, 0.0])
    # moderate case where both terms matter, against scipy.stats.invgauss
    got = first_passage_probability(2.0, -30.0, 4.0, 0.1)
    assert got == pytest.approx(_invgauss_cdf(0.1, 2.0, 30.0, 4.0), rel=1e-9)


def test_missing_and_invalid_give_nan():
    got = first_passage_probability([np.nan, 1, 1, 1], [0, np.nan, 0, 0], [1, 1, -1, 1],
                                    [1, 1, 1, -2])
    assert np.all(np.isnan(got))
    assert isinstance(first_passage_probability(1.0, -0.1, 1.0, 1.0), float)


def test_monotone_in_horizon_and_distance():
    t = np.linspace(0.0, 50.0, 201)
    p = first_passage_probability(1.0, 0.2, 1.0, t)
    assert np.all(np.diff(p) >= -1e-15)
    assert p[-1] <= np.exp(-2 * 0.2 * 1.0) + 1e-12
    p = first_passage_probability(np.linspace(0.01, 5, 50), -0.2, 1.0, 4.0)
    assert np.all(np.diff(p) < 0)


def _simulate(d, mu, var, t, n_paths, n_steps, rng, bridge):
    """Monte Carlo of the walk on a grid of n_steps exact Gaussian increments.

    bridge=False: passage is seen only at grid points, so crossings between them are
    missed and the estimate is biased low by O(sqrt(dt)) (Broadie, Glasserman & Kou 1997,
    Math. Finance 7:325: the discrete barrier acts like a continuous one shifted by
    0.5826 sigma sqrt(dt)). bridge=True: between grid points x0, x1 > 0 the path is a
    Brownian bridge, which dips below 0 with probability exp(-2 x0 x1 / (var dt))
    (e.g. Glasserman 2004, Monte Carlo Methods in Financial Engineering, sec. 6.4),
    so the survival product is an unbiased estimate at any step size.
    """
    dt = t / n_steps
    x = np.full(n_paths, float(d))
    alive = np.ones(n_paths)
    for _ in range(n_steps):
        x_new = x + mu * dt + np.sqrt(var * dt) * rng.standard_normal(n_paths)
        if bridge:
            both = (x > 0) & (x_new > 0)
            p_dip = np.where(both, np.exp(-2 * np.clip(x, 0, None) * np.clip(x_new, 0, None)
                                          / (var * dt)), 1.0)
            alive *= 1 - p_dip
        else:
            alive *= x_new > 0
        x = x_new
    return 1 - alive


@pytest.mark.parametrize("d, mu, var, t", [(1.0, -0.3, 1.0, 2.0), (1.0, 0.5, 0.6, 3.0)])
def test_monte_carlo_of_discretized_walk(d, mu, var, t):
    rng = np.random.default_rng(20240611)
    exact = first_passage_probability(d, mu, var, t)
    n_paths, n_steps = 20_000, 1000
    hit = _simulate(d, mu, var, t, n_paths, n_steps, rng, bridge=False)
    se = np.sqrt(exact * (1 - exact) / n_paths)
    dt = t / n_steps
    # grid-only monitoring misses crossings between points: the estimate must lie
    # below the continuous value, close to the value for the barrier moved down by
    # 0.5826 sigma sqrt(dt) (Broadie, Glasserman & Kou 1997). Tolerance 4 SE + 0.005
    # since the shift is only first-order accurate.
    shifted = first_passage_probability(d + 0.5826 * np.sqrt(var * dt), mu, var, t)
    assert hit.mean() < exact
    assert abs(hit.mean() - shifted) < 4 * se + 0.005
    # the bridge-corrected walk is unbiased even on a coarse grid: 4 SE
    hit = _simulate(d, mu, var, t, n_paths, 25, rng, bridge=True)
    assert abs(hit.mean() - exact) < 4 * hit.std() / np.sqrt(n_paths)
