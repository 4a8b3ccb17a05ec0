"""Extinction probabilities per model, the model average and the parametric bootstrap."""
import numpy as np
import pytest
from scipy import stats as sps

from analog.trajectory.extinction import averaged_probability, bootstrap_probabilities, model_probabilities
from analog.trajectory.models import SeriesBatch, curve_value, fit_models

THR = float(np.log(0.02 / 0.98))
NOISE = np.array([0.0, 0.3, -0.2, 0.1, -0.4, 0.25, 0.05, -0.15, 0.2, -0.1, 0.3, -0.25])


def _batch(rows, step=10.0):
    y = np.asarray(rows, dtype=float)
    t = np.tile(np.arange(y.shape[1]) * step, (len(y), 1))
    return SeriesBatch(np.array([f"s{i}" for i in range(len(y))], dtype=object), t, y,
                       np.full(len(y), y.shape[1]), np.full(len(y), 200.0))


def test_random_walk_matches_the_inverse_gaussian():
    b = _batch([-1.0 + np.cumsum(-0.15 + 0.3 * NOISE)])
    fits = fit_models(b)
    j = fits.models.index("random_walk_drift")
    mu = fits.fits["random_walk_drift"].params["drift_per_myr"][0]
    sd = fits.fits["random_walk_drift"].params["step_sd"][0]
    d = b.y[0, -1] - THR
    assert mu < 0 and d > 0
    for h in (1, 3):
        p = model_probabilities(fits, threshold=THR, horizon_bins=h, step_myr=10.0)[0, j]
        # reference: first passage time of drift mu < 0 from d is inverse Gaussian with mean d/|mu| and
        # shape d^2/sigma^2 (Cox & Miller 1965); scipy.stats.invgauss(mu=mean/shape, scale=shape)
        mean, shape = d / abs(mu), d ** 2 / sd ** 2
        assert p == pytest.approx(sps.invgauss(mean / shape, scale=shape).cdf(10.0 * h), rel=1e-6)


def test_probability_falls_as_drift_rises():
    drifts = np.linspace(-0.6, 0.6, 9)
    b = _batch([-1.0 + np.cumsum(m + 0.3 * NOISE) for m in drifts])
    fits = fit_models(b, models=("random_walk_drift",))
    fitted = fits.fits["random_walk_drift"].params["drift_per_myr"]
    assert np.all(np.diff(fitted) > 0)
    p = model_probabilities(fits, threshold=THR, horizon_bins=2, step_myr=10.0,
                            current=np.full(len(drifts), -2.5))[:, 0]   # same starting distance for all
    assert np.all(np.diff(p) < 0)
    assert np.all((p >= 0) & (p <= 1))


def test_stasis_is_the_chance_of_a_draw_below_the_threshold():
    b = _batch([-2.8 + 0.6 * NOISE])
    fits = fit_models(b, models=("stasis",))
    m = fits.fits["stasis"].params["mean_logit"][0]
    s = fits.fits["stasis"].params["sd"][0]
    one = sps.norm.cdf(THR, m, s)         # reference: scipy.stats.norm
    for h in (1, 4):
        p = model_probabilities(fits, threshold=THR, horizon_bins=h, step_myr=10.0)[0, 0]
        assert p == pytest.approx(1 - (1 - one) ** h)


def test_rise_and_fall_projects_the_curve():
    t = np.arange(12) * 10.0
    b = _batch([-0.5 - 0.0009 * (t - 40) ** 2 + 0.2 * NOISE])
    fits = fit_models(b, models=("rise_fall",))
    par = fits.fits["rise_fall"].params
    ahead = curve_value(par, np.array([[t[-1] + 10.0]]))[0, 0]
    p = model_probabilities(fits, threshold=THR, horizon_bins=1, step_myr=10.0)[0, 0]
    assert p == pytest.approx(sps.norm.cdf(THR, ahead, par["sd"][0]))
    assert p > 0.5   # well past its peak and falling fast


def test_model_average_uses_the_akaike_weights():
    b = _batch([-1.0 + np.cumsum(-0.2 + 0.3 * NOISE), -2.0 + 0.4 * NOISE])
    fits = fit_models(b)
    probs = model_probabilities(fits, threshold=THR, horizon_bins=1, step_myr=10.0)
    avg = averaged_probability(probs, fits.weights)
    assert avg == pytest.approx((probs * fits.weights).sum(axis=1))


def test_bootstrap_is_reproducible_and_bounded():
    b = _batch([-1.0 + np.cumsum(-0.2 + 0.3 * NOISE), -2.0 + 0.4 * NOISE,
                np.r_[-1.0, -1.2, -1.1, np.full(9, np.nan)]])
    b.n = np.array([12, 12, 3])
    fits = fit_models(b)
    kw = dict(threshold=THR, horizon_bins=1, step_myr=10.0, n_boot=60)
    d1 = bootstrap_probabilities(fits, rng=np.random.default_rng(5), **kw)
    d2 = bootstrap_probabilities(fits, rng=np.random.default_rng(5), **kw)
    assert d1.shape == (3, 60)
    np.testing.assert_array_equal(d1, d2)
    assert np.all((d1[:2] >= 0) & (d1[:2] <= 1))
    assert np.all(np.isnan(d1[2]))          # too short: no draws, never invented
    point = averaged_probability(model_probabilities(fits, **{k: kw[k] for k in kw if k != "n_boot"}),
                                 fits.weights)
    assert np.nanquantile(d1[0], 0.025) <= point[0] <= np.nanquantile(d1[0], 0.975)
    assert np.median(d1[0]) > np.median(d1[1])   # the declining walk is riskier than the flat series
