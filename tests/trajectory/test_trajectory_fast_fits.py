"""The fast model fits give the numbers of plain computations of the same likelihoods.

Three kinds of reference:

- a plainly written peak search (Python loops over series, candidate peak times and
  observations) of the asymmetric rise-and-fall least squares, run with the same grid
  and golden-section steps;
- scipy as an outside reference library: ``scipy.optimize.minimize_scalar`` over the
  peak time, each inner least-squares problem solved with ``scipy.optimize.lsq_linear``
  under the same curvature bounds;
- the whole-row numpy formulation the fast code replaced (``ndarray.sum`` along padded
  rows, ``np.einsum`` for the normal equations), which the fast code must match bit
  for bit, since the tool promises identical tables for the same inputs.
"""
import math

import numpy as np
import pytest
from scipy import optimize

from analog.trajectory import models as M
from analog.trajectory.models import SeriesBatch, fit_model, fit_models


def _batch(y, t):
    y = np.asarray(y, float)
    t = np.asarray(t, float)
    n = np.isfinite(y).sum(1)
    return SeriesBatch(np.array([f"s{i}" for i in range(len(y))], dtype=object), t, y, n, np.full(len(y), 400.0))


def _random_batch(n_series, width, seed, *, min_len=3):
    """Invented logit series: peaked, flat, rising and noisy, with NaN padding and uneven steps."""
    rng = np.random.default_rng(seed)
    n = rng.integers(min_len, width + 1, n_series)
    n[0] = width
    steps = rng.choice([10.0, 10.0, 10.0, 20.0, 30.0], (n_series, width))
    t = np.cumsum(steps, axis=1) - steps[:, :1]
    kind = rng.integers(0, 4, n_series)
    peak = rng.uniform(0, 1, n_series) * t[np.arange(n_series), n - 1]
    curv = np.where(t < peak[:, None], rng.uniform(1e-5, 3e-3, (n_series, 1)), rng.uniform(1e-5, 3e-3, (n_series, 1)))
    y = -1.0 - curv * (t - peak[:, None]) ** 2
    y = np.where((kind == 1)[:, None], -2.0, y)                               # flat
    y = np.where((kind == 2)[:, None], -3.0 + 0.01 * t, y)                    # steady rise
    y = y + rng.uniform(0.0, 0.6, (n_series, 1)) * rng.standard_normal((n_series, width))
    y[kind == 1] = np.round(y[kind == 1], 1)                                   # ties in some series
    pad = np.arange(width)[None, :] >= n[:, None]
    return _batch(np.where(pad, np.nan, y), np.where(pad, np.nan, t))


# ---------------------------------------------------------------- plain reference of the asymmetric fit

def _plain_fit_at(t, y, c):
    """Least squares of ``a − bl (t − c)² [t < c] − br (t − c)² [t >= c]`` with bl, br >= 0, written out.

    Tries both sides bent, rise only, fall only and flat, in that order, keeping the
    first feasible solution of least RSS; a side with fewer than 3 points stays flat.
    """
    n = len(t)
    sl = ql = yl = sr = qr = yr = 0.0
    n_left = 0
    for ti, yi in zip(t, y):
        d = (ti - c) ** 2
        if ti < c:
            n_left += 1
            sl, ql, yl = sl + d, ql + d * d, yl + d * yi
        else:
            sr, qr, yr = sr + d, qr + d * d, yr + d * yi
    ysum, yy = sum(y), sum(v * v for v in y)
    gl = 1.0 / ql if ql > 0 and n_left >= 3 else 0.0
    gr = 1.0 / qr if qr > 0 and n - n_left >= 3 else 0.0
    best = (math.inf, ysum / n, 0.0, 0.0)
    for fl, fr in ((gl, gr), (gl, 0.0), (0.0, gr), (0.0, 0.0)):
        den = n - sl * sl * fl - sr * sr * fr
        if fl == 0.0 and fr == 0.0:
            a = ysum / n
        elif den > 1e-12:
            a = (ysum - sl * yl * fl - sr * yr * fr) / den
        else:
            continue
        bl, br = (sl * a - yl) * fl, (sr * a - yr) * fr
        rss = yy - a * ysum + bl * yl + br * yr
        if bl >= 0 and br >= 0 and math.isfinite(rss) and rss < best[0] - 1e-12:
            best = (rss, a, bl, br)
    return (max(best[0], 0.0),) + best[1:]


def _plain_search(t, y):
    """The peak search of the fitted model, one series and one candidate at a time."""
    lo, hi = t[0], t[-1]
    grid = [lo + (hi - lo) * g / (M._PEAK_GRID - 1) for g in range(M._PEAK_GRID)]
    values = [_plain_fit_at(t, y, c)[0] for c in grid]
    g = int(np.argmin(values))
    c_grid, r_grid = grid[g], values[g]
    step = (hi - lo) / (M._PEAK_GRID - 1)
    a, b = max(c_grid - step, lo), min(c_grid + step, hi)
    x1, x2 = b - M._GOLD * (b - a), a + M._GOLD * (b - a)
    f1, f2 = _plain_fit_at(t, y, x1)[0], _plain_fit_at(t, y, x2)[0]
    for _ in range(M._PEAK_STEPS):
        if f1 < f2:
            b, x2, f2 = x2, x1, f1
            x1 = b - M._GOLD * (b - a)
            f1 = _plain_fit_at(t, y, x1)[0]
        else:
            a, x1, f1 = x1, x2, f2
            x2 = a + M._GOLD * (b - a)
            f2 = _plain_fit_at(t, y, x2)[0]
    c_search, r_search = (x1, f1) if f1 < f2 else (x2, f2)
    c = c_search if r_search < r_grid else c_grid
    return (c,) + _plain_fit_at(t, y, c)


def test_asymmetric_fit_equals_a_plainly_written_peak_search():
    batch = _random_batch(60, 14, seed=3, min_len=8)
    f = fit_model("rise_fall_asymmetric", batch)
    for i in range(len(batch)):
        n = batch.n[i]
        t, y = batch.t[i, 1:n], batch.y[i, 1:n]       # conditioned on the first observation
        c, rss, a, bl, br = _plain_search(list(t), list(y))
        ll = -0.5 * (len(t) * np.log(2 * np.pi * max(rss / len(t), 1e-6)) + rss / max(rss / len(t), 1e-6))
        # the loops add in another order than numpy, so equality is up to rounding
        assert f.loglik[i] == pytest.approx(ll, rel=1e-9, abs=1e-9)
        assert batch.age0[i] - f.params["peak_age_ma"][i] == pytest.approx(c, rel=1e-9, abs=1e-7)
        assert f.params["peak_logit"][i] == pytest.approx(a, rel=1e-7, abs=1e-9)
        assert f.params["_curv_rise"][i] == pytest.approx(bl, rel=1e-6, abs=1e-12)
        assert f.params["_curv_fall"][i] == pytest.approx(br, rel=1e-6, abs=1e-12)


def _scipy_profile_rss(t, y, c):
    """Least RSS at peak time c by scipy.optimize.lsq_linear under the curvature bounds."""
    left, right = t < c, t >= c
    X = np.column_stack([np.ones_like(t), -((t - c) ** 2) * left, -((t - c) ** 2) * right])
    upper = [np.inf, np.inf if left.sum() >= 3 else 1e-12, np.inf if right.sum() >= 3 else 1e-12]
    res = optimize.lsq_linear(X, y, bounds=([-np.inf, 0, 0], upper))
    return float(np.sum((X @ res.x - y) ** 2))


def test_asymmetric_fit_is_at_least_as_good_as_scipy_minimize_scalar():
    batch = _random_batch(12, 16, seed=11, min_len=10)
    f = fit_model("rise_fall_asymmetric", batch)
    for i in range(len(batch)):
        n = batch.n[i]
        t, y = batch.t[i, 1:n], batch.y[i, 1:n]
        ours = (f.params["sd"][i] ** 2) * len(t)
        # reference: scipy.optimize.minimize_scalar (bounded) started from the best of a 61-point grid
        grid = np.linspace(t[0], t[-1], 61)
        g = int(np.argmin([_scipy_profile_rss(t, y, c) for c in grid]))
        lo, hi = grid[max(g - 1, 0)], grid[min(g + 1, 60)]
        res = optimize.minimize_scalar(lambda c: _scipy_profile_rss(t, y, c), bounds=(lo, hi), method="bounded",
                                       options={"xatol": 1e-8})
        # the golden-section steps stop in a bracket about 1e-3 grid steps wide, so at a kink of the
        # profile (a peak at an observation time) the search can lose a little there
        assert ours <= min(res.fun, _scipy_profile_rss(t, y, grid[g])) * (1 + 1e-4) + 1e-9
        assert ours >= min(res.fun, _scipy_profile_rss(t, y, grid[g])) * (1 - 1e-4) - 1e-9


# ---------------------------------------------------------------- bit-identity with the whole-row formulation

def _rowwise_asym_eval(t, y, m, n_obs, yy, c):
    d2 = (t - c[:, None]) ** 2 * m
    is_left = t < c[:, None]
    n_left = (m * is_left).sum(1)
    dl = d2 * is_left
    sl, ql, yl = dl.sum(1), (dl * dl).sum(1), (dl * y).sum(1)
    sr, qr, yr = d2.sum(1) - sl, (d2 * d2).sum(1) - ql, (d2 * y).sum(1) - yl
    ysum = y.sum(1)
    best = (np.full(len(c), np.inf), ysum / n_obs, np.zeros(len(c)), np.zeros(len(c)))
    with np.errstate(divide="ignore", invalid="ignore"):
        gl = np.where((ql > 0) & (n_left >= 3), 1.0 / ql, 0.0)
        gr = np.where((qr > 0) & (n_obs - n_left >= 3), 1.0 / qr, 0.0)
        for use_l, use_r in ((True, True), (True, False), (False, True), (False, False)):
            fl, fr = (gl if use_l else 0.0), (gr if use_r else 0.0)
            den = n_obs - sl * sl * fl - sr * sr * fr
            a0 = (ysum - sl * yl * fl - sr * yr * fr) / np.where(den > 1e-12, den, np.nan)
            if not (use_l or use_r):
                a0 = ysum / n_obs
            bl = (sl * a0 - yl) * fl
            br = (sr * a0 - yr) * fr
            rss = yy - a0 * ysum + bl * yl + br * yr
            take = (bl >= 0) & (br >= 0) & np.isfinite(rss) & (rss < best[0] - 1e-12)
            best = tuple(np.where(take, new, old) for new, old in zip((rss, a0, bl, br), best))
    return (np.maximum(best[0], 0.0),) + best[1:]


def _rowwise_asym_fit(batch):
    """The asymmetric fit on whole padded rows, one candidate peak time per pass."""
    m = batch.mask.copy()
    m[:, 0] = False
    ne = (batch.n - 1).astype(float)
    t = np.where(m, batch.t, 0.0)
    y = np.where(m, batch.y, 0.0)
    yy = (y ** 2).sum(1)
    m = m.astype(float)
    n_obs = np.maximum(ne, 1.0)
    lo = np.nan_to_num(batch.t[:, 1])
    hi = np.nan_to_num(batch.last(batch.t))
    rows = np.arange(len(batch))

    def f(c):
        return _rowwise_asym_eval(t, y, m, n_obs, yy, c)[0]

    grid = lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, M._PEAK_GRID)[None, :]
    rss_grid = np.column_stack([f(grid[:, g]) for g in range(M._PEAK_GRID)])
    g_best = np.argmin(rss_grid, axis=1)
    c_grid, r_grid = grid[rows, g_best], rss_grid[rows, g_best]
    step = (hi - lo) / (M._PEAK_GRID - 1)
    a, b = np.maximum(c_grid - step, lo), np.minimum(c_grid + step, hi)
    x1, x2 = b - M._GOLD * (b - a), a + M._GOLD * (b - a)
    f1, f2 = f(x1), f(x2)
    for _ in range(M._PEAK_STEPS):
        left = f1 < f2
        a, b = np.where(left, a, x1), np.where(left, x2, b)
        x1, x2 = np.where(left, b - M._GOLD * (b - a), x2), np.where(left, x1, a + M._GOLD * (b - a))
        fx = f(np.where(left, x1, x2))
        f1, f2 = np.where(left, fx, f2), np.where(left, f1, fx)
    c_search, r_search = np.where(f1 < f2, x1, x2), np.minimum(f1, f2)
    c = np.where(r_search < r_grid, c_search, c_grid)
    rss, a0, bl, br = _rowwise_asym_eval(t, y, m, n_obs, yy, c)
    return c, rss, a0, bl, br


@pytest.mark.parametrize("width,seed", [(4, 0), (7, 1), (8, 2), (9, 3), (16, 4), (23, 5), (40, 6), (150, 7)])
def test_asymmetric_fit_is_bit_identical_to_the_whole_row_formulation(width, seed):
    batch = _random_batch(300, width, seed=seed, min_len=min(width, 2))
    ll, p = M._fit_rise_fall_asym(batch)
    c, rss, a0, bl, br = _rowwise_asym_fit(batch)
    ne = (batch.n - 1).astype(float)
    ll_ref, _ = M._gauss_loglik(rss, ne)
    for got, want in ((ll, ll_ref), (p["_peak_t"], c), (p["peak_logit"], a0), (p["_curv_rise"], bl),
                      (p["_curv_fall"], br)):
        assert np.array_equal(got, want, equal_nan=True)


def test_pairwise_sum_reproduces_numpy_row_sums():
    assert M._pairwise_matches_numpy()
    rng = np.random.default_rng(4)
    for width in (1, 5, 7, 8, 15, 16, 17, 64, 128, 129, 200, 513):
        rows = rng.standard_normal((50, width)) * 10.0 ** rng.integers(-10, 11, (50, width))
        rows[::7] = 0.0
        assert np.array_equal(M._pairwise_sum(np.ascontiguousarray(rows.T)), rows.sum(axis=1))


def test_fallback_paths_give_the_same_numbers(monkeypatch):
    batch = _random_batch(200, 19, seed=9)
    fast = fit_models(batch, min_series_bins=3)
    monkeypatch.setattr(M, "_PAIRWISE_OK", [False])
    monkeypatch.setattr(M, "_EINSUM_OK", [False])
    slow = fit_models(batch, min_series_bins=3)
    for name in fast.models:
        assert np.array_equal(fast.fits[name].loglik, slow.fits[name].loglik, equal_nan=True)
        for k, v in fast.fits[name].params.items():
            assert np.array_equal(v, slow.fits[name].params[k], equal_nan=True)


def test_quadratic_normal_equations_equal_einsum():
    batch = _random_batch(500, 21, seed=5)
    m = batch.mask.copy()
    m[:, 0] = False
    s = np.where(m, batch.t / 100.0, 0.0)
    y = np.where(m, batch.y, 0.0)
    A, r, yy = M._quadratic_normal_eq(s, y, m)
    X = np.stack([m.astype(float), s, s ** 2], axis=-1)
    assert np.array_equal(A, np.einsum("nli,nlj->nij", X, X))
    assert np.array_equal(r, np.einsum("nli,nl->ni", X, y))
    assert np.array_equal(yy, (y ** 2).sum(1))


def test_each_series_is_fitted_as_if_alone():
    # short series are not fitted (no AICc) and do not change the fits of the others
    batch = _random_batch(120, 12, seed=8, min_len=3)
    together = fit_models(batch, min_series_bins=5)
    for i in (0, 5, 17, 60):
        alone = fit_models(batch.take([i]), min_series_bins=5)
        for name in together.models:
            a, b = together.fits[name], alone.fits[name]
            assert np.array_equal(a.loglik[[i]], b.loglik, equal_nan=True)
            assert np.array_equal(a.aicc[[i]], b.aicc, equal_nan=True)
            for k in a.params:
                assert np.array_equal(a.params[k][[i]], b.params[k], equal_nan=True)
    short = batch.n < 5
    assert short.any() and np.all(np.isnan(together.fits["stasis"].loglik[short]))
