"""Maximum-likelihood models of logit-occupancy series, fitted to many series at once.

Series are held in a padded batch (one row per series, observations packed to the
left, NaN after the last one) so each model is fitted to every series with a few
array operations: closed forms for stasis, the random walks and the symmetric
rise-and-fall curve; a grid plus a fixed number of golden-section steps over the
peak time for the asymmetric curve.

Comparability
-------------
Random walks describe increments, so a series of ``n`` values gives them ``n − 1``
data. To compare every model on the same data, *all* models are conditioned on the
first observation: each likelihood is that of observations 2..n given observation 1,
and AICc uses ``n − 1`` for every model. For the models with independent errors
(stasis, the curves) conditioning on the first value simply leaves it out of the fit.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy.special import ndtr

from ..errors import AnalogError
from .params import MODEL_NAMES

__all__ = ["SeriesBatch", "ModelFit", "FitSet", "fit_models", "fit_model", "simulate", "curve_value",
           "MODEL_K", "MODEL_LABELS", "reading_label"]

# free parameters per model (including the error variance)
MODEL_K = {"stasis": 2, "random_walk": 1, "random_walk_drift": 2, "rise_fall": 4, "rise_fall_asymmetric": 5}
MODEL_LABELS = {
    "stasis": "stasis (steady around a mean)",
    "random_walk": "random walk, no drift",
    "random_walk_drift": "random walk with drift",
    "rise_fall": "rise-and-fall, symmetric",
    "rise_fall_asymmetric": "rise-and-fall, asymmetric",
}
_VAR_FLOOR = 1e-6      # keeps the likelihood finite for a perfectly flat series
_PEAK_GRID = 16        # grid points over the peak time (asymmetric curve)
_PEAK_STEPS = 16       # golden-section steps after the grid
_MIN_SIDE = 3          # observations a side of the asymmetric peak needs to get its own curvature
_GOLD = (np.sqrt(5.0) - 1.0) / 2.0


@dataclass
class SeriesBatch:
    """Padded batch of series.

    Attributes
    ----------
    key : ndarray of str, shape (N,)
        Label of each series (a taxon id, or a hindcast case id).
    t : ndarray, shape (N, L)
        Time in Myr since the series' first bin (increasing toward the present), NaN padding.
    y : ndarray, shape (N, L)
        Empirical logit occupancy, NaN padding.
    n : ndarray of int, shape (N,)
        Number of observations.
    age0 : ndarray, shape (N,)
        Age (Ma) of the first bin's midpoint, so that ``age = age0 − t``.
    """

    key: np.ndarray
    t: np.ndarray
    y: np.ndarray
    n: np.ndarray
    age0: np.ndarray

    @property
    def mask(self) -> np.ndarray:
        return np.arange(self.t.shape[1])[None, :] < self.n[:, None]

    def __len__(self) -> int:
        return len(self.n)

    def take(self, idx) -> "SeriesBatch":
        idx = np.asarray(idx)
        return SeriesBatch(self.key[idx], self.t[idx], self.y[idx], self.n[idx], self.age0[idx])

    def with_y(self, y: np.ndarray) -> "SeriesBatch":
        return SeriesBatch(self.key, self.t, y, self.n, self.age0)

    def last(self, a: np.ndarray) -> np.ndarray:
        """Value of ``a`` (N, L) at each series' last observation."""
        return a[np.arange(len(self.n)), np.maximum(self.n - 1, 0)]

    def truncate(self, n_keep: np.ndarray) -> "SeriesBatch":
        """Keep the first ``n_keep`` observations of each series."""
        n_keep = np.minimum(np.asarray(n_keep), self.n)
        keep = np.arange(self.t.shape[1])[None, :] < n_keep[:, None]
        return SeriesBatch(self.key, np.where(keep, self.t, np.nan), np.where(keep, self.y, np.nan),
                           n_keep.astype(np.int64), self.age0)

    @classmethod
    def from_table(cls, table: pd.DataFrame, *, key: str = "taxon_id", time: str = "bin_mid_ma",
                   value: str = "empirical_logit") -> "SeriesBatch":
        """Pack a long table (one row per series and bin, ordered old → young) into a batch.

        Rows whose ``value`` is NaN (bins without sampled units) are skipped, so a gap
        in a series only lengthens the time step across it.
        """
        sub = table.loc[table[value].notna().to_numpy(), [key, time, value]]
        codes, keys = pd.factorize(sub[key].astype(str), sort=False)   # order of first appearance
        pos = sub.groupby(codes, sort=False).cumcount().to_numpy()
        n = np.bincount(codes, minlength=len(keys)).astype(np.int64)
        width = int(n.max()) if len(n) else 0
        age = np.full((len(keys), width), np.nan)
        y = np.full((len(keys), width), np.nan)
        age[codes, pos] = sub[time].to_numpy(float)
        y[codes, pos] = sub[value].to_numpy(float)
        age0 = age[:, 0] if width else np.zeros(0)
        keys = np.asarray(keys, dtype=object)
        return cls(keys, age0[:, None] - age, y, n, age0)


@dataclass
class ModelFit:
    """One model fitted to every series of a batch (NaN where it could not be fitted)."""

    name: str
    k: int
    loglik: np.ndarray
    n_eff: np.ndarray
    aicc: np.ndarray
    params: dict[str, np.ndarray]

    def take(self, idx) -> "ModelFit":
        return ModelFit(self.name, self.k, self.loglik[idx], self.n_eff[idx], self.aicc[idx],
                        {k: v[idx] for k, v in self.params.items()})


@dataclass
class FitSet:
    """All models fitted to a batch, with Akaike weights."""

    batch: SeriesBatch
    fits: dict[str, ModelFit]
    weights: np.ndarray                  # (N, M), rows sum to 1 where any model fits
    models: tuple[str, ...] = field(default=MODEL_NAMES)

    @property
    def preferred(self) -> np.ndarray:
        """Name of the model with the largest weight ('' where none could be fitted)."""
        w = np.nan_to_num(self.weights, nan=-1.0)
        best = np.argmax(w, axis=1)
        names = np.array(self.models, dtype=object)[best]
        return np.where(w.max(axis=1) > 0, names, "")

    def to_frame(self) -> pd.DataFrame:
        """Long table: one row per series and model."""
        rows = []
        for j, m in enumerate(self.models):
            f = self.fits[m]
            part = pd.DataFrame({"taxon_id": self.batch.key, "model": m, "loglik": f.loglik, "k": f.k,
                                 "aicc": f.aicc, "weight": self.weights[:, j], "n_fitted": f.n_eff})
            for name, v in f.params.items():
                if not name.startswith("_"):
                    part[name] = v
            rows.append(part)
        out = pd.concat(rows, ignore_index=True) if rows else pd.DataFrame()
        order = {m: i for i, m in enumerate(self.models)}
        out["_o"] = out["model"].map(order)
        out["_s"] = out["taxon_id"].map({k: i for i, k in enumerate(self.batch.key)})
        return out.sort_values(["_s", "_o"], kind="stable").drop(columns=["_o", "_s"]).reset_index(drop=True)


# ---------------------------------------------------------------- fitting

def _cond_mask(batch: SeriesBatch) -> np.ndarray:
    m = batch.mask.copy()
    if m.shape[1]:
        m[:, 0] = False
    return m


def _gauss_loglik(rss, n_eff, extra=0.0):
    """Profile Gaussian log-likelihood at the ML variance rss / n (floored)."""
    with np.errstate(divide="ignore", invalid="ignore"):
        s2 = np.maximum(rss / n_eff, _VAR_FLOOR)
        ll = -0.5 * (n_eff * np.log(2.0 * np.pi * s2) + rss / s2) - extra
    return ll, s2


def _fit_stasis(batch: SeriesBatch):
    m = _cond_mask(batch)
    ne = (batch.n - 1).astype(float)
    y = np.where(m, batch.y, 0.0)
    with np.errstate(invalid="ignore", divide="ignore"):
        theta = y.sum(1) / ne
    rss = np.where(m, (batch.y - theta[:, None]) ** 2, 0.0).sum(1)
    ll, s2 = _gauss_loglik(rss, ne)
    return ll, {"mean_logit": theta, "sd": np.sqrt(s2)}


def _walk_parts(batch: SeriesBatch):
    """Increments, time steps, their count and summed log steps (shared by both random walks)."""
    md = batch.mask[:, 1:]
    dy = np.where(md, np.diff(batch.y, axis=1), 0.0)
    dt = np.where(md, np.diff(batch.t, axis=1), 1.0)
    ne = md.sum(1).astype(float)
    logdt = np.where(md, np.log(dt), 0.0).sum(1)
    return md, dy, dt, ne, logdt


def _fit_walk(batch: SeriesBatch, drift: bool, parts=None):
    md, dy, dt, ne, logdt = _walk_parts(batch) if parts is None else parts
    with np.errstate(invalid="ignore", divide="ignore"):
        mu = dy.sum(1) / np.where(md, dt, 0.0).sum(1) if drift else np.zeros(len(batch))
    r = np.where(md, (dy - mu[:, None] * dt) ** 2 / dt, 0.0).sum(1)
    ll, s2 = _gauss_loglik(r, ne, extra=0.5 * logdt)
    params = {"drift_per_myr": mu, "step_sd": np.sqrt(s2)} if drift else {"step_sd": np.sqrt(s2)}
    return ll, params


def _solve(A, r, cols):
    """Batched least squares on a subset of columns; zero coefficients elsewhere."""
    cols = list(cols)
    sub = A[:, cols][:, :, cols]
    scale = np.maximum(np.abs(np.diagonal(sub, axis1=1, axis2=2)).max(1), 1.0)
    sub = sub + np.eye(len(cols))[None] * (1e-10 * scale)[:, None, None]
    beta = np.zeros(r.shape)
    beta[:, cols] = np.linalg.solve(sub, r[:, cols][..., None])[..., 0]
    return beta


def _rss(A, r, yy, beta):
    return yy - 2.0 * np.einsum("ni,ni->n", beta, r) + np.einsum("ni,nij,nj->n", beta, A, beta)


_NORMAL_BLOCK = 1 << 15   # series x width per block of the quadratic's normal equations


def _quadratic_normal_eq(s, y, m):
    """Normal equations of the quadratic ``y ~ 1 + s + s²`` for every series (entries outside ``m`` left out).

    Returns ``X'X`` (N, 3, 3), ``X'y`` (N, 3) and ``y'y`` (N,), with ``s`` and ``y``
    already 0 outside ``m``. ``X'X`` and ``X'y`` hold the sums ``np.einsum('nli,nlj->nij')``
    and ``np.einsum('nli,nl->ni')`` give for the masked design ``X = [1, s, s²]``; einsum
    adds the products position after position, and so does this function, on blocks of
    series held transposed (positions × series) so that each step is one vectorized
    addition. :func:`_einsum_matches_sequential` checks that order once per process; if
    it does not hold, ``np.einsum`` itself is used.
    """
    mf = m.astype(float)
    yy = (y ** 2).sum(1)
    if not _einsum_matches_sequential():
        X = np.stack([mf, s, s ** 2], axis=-1)
        return np.einsum("nli,nlj->nij", X, X), np.einsum("nli,nl->ni", X, y), yy
    n, width = s.shape
    total = np.empty((9, n))
    size = max(1, _NORMAL_BLOCK // max(width, 1))
    for a in range(0, n, size):
        b = min(a + size, n)
        x0, x1, yt = (np.ascontiguousarray(v[a:b].T) for v in (mf, s, y))
        x2 = x1 ** 2
        prod = np.empty((width, 9, b - a))
        for k, (u, v) in enumerate(((x0, x0), (x0, x1), (x0, x2), (x1, x1), (x1, x2), (x2, x2),
                                    (x0, yt), (x1, yt), (x2, yt))):
            np.multiply(u, v, out=prod[:, k])
        acc = np.zeros((9, b - a))
        for i in range(width):
            acc += prod[i]
        total[:, a:b] = acc
    A = np.empty((n, 3, 3))
    for k, (i, j) in enumerate(((0, 0), (0, 1), (0, 2), (1, 1), (1, 2), (2, 2))):
        A[:, i, j] = A[:, j, i] = total[k]
    return A, np.ascontiguousarray(total[6:].T), yy


_EINSUM_OK: list[bool] = []


def _einsum_matches_sequential() -> bool:
    """Whether adding products position after position reproduces ``np.einsum`` bit for bit (checked once)."""
    if not _EINSUM_OK:
        rng = np.random.default_rng(0)
        ok = True
        for n, width in [(1, 1), (1, 9), (2, 5), (7, 17), (300, 8), (300, 24), (1000, 3), (50, 60)]:
            X = rng.standard_normal((n, width, 3)) * 10.0 ** rng.integers(-6, 7, (n, width, 1))
            y = rng.standard_normal((n, width))
            xt, yt = np.moveaxis(X, 1, 0), y.T
            A = np.zeros((n, 3, 3))
            r = np.zeros((n, 3))
            for i in range(width):
                A += xt[i][:, :, None] * xt[i][:, None, :]
                r += xt[i] * yt[i][:, None]
            ok &= np.array_equal(A, np.einsum("nli,nlj->nij", X, X))
            ok &= np.array_equal(r, np.einsum("nli,nl->ni", X, y))
        _EINSUM_OK.append(bool(ok))
    return _EINSUM_OK[0]


def _center_scale(batch):
    """Centre, half-span and ends of the conditioned observation times (observations 2..n)."""
    lo = np.nan_to_num(batch.t[:, 1]) if batch.t.shape[1] > 1 else np.zeros(len(batch))
    hi = np.nan_to_num(batch.last(batch.t))
    return (lo + hi) / 2.0, np.maximum((hi - lo) / 2.0, 1e-9), lo, hi


def _fit_rise_fall(batch: SeriesBatch):
    """Quadratic on the logit scale with non-positive curvature (closed form)."""
    m = _cond_mask(batch)
    ne = (batch.n - 1).astype(float)
    c0, sc, _, _ = _center_scale(batch)
    s = np.where(m, (batch.t - c0[:, None]) / sc[:, None], 0.0)
    A, r, yy = _quadratic_normal_eq(s, np.where(m, batch.y, 0.0), m)
    ok = ne >= 3
    A = np.where(ok[:, None, None], A, np.eye(3)[None])
    full = _solve(A, r, [0, 1, 2])
    line = _solve(A, r, [0, 1])
    beta = np.where((full[:, 2] <= 0)[:, None], full, line)
    rss = np.maximum(_rss(A, r, yy, beta), 0.0)
    ll, s2 = _gauss_loglik(rss, ne)
    b0, b1, b2 = beta.T
    peaked = b2 < 0
    with np.errstate(divide="ignore", invalid="ignore"):
        s_peak = np.where(peaked, -b1 / (2.0 * b2), np.nan)
        peak_t = c0 + sc * s_peak
        peak_y = np.where(peaked, b0 - b1 ** 2 / (4.0 * b2), np.nan)
        curv = np.where(peaked, -b2 / sc ** 2, 0.0)
        width = np.where(peaked, 1.0 / np.sqrt(2.0 * curv), np.inf)
        slope = np.where(peaked, np.nan, b1 / sc)
        intercept = np.where(peaked, np.nan, b0 - b1 * c0 / sc)
    params = {"peak_age_ma": batch.age0 - peak_t, "peak_logit": peak_y, "rise_width_myr": width,
              "fall_width_myr": width, "slope_per_myr": slope, "sd": np.sqrt(s2),
              "_peak_t": peak_t, "_curv_rise": curv, "_curv_fall": curv, "_intercept": intercept}
    return ll, params


_SEARCH_BLOCK = 1 << 17   # series x width searched together (bounds the peak search's working arrays)
_SUM_BLOCK = 1 << 18      # candidates x series x width summed together


def _pairwise_sum(a: np.ndarray) -> np.ndarray:
    """Sum over the first axis, adding in the order ``ndarray.sum`` uses along a row.

    ``a`` has positions along axis 0 and many independent rows along the other axes,
    so every step is one vectorized addition over all rows. numpy adds the ``n``
    values of a contiguous row by pairwise summation: fewer than 8 values one after
    another; up to 128 values in 8 interleaved partial sums combined as
    ``((r0 + r1) + (r2 + r3)) + ((r4 + r5) + (r6 + r7))`` and then the remainder one
    by one; longer rows split in two halves (the first a multiple of 8 long), each
    summed the same way; the reduction starts from 0.0. The result therefore equals
    ``np.moveaxis(a, 0, -1).sum(axis=-1)`` bit for bit, but runs far faster when the
    rows are short. :func:`_pairwise_matches_numpy` checks that once per process and
    this function falls back to numpy's own sum if the check fails.
    """
    if not _pairwise_matches_numpy():
        return np.ascontiguousarray(np.moveaxis(a, 0, -1)).sum(axis=-1)
    return 0.0 + _pairwise(a)


def _pairwise(a):
    n = a.shape[0]
    if n < 8:
        res = np.zeros(a.shape[1:])
        for i in range(n):
            res += a[i]
        return res
    if n <= 128:
        stop = n - n % 8
        r = a[:8] if stop == 8 else a[:8] + a[8:16]
        for i in range(16, stop, 8):
            r += a[i:i + 8]
        res = ((r[0] + r[1]) + (r[2] + r[3])) + ((r[4] + r[5]) + (r[6] + r[7]))
        for i in range(stop, n):
            res += a[i]
        return res
    half = n // 2
    half -= half % 8
    return _pairwise(a[:half]) + _pairwise(a[half:])


_PAIRWISE_OK: list[bool] = []


def _pairwise_matches_numpy() -> bool:
    """Whether :func:`_pairwise` reproduces ``ndarray.sum`` along rows of every width up to 300."""
    if not _PAIRWISE_OK:
        rng = np.random.default_rng(0)
        ok = True
        for n in range(1, 301):
            rows = rng.standard_normal((n, 4)) * 10.0 ** rng.integers(-8, 9, (n, 4))
            rows[:, 0] = -0.0
            ok &= np.array_equal(0.0 + _pairwise(rows), np.ascontiguousarray(rows.T).sum(axis=1))
        _PAIRWISE_OK.append(bool(ok))
    return _PAIRWISE_OK[0]


def _asym_sums(tn, y, c, buf=None):
    """Sums that the fit at peak times ``c`` needs, for every series and candidate at once.

    The arrays are transposed: positions along axis 0, series along the last axis.
    ``tn`` (width, series) holds the observation times with NaN at unused positions,
    ``y`` the values with 0 there; ``c`` is (candidates, series); ``buf``, if given, is
    scratch space, used when its shape is (6, width, candidates, series). Returns an array (3, 2,
    candidates, series): with ``d = (t − c)²``, the sums of ``d``, ``d²`` and ``d y``
    (first axis) over the observations left of the peak (``t < c``) in ``[:, 0]``, and
    the same sums over the whole series minus the left part in ``[:, 1]``.

    Each element equals the one ``(t − c)² · mask · [t < c]`` gives (``fmin(t − c, 0)²``
    is ``(t − c)²`` left of the peak and 0 elsewhere; ``fmax`` turns the NaN of unused
    positions into 0), and every sum is added in the order ``ndarray.sum(axis=1)`` uses
    for an untransposed row of the batch's width (see :func:`_pairwise_sum`).
    """
    shape = (6, tn.shape[0]) + c.shape
    w = buf if buf is not None and buf.shape == shape else np.empty(shape)
    dl, d2 = w[0], w[3]
    np.subtract(tn[:, None, :], c[None], out=d2)
    np.fmin(d2, 0.0, out=dl)
    np.multiply(dl, dl, out=dl)
    np.multiply(d2, d2, out=d2)
    np.fmax(d2, 0.0, out=d2)
    np.multiply(dl, dl, out=w[1])
    np.multiply(dl, y[:, None, :], out=w[2])
    np.multiply(d2, d2, out=w[4])
    np.multiply(d2, y[:, None, :], out=w[5])
    total = _pairwise_sum(np.moveaxis(w, 0, 1))
    out = np.empty((3, 2) + c.shape)
    out[:, 0] = total[:3]
    np.subtract(total[3:], total[:3], out=out[:, 1])
    return out


def _asym_rss(tn, y, third, n_obs, yy, ysum, flat, c, buf=None):
    """Least RSS of the peaked curve at fixed peak times ``c`` (candidates, series).

    The same numbers as :func:`_asym_eval` (up to the sign of a zero), with the terms
    that vanish in the one-sided and flat subsets left out, and the left and right
    sides held together in arrays of two rows. ``flat`` is the RSS of the flat fit,
    which does not depend on ``c`` (NaN where it is not finite); ``third`` holds each
    series' third smallest and third largest conditioned time, so that "at least
    ``_MIN_SIDE`` observations left of (right of) ``c``" is ``c > third[0]``
    (``c <= third[1]``).
    """
    side = _asym_sums(tn, y, c, buf)
    s, q, ys = side                                           # each (left, right) x candidates x series
    enough = np.empty(s.shape, dtype=bool)
    np.greater(c, third[0], out=enough[0])
    np.less_equal(c, third[1], out=enough[1])
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # a side bends only with enough points on it; otherwise one point would be fitted exactly
        g = np.where((q > 0) & enough, 1.0 / q, 0.0)
        ssg = s * s * g
        syg = s * ys * g
        # both sides bent
        den = n_obs - ssg[0] - ssg[1]
        a0 = (ysum - syg[0] - syg[1]) / np.where(den > 1e-12, den, np.nan)
        b = (s * a0 - ys) * g
        rss = yy - a0 * ysum + b[0] * ys[0] + b[1] * ys[1]
        ok = b >= 0
        best = np.where(ok[0] & ok[1] & np.isfinite(rss), rss, np.inf)
        # rise only, then fall only
        den = n_obs - ssg
        a0 = (ysum - syg) / np.where(den > 1e-12, den, np.nan)
        b = (s * a0 - ys) * g
        rss = yy - a0 * ysum + b * ys
        ok = (b >= 0) & np.isfinite(rss)
        for k in (0, 1):
            best = np.where(ok[k] & (rss[k] < best - 1e-12), rss[k], best)
        # flat
        best = np.where(flat < best - 1e-12, flat, best)
    return np.maximum(best, 0.0)


def _asym_eval(tn, y, third, n_obs, yy, ysum, c):
    """Least-squares fit of ``a − b_rise (t − c)² [t < c] − b_fall (t − c)² [t >= c]`` at fixed ``c``.

    Arrays as in :func:`_asym_rss`. The normal equations have an arrowhead form (the
    two curvature columns never overlap), so each column subset is solved in closed
    form; the four subsets (both sides bent, rise only, fall only, flat) are tried in
    that order and the feasible (non-negative curvature) solution of least RSS is kept.
    A side with fewer than ``_MIN_SIDE`` observations stays flat (curvature 0).
    Returns ``(rss, a, b_rise, b_fall)``, each (candidates, series).
    """
    (sl, sr), (ql, qr), (yl, yr) = _asym_sums(tn, y, c)
    zero = np.zeros(c.shape)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        gl = np.where((ql > 0) & (c > third[0]), 1.0 / ql, 0.0)
        gr = np.where((qr > 0) & (c <= third[1]), 1.0 / qr, 0.0)
        fl = np.stack([gl, gl, zero, zero])            # the four subsets, in the order they are tried
        fr = np.stack([gr, zero, gr, zero])
        den = n_obs - sl * sl * fl - sr * sr * fr
        a0 = (ysum - sl * yl * fl - sr * yr * fr) / np.where(den > 1e-12, den, np.nan)
        a0[3] = ysum / n_obs
        bl = (sl * a0 - yl) * fl
        br = (sr * a0 - yr) * fr
        rss = yy - a0 * ysum + bl * yl + br * yr
        ok = (bl >= 0) & (br >= 0) & np.isfinite(rss)
        best = np.full(c.shape, np.inf)
        pick = np.full(c.shape, 4)
        for k in range(4):
            take = ok[k] & (rss[k] < best - 1e-12)
            best = np.where(take, rss[k], best)
            pick = np.where(take, k, pick)
    # no feasible subset: the flat fit's level with zero curvatures
    a0 = np.concatenate([a0, np.broadcast_to(ysum / n_obs, c.shape)[None]])
    bl = np.concatenate([bl, zero[None]])
    br = np.concatenate([br, zero[None]])
    return (np.maximum(best, 0.0),) + tuple(np.take_along_axis(v, pick[None], axis=0)[0] for v in (a0, bl, br))


def _asym_search(tn, y, third, n_obs, yy, ysum, lo, hi):
    """Peak time of least RSS: a grid over [lo, hi], then golden-section steps near its best point."""
    width, n = tn.shape
    cols = np.arange(n)
    with np.errstate(invalid="ignore", over="ignore"):
        flat = yy - ysum / n_obs * ysum
    flat = np.where(np.isfinite(flat), flat, np.nan)    # a non-finite flat fit is never taken
    buf = np.empty((6, width, 1, n))

    def f(c):
        return _asym_rss(tn, y, third, n_obs, yy, ysum, flat, c, buf)

    grid = (lo[:, None] + (hi - lo)[:, None] * np.linspace(0.0, 1.0, _PEAK_GRID)[None, :]).T
    per = max(1, _SUM_BLOCK // max(6 * n * width, 1))        # grid points summed at once
    rss_grid = np.concatenate([f(grid[g:g + per]) for g in range(0, _PEAK_GRID, per)], axis=0)
    g_best = np.argmin(rss_grid, axis=0)
    c_grid, r_grid = grid[g_best, cols], rss_grid[g_best, cols]
    step = (hi - lo) / (_PEAK_GRID - 1)
    a, b = np.maximum(c_grid - step, lo), np.minimum(c_grid + step, hi)
    # golden-section search inside the bracket around the best grid point
    x1, x2 = b - _GOLD * (b - a), a + _GOLD * (b - a)
    f1, f2 = f(np.stack([x1, x2]))
    for _ in range(_PEAK_STEPS):
        left = f1 < f2
        a, b = np.where(left, a, x1), np.where(left, x2, b)
        x1, x2 = np.where(left, b - _GOLD * (b - a), x2), np.where(left, x1, a + _GOLD * (b - a))
        fx = f(np.where(left, x1, x2)[None])[0]
        f1, f2 = np.where(left, fx, f2), np.where(left, f1, fx)
    c_search, r_search = np.where(f1 < f2, x1, x2), np.minimum(f1, f2)
    c = np.where(r_search < r_grid, c_search, c_grid)
    rss, a0, bl, br = _asym_eval(tn, y, third, n_obs, yy, ysum, c[None])
    return c, rss[0], a0[0], bl[0], br[0]


def _fit_rise_fall_asym(batch: SeriesBatch):
    """Peaked curve with different rise and fall curvatures; peak time inside the window.

    Notes
    -----
    The peak time is searched for blocks of series at a time, held transposed
    (positions × series) so that every step is a long vectorized operation; each
    series' numbers are those of fitting it alone, and equal those of the plain
    whole-row formulation (the sums are added in numpy's order, see
    :func:`_pairwise_sum`).
    """
    m = _cond_mask(batch)
    ne = (batch.n - 1).astype(float)
    t = np.where(m, batch.t, 0.0)
    y = np.where(m, batch.y, 0.0)
    yy = (y ** 2).sum(1)
    ysum = y.sum(1)
    n_obs = np.maximum(ne, 1.0)
    _, _, lo, hi = _center_scale(batch)
    n, width = t.shape
    # third smallest and third largest conditioned time (+inf / -inf when there are fewer)
    third = np.stack([np.full(n, np.inf), np.full(n, -np.inf)])
    if width >= _MIN_SIDE:
        third[0] = np.partition(np.where(m, t, np.inf), _MIN_SIDE - 1, axis=1)[:, _MIN_SIDE - 1]
        third[1] = -np.partition(np.where(m, -t, np.inf), _MIN_SIDE - 1, axis=1)[:, _MIN_SIDE - 1]
    tn = np.where(m, t, np.nan)
    c, rss, a0, bl, br = (np.empty(n) for _ in range(5))
    size = max(1, _SEARCH_BLOCK // max(width, 1))
    for s in range(0, n, size):
        e = min(s + size, n)
        c[s:e], rss[s:e], a0[s:e], bl[s:e], br[s:e] = _asym_search(
            np.ascontiguousarray(tn[s:e].T), np.ascontiguousarray(y[s:e].T), third[:, s:e], n_obs[s:e],
            yy[s:e], ysum[s:e], lo[s:e], hi[s:e])
    ll, s2 = _gauss_loglik(rss, ne)
    with np.errstate(divide="ignore"):
        wl = np.where(bl > 0, 1.0 / np.sqrt(2.0 * bl), np.inf)
        wr = np.where(br > 0, 1.0 / np.sqrt(2.0 * br), np.inf)
    params = {"peak_age_ma": batch.age0 - c, "peak_logit": a0, "rise_width_myr": wl, "fall_width_myr": wr,
              "slope_per_myr": np.full(len(batch), np.nan), "sd": np.sqrt(s2),
              "_peak_t": c, "_curv_rise": bl, "_curv_fall": br, "_intercept": np.full(len(batch), np.nan)}
    return ll, params


_FITTERS = {
    "stasis": _fit_stasis,
    "random_walk": lambda b: _fit_walk(b, drift=False),
    "random_walk_drift": lambda b: _fit_walk(b, drift=True),
    "rise_fall": _fit_rise_fall,
    "rise_fall_asymmetric": _fit_rise_fall_asym,
}


def fit_model(name: str, batch: SeriesBatch, *, min_series_bins: int = 3) -> ModelFit:
    """Fit one model to every series in ``batch`` by maximum likelihood.

    Parameters
    ----------
    name : {'stasis', 'random_walk', 'random_walk_drift', 'rise_fall', 'rise_fall_asymmetric'}
    batch : SeriesBatch
    min_series_bins : int, default=3
        Series with fewer observations get NaN.

    Returns
    -------
    ModelFit
        ``aicc`` is NaN where the series is shorter than ``min_series_bins`` or too
        short for AICc (``n − 1 <= k + 1``).

    Notes
    -----
    Likelihoods are conditional on the first observation (see the module notes), so
    ``n_eff = n − 1`` for every model. Error terms are Gaussian on the logit scale;
    sampling noise of the empirical logit is absorbed in the fitted variance.
    """
    return _fit_model(name, batch, min_series_bins, None)


def _fit_model(name: str, batch: SeriesBatch, min_series_bins: int, shared: dict | None) -> ModelFit:
    """:func:`fit_model`; ``shared`` carries work common to several models of one batch."""
    from ..stats import aicc

    if name not in _FITTERS:
        raise AnalogError(f"`name` was {name!r} but is expected to be in {list(_FITTERS)}")
    k = MODEL_K[name]
    n_eff = (batch.n - 1).astype(float)
    if len(batch) == 0:
        empty = np.zeros(0)
        return ModelFit(name, k, empty, empty, empty, {})
    usable = (batch.n >= max(min_series_bins, 2)) & (n_eff - k - 1 > 0)
    if usable.all():
        if shared is not None and name in ("random_walk", "random_walk_drift"):
            if "walk" not in shared:
                shared["walk"] = _walk_parts(batch)
            ll, params = _fit_walk(batch, drift=name == "random_walk_drift", parts=shared["walk"])
        else:
            ll, params = _FITTERS[name](batch)
    else:
        # series without an AICc are not fitted at all (their numbers would be NaN); each
        # series' fit depends on its own row only, so the others get the same numbers
        keep = np.flatnonzero(usable)
        ll_kept, kept = _FITTERS[name](batch.take(keep))
        ll = np.full(len(batch), np.nan)
        ll[keep] = ll_kept
        params = {}
        for p, v in kept.items():
            params[p] = np.full(len(batch), np.nan)
            params[p][keep] = v
    ll = np.where(usable, ll, np.nan)
    with np.errstate(invalid="ignore", divide="ignore"):
        score = np.asarray(aicc(ll, k, np.where(usable, n_eff, np.nan)), dtype=float)
    score = np.where(usable, score, np.nan)
    params = {p: np.where(usable, v, np.nan) for p, v in params.items()}
    return ModelFit(name, k, ll, n_eff, score, params)


def _weights(aicc_matrix: np.ndarray) -> np.ndarray:
    """Akaike weights row by row; models without an AICc get weight 0, rows with none all 0."""
    from ..stats import akaike_weights

    if aicc_matrix.size == 0:
        return np.zeros_like(aicc_matrix)
    return np.nan_to_num(akaike_weights(aicc_matrix, axis=1), nan=0.0)


def fit_models(batch: SeriesBatch, *, models=MODEL_NAMES, min_series_bins: int = 5) -> FitSet:
    """Fit every model in ``models`` to every series and compute Akaike weights.

    Parameters
    ----------
    batch : SeriesBatch
    models : sequence of str
        Any of :data:`analog.trajectory.params.MODEL_NAMES`.
    min_series_bins : int, default=5

    Returns
    -------
    FitSet

    References
    ----------
    Hurvich, C. M. & Tsai, C.-L. (1989). Regression and time series model selection in
    small samples. Biometrika 76, 297-307.

    Burnham, K. P. & Anderson, D. R. (2002). Model Selection and Multimodel Inference,
    2nd ed. Springer (Akaike weights).
    """
    models = tuple(models)
    shared: dict = {}
    fits = {m: _fit_model(m, batch, min_series_bins, shared) for m in models}
    scores = np.column_stack([fits[m].aicc for m in models]) if len(batch) else np.zeros((0, len(models)))
    return FitSet(batch, fits, _weights(scores), models)


# ---------------------------------------------------------------- prediction and simulation

def curve_value(params: dict[str, np.ndarray], t: np.ndarray) -> np.ndarray:
    """Value of a fitted rise-and-fall curve at times ``t`` (rows = series)."""
    t = np.asarray(t, dtype=float)
    pt = params["_peak_t"][:, None]
    d = t - pt
    curv = np.where(d < 0, params["_curv_rise"][:, None], params["_curv_fall"][:, None])
    peaked = params["peak_logit"][:, None] - curv * d ** 2
    line = params["_intercept"][:, None] + params["slope_per_myr"][:, None] * t
    return np.where(np.isnan(pt), line, peaked)


def simulate(name: str, fit: ModelFit, batch: SeriesBatch, rng: np.random.Generator) -> np.ndarray:
    """Simulate new series from a fitted model at the batch's times, keeping the first value.

    Returns an array shaped like ``batch.y`` (NaN padding kept).
    """
    mask = batch.mask
    z = rng.standard_normal(batch.y.shape)
    out = np.full(batch.y.shape, np.nan)
    if name == "stasis":
        out = fit.params["mean_logit"][:, None] + fit.params["sd"][:, None] * z
    elif name in ("rise_fall", "rise_fall_asymmetric"):
        out = curve_value(fit.params, batch.t) + fit.params["sd"][:, None] * z
    else:
        mu = fit.params.get("drift_per_myr", np.zeros(len(batch)))
        dt = np.nan_to_num(np.diff(batch.t, axis=1))
        steps = mu[:, None] * dt + fit.params["step_sd"][:, None] * np.sqrt(dt) * z[:, 1:]
        out = batch.y[:, :1] + np.concatenate([np.zeros((len(batch), 1)), np.cumsum(steps, axis=1)], axis=1)
    out[:, 0] = batch.y[:, 0]
    return np.where(mask, out, np.nan)


def reading_label(fitset: FitSet) -> np.ndarray:
    """Readable label of the preferred reading of each series."""
    pref = fitset.preferred
    b = fitset.batch
    t_last = b.last(b.t)
    out = np.full(len(b), "", dtype=object)
    for m in fitset.models:
        sel = pref == m
        if not sel.any():
            continue
        p = fitset.fits[m].params
        if m == "stasis":
            out[sel] = "stable"
        elif m == "random_walk":
            out[sel] = "wandering (no trend)"
        elif m == "random_walk_drift":
            out[sel] = np.where(p["drift_per_myr"][sel] < 0, "declining random walk", "rising random walk")
        else:
            pt = p["_peak_t"][sel]
            line = np.isnan(pt)
            lab = np.where(pt < t_last[sel] - 1e-6, "past its peak", "rising to a peak")
            lab = np.where(line, np.where(p["slope_per_myr"][sel] < 0, "steady decline", "steady rise"), lab)
            out[sel] = lab
    out[pref == ""] = "too short to model"
    return out


def normal_cdf(x):
    """Standard normal CDF (``scipy.special.ndtr``)."""
    return ndtr(x)
