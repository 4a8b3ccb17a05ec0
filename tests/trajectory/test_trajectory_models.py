"""Model fits on logit-occupancy series: checked against scipy / statsmodels and by simulation."""
import numpy as np
import pandas as pd
import pytest
import statsmodels.api as sm
from scipy import optimize, stats as sps

from analog.trajectory.models import MODEL_K, SeriesBatch, fit_model, fit_models, reading_label, simulate


def _batch(y, t=None, age0=300.0):
    y = np.atleast_2d(np.asarray(y, dtype=float))
    t = np.broadcast_to(np.arange(y.shape[1]) * 10.0 if t is None else np.asarray(t, float), y.shape).copy()
    n = np.isfinite(y).sum(1)
    return SeriesBatch(np.array([f"s{i}" for i in range(len(y))], dtype=object), t, y, n,
                       np.full(len(y), age0))


RNG = np.random.default_rng(20)
Y = -1.5 + 0.6 * RNG.standard_normal(12)


def test_stasis_matches_the_normal_likelihood():
    f = fit_model("stasis", _batch(Y))
    rest = Y[1:]          # conditioned on the first observation
    mu, sd = rest.mean(), rest.std()          # ML estimates (ddof=0)
    assert f.params["mean_logit"][0] == pytest.approx(mu)
    assert f.params["sd"][0] == pytest.approx(sd)
    # reference: scipy.stats.norm.logpdf
    assert f.loglik[0] == pytest.approx(sps.norm.logpdf(rest, mu, sd).sum())
    assert f.n_eff[0] == len(Y) - 1


def test_walks_match_the_normal_likelihood_of_increments_with_a_gap():
    t = np.array([0, 10, 20, 40, 50, 60, 70, 80.0])      # one missing bin: a 20-Myr step
    y = np.array([-1.0, -1.3, -1.1, -2.0, -2.2, -2.1, -2.8, -3.0])
    dy, dt = np.diff(y), np.diff(t)
    walk = fit_model("random_walk", _batch(y, t))
    s2 = np.mean(dy ** 2 / dt)
    assert walk.params["step_sd"][0] == pytest.approx(np.sqrt(s2))
    assert walk.loglik[0] == pytest.approx(sps.norm.logpdf(dy, 0, np.sqrt(s2 * dt)).sum())
    drift = fit_model("random_walk_drift", _batch(y, t))
    mu = dy.sum() / dt.sum()              # weighted least squares = ML drift
    s2 = np.mean((dy - mu * dt) ** 2 / dt)
    assert drift.params["drift_per_myr"][0] == pytest.approx(mu)
    assert drift.loglik[0] == pytest.approx(sps.norm.logpdf(dy, mu * dt, np.sqrt(s2 * dt)).sum())
    # reference: the drift MLE maximizes the likelihood (scipy.optimize on the same function)
    nll = lambda p: -sps.norm.logpdf(dy, p[0] * dt, np.sqrt(np.exp(p[1]) * dt)).sum()
    best = optimize.minimize(nll, [0.0, 0.0], method="Nelder-Mead", options={"xatol": 1e-9, "fatol": 1e-12})
    assert drift.loglik[0] == pytest.approx(-best.fun, abs=1e-6)


def test_symmetric_curve_matches_ols():
    t = np.arange(15) * 10.0
    y = -0.5 - 0.002 * (t - 70) ** 2 + 0.3 * RNG.standard_normal(15)
    f = fit_model("rise_fall", _batch(y, t))
    X = np.column_stack([np.ones(14), t[1:], t[1:] ** 2])
    ols = sm.OLS(y[1:], X).fit()          # reference: statsmodels OLS log-likelihood (sigma^2 = RSS / n)
    assert f.loglik[0] == pytest.approx(ols.llf)
    b0, b1, b2 = ols.params
    assert 300.0 - f.params["peak_age_ma"][0] == pytest.approx(-b1 / (2 * b2))
    assert f.params["peak_logit"][0] == pytest.approx(b0 - b1 ** 2 / (4 * b2))


def test_symmetric_curve_falls_back_to_a_line_for_a_valley():
    t = np.arange(12) * 10.0
    y = -2 + 0.001 * (t - 55) ** 2 + 0.05 * RNG.standard_normal(12)   # U-shaped: no peak allowed
    f = fit_model("rise_fall", _batch(y, t))
    line = sm.OLS(y[1:], sm.add_constant(t[1:])).fit()
    assert f.loglik[0] == pytest.approx(line.llf)
    assert np.isnan(f.params["peak_age_ma"][0])
    assert f.params["slope_per_myr"][0] == pytest.approx(line.params[1])


def _brute_asym(t, y, min_side=3):
    """Least RSS over a fine grid of peak times, bounded least squares at each (scipy.optimize.lsq_linear)."""
    best = np.inf
    for c in np.linspace(t[0], t[-1], 301):
        left, right = t < c, t >= c
        X = np.column_stack([np.ones_like(t), -((t - c) ** 2) * left, -((t - c) ** 2) * right])
        upper = [np.inf, np.inf if left.sum() >= min_side else 1e-12, np.inf if right.sum() >= min_side else 1e-12]
        res = optimize.lsq_linear(X, y, bounds=([-np.inf, 0, 0], upper))
        best = min(best, float(np.sum((X @ res.x - y) ** 2)))
    return best


def test_asymmetric_curve_reaches_the_brute_force_optimum():
    t = np.arange(16) * 10.0
    y = -0.8 - np.where(t < 110, 0.0003, 0.004) * (t - 110) ** 2 + 0.25 * RNG.standard_normal(16)
    f = fit_model("rise_fall_asymmetric", _batch(y, t))
    rss = (f.params["sd"][0] ** 2) * 15
    assert rss <= _brute_asym(t[1:], y[1:]) * (1 + 1e-6) + 1e-9
    assert 300.0 - f.params["peak_age_ma"][0] == pytest.approx(110, abs=15)
    assert f.params["fall_width_myr"][0] < f.params["rise_width_myr"][0]


def test_aicc_follows_hurvich_and_tsai():
    fits = fit_models(_batch(Y))
    n = len(Y) - 1
    for name, f in fits.fits.items():
        k = MODEL_K[name]
        # Hurvich & Tsai (1989): AICc = -2 logL + 2k + 2k(k+1)/(n-k-1)
        assert f.aicc[0] == pytest.approx(-2 * f.loglik[0] + 2 * k + 2 * k * (k + 1) / (n - k - 1))
        assert f.n_eff[0] == n
    assert fits.weights.sum() == pytest.approx(1.0)


def test_short_series_get_no_fit():
    fits = fit_models(_batch([[-1, -1.2, -0.9, -1.1, np.nan, np.nan, np.nan, np.nan],
                              list(-1 + 0.1 * np.arange(8))]), min_series_bins=5)
    assert np.all(np.isnan([f.aicc[0] for f in fits.fits.values()]))
    assert fits.weights[0].sum() == 0 and fits.preferred[0] == ""
    # 8 points: every model has an AICc (the asymmetric curve needs n - 1 > 6)
    assert np.all(np.isfinite([f.aicc[1] for f in fits.fits.values()]))
    assert reading_label(fits)[0] == "too short to model"


def _simulated(name, n_series, length, seed):
    rng = np.random.default_rng(seed)
    t = np.tile(np.arange(length) * 10.0, (n_series, 1))
    z = rng.standard_normal((n_series, length))
    if name == "stasis":
        y = -2 + 0.4 * z
    elif name == "random_walk":
        y = -2 + np.cumsum(0.45 * z, axis=1)
    elif name == "random_walk_drift":
        y = -1 + np.cumsum(-0.3 + 0.25 * z, axis=1)
    elif name == "rise_fall":
        y = -0.5 - 0.0008 * (t - 95) ** 2 + 0.35 * z
    else:
        y = -0.5 - np.where(t < 60, 0.0015, 0.00015) * (t - 60) ** 2 + 0.3 * z
    return _batch(y, t)


@pytest.mark.parametrize("name", ["stasis", "random_walk", "random_walk_drift", "rise_fall",
                                  "rise_fall_asymmetric"])
def test_aicc_prefers_the_generating_model_most_of_the_time(name):
    fits = fit_models(_simulated(name, 400, 20, seed=7))
    share = np.mean(fits.preferred == name)
    assert share > 0.5, f"{name} preferred in only {share:.0%} of its own series"


def test_parameters_are_recovered():
    walk = fit_models(_simulated("random_walk_drift", 400, 20, seed=8)).fits["random_walk_drift"]
    # planted drift -0.3 per 10-Myr bin = -0.03 per Myr; sd of the mean estimate 0.025/sqrt(19)/sqrt(400)
    assert np.mean(walk.params["drift_per_myr"]) == pytest.approx(-0.03, abs=0.002)
    assert np.median(walk.params["step_sd"]) == pytest.approx(0.25 / np.sqrt(10), rel=0.1)
    hat = fit_models(_simulated("rise_fall", 400, 20, seed=9)).fits["rise_fall"]
    assert np.median(300 - hat.params["peak_age_ma"]) == pytest.approx(95, abs=3)
    assert np.median(hat.params["rise_width_myr"]) == pytest.approx(1 / np.sqrt(2 * 0.0008), rel=0.1)


def test_simulation_keeps_the_first_value_and_the_padding():
    b = _batch([[-1, -1.5, -1.2, -2.0, -2.2, -2.4, np.nan], [-1, -1.1, -0.9, -1.0, -1.2, -1.1, -1.3]])
    fits = fit_models(b)
    for name in fits.models:
        ok = np.isfinite(fits.fits[name].aicc)       # the 6-point series is too short for the curves
        y = simulate(name, fits.fits[name], b, np.random.default_rng(0))
        assert np.array_equal(y[ok, 0], b.y[ok, 0])
        assert np.array_equal(np.isnan(y[ok]), np.isnan(b.y[ok]))
        assert np.all(np.isnan(y[~ok, 1:]))


def test_from_table_packs_series_and_skips_empty_bins():
    table = pd.DataFrame({"taxon_id": ["a", "a", "a", "b", "b"], "bin_mid_ma": [25.0, 15.0, 5.0, 15.0, 5.0],
                          "empirical_logit": [-1.0, np.nan, -2.0, -0.5, -0.7]})
    b = SeriesBatch.from_table(table)
    assert list(b.key) == ["a", "b"] and list(b.n) == [2, 2]
    assert b.t[0, 1] == 20.0 and b.y[0, 1] == -2.0     # the gap widens the time step
    assert b.age0[0] == 25.0


def test_unknown_model_is_rejected():
    from analog.errors import AnalogError

    with pytest.raises(AnalogError, match="`name` was 'logistic'"):
        fit_model("logistic", _batch(Y))
