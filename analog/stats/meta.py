"""Inverse-variance pooling of effect estimates: fixed effect and random effects."""
from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from scipy import stats

from analog.errors import AnalogError, AnalogWarning

__all__ = ["PooledResult", "pool_random_effects"]

_METHODS = ("DL", "REML", "FE")
_REML_TOL = 1e-10
_REML_MAX_ITER = 200


@dataclass(frozen=True, eq=False)
class PooledResult:
    """Result of :func:`pool_random_effects`.

    Attributes
    ----------
    estimate : float
        Pooled effect (inverse-variance weighted mean).
    se : float
        Its standard error: ``sqrt(1 / sum(w))`` with ``w = 1 / (v + tau2)``,
        or the Hartung-Knapp-Sidik-Jonkman value when ``hksj`` is True.
    tau2 : float
        Between-estimate variance (0 for ``method='FE'``).
    i2 : float
        Share of the total variance due to heterogeneity, in [0, 1].
    q : float
        Cochran's Q (fixed-effect weights).
    q_p : float
        P-value of Q on chi-squared with ``k - 1`` degrees of freedom (NaN if k = 1).
    k : int
        Number of estimates pooled.
    method : {'DL', 'REML', 'FE'}
    hksj : bool
    weights : ndarray, shape (k,)
        Relative weights of the estimates, summing to 1.
    se_model : float
        The model-based standard error ``sqrt(1 / sum(w))`` whatever ``hksj``.
    """

    estimate: float
    se: float
    tau2: float
    i2: float
    q: float
    q_p: float
    k: int
    method: str
    hksj: bool
    weights: np.ndarray
    se_model: float

    def conf_int(self, alpha=0.05):
        """Confidence interval for the pooled effect.

        Parameters
        ----------
        alpha : float, default=0.05
            Nominal coverage ``1 - alpha``.

        Returns
        -------
        (float, float)
            ``estimate -+ z se`` (normal quantile), or with ``hksj=True``
            ``estimate -+ t_{k-1} se`` with the HKSJ standard error.
        """
        alpha = _check_alpha(alpha)
        if self.hksj and self.k >= 2:
            crit = stats.t.isf(alpha / 2, self.k - 1)
        else:
            crit = stats.norm.isf(alpha / 2)
        return (self.estimate - crit * self.se, self.estimate + crit * self.se)

    def prediction_interval(self, alpha=0.05):
        """Interval for the effect in a new setting (Higgins, Thompson & Spiegelhalter 2009).

        ``estimate -+ t_{k-2} sqrt(tau2 + se_model**2)``.

        Parameters
        ----------
        alpha : float, default=0.05

        Returns
        -------
        (float, float)
            NaN limits when ``k < 3`` (the t law needs ``k - 2 >= 1`` degrees
            of freedom).
        """
        alpha = _check_alpha(alpha)
        if self.k < 3:
            return (np.nan, np.nan)
        half = stats.t.isf(alpha / 2, self.k - 2) * np.sqrt(self.tau2 + self.se_model ** 2)
        return (self.estimate - half, self.estimate + half)


def _check_alpha(alpha):
    alpha = float(alpha)
    if not 0.0 < alpha < 1.0:
        raise AnalogError(f"`alpha` must be in (0, 1); got {alpha} instead")
    return alpha


def _tau2_dl(y, v):
    w = 1.0 / v
    mu = np.sum(w * y) / np.sum(w)
    q = np.sum(w * (y - mu) ** 2)
    c = np.sum(w) - np.sum(w ** 2) / np.sum(w)
    return max(0.0, (q - (y.size - 1)) / c) if c > 0 else 0.0


def _reml_loglik(tau2, y, v):
    """Restricted log-likelihood of tau2 (up to a constant)."""
    w = 1.0 / (v + tau2)
    sw = np.sum(w)
    mu = np.sum(w * y) / sw
    return 0.5 * (np.sum(np.log(w)) - np.log(sw) - np.sum(w * (y - mu) ** 2))


def _global_check(tau2, y, v):
    """The restricted likelihood can have two peaks (e.g. 0 and a large tau2); scoring finds
    the one nearest its start. Compare with a coarse grid and refine the best grid point."""
    from scipy.optimize import minimize_scalar

    top = 4.0 * (float(np.var(y)) + float(np.max(v))) + 2.0 * tau2 + 1.0
    grid = np.r_[0.0, np.geomspace(1e-8 * top, top, 80)]
    w = 1.0 / (v[None, :] + grid[:, None])  # all grid points at once
    sw = np.sum(w, axis=1)
    mu = np.sum(w * y, axis=1) / sw
    lls = 0.5 * (np.sum(np.log(w), axis=1) - np.log(sw) - np.sum(w * (y - mu[:, None]) ** 2, axis=1))
    i = int(np.argmax(lls))
    if lls[i] <= _reml_loglik(tau2, y, v) + 1e-12 * (1.0 + abs(lls[i])):
        return tau2
    lo, hi = grid[max(i - 1, 0)], grid[min(i + 1, len(grid) - 1)]
    res = minimize_scalar(lambda t: -_reml_loglik(t, y, v), bounds=(lo, hi), method="bounded",
                          options={"xatol": _REML_TOL})
    return max((grid[i], float(res.x)), key=lambda t: _reml_loglik(t, y, v))


def _tau2_reml(y, v, start):
    """Fisher scoring on the restricted log-likelihood, truncated at 0, with step halving.

    A step is kept only if it raises the restricted log-likelihood (halved up to 30
    times otherwise), so the iteration cannot oscillate; the iterate always climbs.
    """
    tau2 = float(start)
    ll = _reml_loglik(tau2, y, v)
    for _ in range(_REML_MAX_ITER):
        w = 1.0 / (v + tau2)
        sw = np.sum(w)
        mu = np.sum(w * y) / sw
        # score and expected information of the REML log-likelihood in tau2
        # (P = W - w w' / sum(w); score = (y'PPy - tr P) / 2, information = tr(PP) / 2)
        tr_p = sw - np.sum(w ** 2) / sw
        ypp_y = np.sum(w ** 2 * (y - mu) ** 2)
        tr_pp = np.sum(w ** 2) - 2.0 * np.sum(w ** 3) / sw + (np.sum(w ** 2) / sw) ** 2
        step = (ypp_y - tr_p) / tr_pp
        for _half in range(30):
            new = max(0.0, tau2 + step)
            new_ll = _reml_loglik(new, y, v)
            if new_ll >= ll - 1e-14 * (1.0 + abs(ll)):
                break
            step *= 0.5
        else:
            return tau2, True  # no ascent direction left: at the maximum within precision
        if abs(new - tau2) <= _REML_TOL * (1.0 + tau2):
            return _global_check(new, y, v), True
        tau2, ll = new, new_ll
    # Scoring can crawl when the curvature changes fast near the optimum: finish with a
    # bounded one-dimensional maximization (Brent) on an interval holding the maximum.
    from scipy.optimize import minimize_scalar

    top = 4.0 * (float(np.var(y)) + float(np.max(v))) + 2.0 * tau2 + 1.0
    res = minimize_scalar(lambda t: -_reml_loglik(t, y, v), bounds=(0.0, top), method="bounded",
                          options={"xatol": _REML_TOL})
    best = min((tau2, float(res.x), 0.0), key=lambda t: -_reml_loglik(t, y, v))
    return best, bool(res.success)


def pool_random_effects(effects, variances, *, method="DL", hksj=False):
    """Pool effect estimates by inverse-variance weighting with random effects.

    Parameters
    ----------
    effects : array_like, shape (k,)
        Estimates on an additive scale (e.g. log odds ratios).
    variances : array_like, shape (k,)
        Their sampling variances (squared standard errors), all > 0.
    method : {'DL', 'REML', 'FE'}, default='DL'
        Between-estimate variance estimator: DerSimonian-Laird moments,
        restricted maximum likelihood, or none (fixed effect, ``tau2 = 0``).
    hksj : bool, default=False
        Use the Hartung-Knapp-Sidik-Jonkman variance and a ``t_{k-1}``
        quantile in ``conf_int``; recommended with few estimates.

    Returns
    -------
    PooledResult

    Raises
    ------
    AnalogError
        Mismatched lengths, unknown method, or a non-positive variance.

    Warns
    -----
    AnalogWarning
        Pairs with a non-finite effect or variance are dropped (the count is
        given); with no pair left every statistic is NaN. With ``k = 1`` the
        HKSJ interval falls back to the normal one. REML that does not settle
        returns its last iterate.

    Notes
    -----
    With ``w_i = 1/v_i``, ``Q = sum w_i (y_i - mu_FE)^2``. DerSimonian-Laird:
    ``tau2 = max(0, (Q - (k-1)) / (sum w - sum w^2 / sum w))``. REML maximizes
    ``-1/2 [sum log(v_i + tau2) + log sum w*_i + sum w*_i (y_i - mu)^2]``
    over ``tau2 >= 0`` (Viechtbauer 2005) by Fisher scoring from the DL
    value. The pooled estimate uses ``w*_i = 1/(v_i + tau2)``.

    ``i2`` is ``tau2 / (tau2 + s2)`` with the "typical" within variance
    ``s2 = (k-1) sum w / ((sum w)^2 - sum w^2)`` (Higgins & Thompson 2002,
    eq. 9); for DL it equals ``(Q - (k-1)) / Q`` when positive. For ``FE``
    the DL value is reported, as a description of the data.

    HKSJ: ``se^2 = sum w*_i (y_i - mu)^2 / ((k-1) sum w*_i)``, used with
    ``t_{k-1}`` (Hartung & Knapp 2001; Sidik & Jonkman 2002). It can be
    narrower than the usual interval when the estimates agree closely.

    References
    ----------
    DerSimonian, R. & Laird, N. (1986). Meta-analysis in clinical trials.
    Controlled Clinical Trials 7, 177-188.

    Viechtbauer, W. (2005). Bias and efficiency of meta-analytic variance
    estimators in the random-effects model. J. Educ. Behav. Stat. 30, 261-293.

    Higgins, J. P. T. & Thompson, S. G. (2002). Quantifying heterogeneity in a
    meta-analysis. Statistics in Medicine 21, 1539-1558.

    Hartung, J. & Knapp, G. (2001). A refined method for the meta-analysis of
    controlled clinical trials with binary outcome. Statistics in Medicine
    20, 3875-3889.

    Sidik, K. & Jonkman, J. N. (2002). A simple confidence interval for
    meta-analysis. Statistics in Medicine 21, 3153-3159.

    Higgins, J. P. T., Thompson, S. G. & Spiegelhalter, D. J. (2009). A
    re-evaluation of random-effects meta-analysis. J. R. Stat. Soc. A 172,
    137-159.
    """
    if method not in _METHODS:
        raise AnalogError(f"`method` was {method!r} but is expected to be in {set(_METHODS)}")
    y = np.asarray(effects, dtype=float).reshape(-1)
    v = np.asarray(variances, dtype=float).reshape(-1)
    if y.size != v.size:
        raise AnalogError(f"`effects` has {y.size} values but `variances` has {v.size}")
    keep = np.isfinite(y) & np.isfinite(v)
    if np.any(v[keep] <= 0):
        raise AnalogError("`variances` must be > 0; found a zero or negative variance")
    hksj = bool(hksj)
    if not keep.any():
        warnings.warn(f"no finite estimate to pool (all {y.size} have a non-finite effect or "
                      "variance); every statistic is NaN", AnalogWarning, stacklevel=2)
    elif not keep.all():
        warnings.warn(f"dropped {int((~keep).sum())} of {y.size} estimates with a non-finite "
                      "effect or variance before pooling", AnalogWarning, stacklevel=2)
    y, v = y[keep], v[keep]
    k = int(y.size)
    if k == 0:
        nan = float("nan")
        return PooledResult(nan, nan, nan, nan, nan, nan, 0, method, hksj, np.empty(0), nan)

    w_fe = 1.0 / v
    mu_fe = np.sum(w_fe * y) / np.sum(w_fe)
    q = float(np.sum(w_fe * (y - mu_fe) ** 2))
    q_p = float(stats.chi2.sf(q, k - 1)) if k > 1 else float("nan")

    tau2_dl = _tau2_dl(y, v) if k > 1 else 0.0
    if method == "FE":
        tau2 = 0.0
    elif method == "DL":
        tau2 = tau2_dl
    else:
        tau2, ok = _tau2_reml(y, v, tau2_dl) if k > 1 else (0.0, True)
        if not ok:
            warnings.warn(f"REML for tau2 did not settle in {_REML_MAX_ITER} iterations; "
                          "using the last iterate", AnalogWarning, stacklevel=2)

    w = 1.0 / (v + tau2)
    sw = np.sum(w)
    estimate = float(np.sum(w * y) / sw)
    se_model = float(np.sqrt(1.0 / sw))

    # I^2 from tau2 and the typical within variance (Higgins & Thompson 2002, eq. 9)
    i2_tau2 = tau2_dl if method == "FE" else tau2
    denom = np.sum(w_fe) ** 2 - np.sum(w_fe ** 2)
    if k > 1 and denom > 0 and i2_tau2 > 0:
        s2 = (k - 1) * np.sum(w_fe) / denom
        i2 = float(i2_tau2 / (i2_tau2 + s2))
    else:
        i2 = 0.0

    se = se_model
    if hksj:
        if k >= 2:
            se = float(np.sqrt(np.sum(w * (y - estimate) ** 2) / ((k - 1) * sw)))
        else:
            warnings.warn("the HKSJ variance needs at least 2 estimates; with k = 1 the "
                          "normal interval from the model standard error is used",
                          AnalogWarning, stacklevel=2)
    return PooledResult(estimate=estimate, se=se, tau2=float(tau2), i2=i2, q=q, q_p=q_p, k=k,
                        method=method, hksj=hksj, weights=w / sw, se_model=se_model)
