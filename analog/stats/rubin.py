"""Rubin's rules: combine estimates made on several imputations or random draws."""
from __future__ import annotations

import warnings
from dataclasses import dataclass

import numpy as np
from scipy import stats

from analog.errors import AnalogError, AnalogWarning

__all__ = ["RubinResult", "rubin_combine"]


@dataclass(frozen=True, eq=False)
class RubinResult:
    """Result of :func:`rubin_combine`.

    Each attribute is a float for 1-D input and an array of shape ``(p,)``
    for input of shape ``(m, p)``.

    Attributes
    ----------
    estimate
        Mean of the estimates over draws, ``Q_bar``.
    within
        Mean of the variances, ``W`` (``U_bar`` in Rubin 1987).
    between
        Variance of the estimates over draws, ``B`` (divisor ``m - 1``).
    total
        ``T = W + (1 + 1/m) B`` (also available as ``variance``).
    se
        ``sqrt(T)``.
    df
        Degrees of freedom of the t reference law (``inf`` when ``B = 0``
        and no ``df_complete`` is given).
    m
        Number of usable draws (per column).
    riv
        Relative increase in variance due to the draws, ``(1 + 1/m) B / W``.
    lambda_
        Share of the total variance due to the draws, ``(1 + 1/m) B / T``.
    fmi
        Fraction of missing information, ``(riv + 2/(df + 3)) / (1 + riv)``.
    """

    estimate: object
    within: object
    between: object
    total: object
    se: object
    df: object
    m: object
    riv: object
    lambda_: object
    fmi: object

    @property
    def variance(self):
        """Total variance ``T`` (same as ``total``)."""
        return self.total

    def conf_int(self, alpha=0.05):
        """``estimate -+ t_df(1 - alpha/2) se`` (normal quantile where ``df`` is infinite).

        Parameters
        ----------
        alpha : float, default=0.05

        Returns
        -------
        (low, high)
            Floats or arrays like ``estimate``.
        """
        alpha = float(alpha)
        if not 0.0 < alpha < 1.0:
            raise AnalogError(f"`alpha` must be in (0, 1); got {alpha} instead")
        df = np.asarray(self.df, dtype=float)
        crit = np.where(np.isinf(df), stats.norm.isf(alpha / 2),
                        stats.t.isf(alpha / 2, np.where(np.isinf(df), 1.0, df)))
        low = np.asarray(self.estimate) - crit * np.asarray(self.se)
        high = np.asarray(self.estimate) + crit * np.asarray(self.se)
        return _out(low), _out(high)


def _out(x):
    x = np.asarray(x, dtype=float)
    return float(x) if x.ndim == 0 else x


def rubin_combine(estimates, variances, *, df_complete=None):
    """Combine estimates and their variances over ``m`` imputations or random draws.

    Parameters
    ----------
    estimates : array_like, shape (m,) or (m, p)
        One estimate per draw (rows), for one or ``p`` quantities (columns).
    variances : array_like, same shape
        Their squared standard errors.
    df_complete : float, optional
        Degrees of freedom of the analysis had nothing been imputed / drawn
        (e.g. ``n - p``). Given, the Barnard-Rubin (1999) small-sample degrees
        of freedom are used; otherwise Rubin's (1987) classic ones.

    Returns
    -------
    RubinResult

    Raises
    ------
    AnalogError
        Mismatched shapes, more than 2 dimensions, a negative variance, or a
        non-positive ``df_complete``.

    Warns
    -----
    AnalogWarning
        When a column has fewer than 2 usable draws: its between-draw
        variance cannot be estimated and is set to 0 (with no usable draw
        every statistic is NaN).

    Notes
    -----
    Draws whose estimate or variance is not finite are left out, column by
    column (so ``m`` may differ between columns). With ``Q_bar`` the mean
    estimate, ``W`` the mean variance and ``B`` the sample variance of the
    estimates, ``T = W + (1 + 1/m) B``. Classic degrees of freedom
    ``nu_old = (m - 1) / lambda^2`` with ``lambda = (1 + 1/m) B / T``
    (Rubin 1987, eq. 3.1.6). Barnard-Rubin:
    ``nu_obs = (nu_com + 1)/(nu_com + 3) nu_com (1 - lambda)`` and
    ``nu = nu_old nu_obs / (nu_old + nu_obs)`` (van Buuren 2018, sec. 2.3.6).

    References
    ----------
    Rubin, D. B. (1987). Multiple Imputation for Nonresponse in Surveys.
    Wiley, New York.

    Barnard, J. & Rubin, D. B. (1999). Small-sample degrees of freedom with
    multiple imputation. Biometrika 86, 948-955.

    van Buuren, S. (2018). Flexible Imputation of Missing Data, 2nd ed.
    Chapman & Hall/CRC, sec. 2.3.
    """
    q = np.asarray(estimates, dtype=float)
    u = np.asarray(variances, dtype=float)
    if q.shape != u.shape:
        raise AnalogError(f"`estimates` has shape {q.shape} but `variances` has {u.shape}")
    if q.ndim not in (1, 2):
        raise AnalogError(f"`estimates` must be 1-D (m,) or 2-D (m, p); got {q.ndim}-D instead")
    if np.any(u < 0):
        raise AnalogError("`variances` must be >= 0; found a negative variance")
    if df_complete is not None:
        df_complete = float(df_complete)
        if not df_complete > 0:
            raise AnalogError(f"`df_complete` must be > 0; got {df_complete} instead")

    ok = np.isfinite(q) & np.isfinite(u)
    m = ok.sum(axis=0)
    with np.errstate(invalid="ignore", divide="ignore"):
        qbar = np.where(ok, q, 0.0).sum(axis=0) / m
        within = np.where(ok, u, 0.0).sum(axis=0) / m
        between = np.where(ok, (q - qbar) ** 2, 0.0).sum(axis=0) / (m - 1)
    thin = m < 2
    if np.any(thin):
        warnings.warn(f"{int(thin.sum())} quantit{'y has' if thin.sum() == 1 else 'ies have'} "
                      "fewer than 2 usable draws; their between-draw variance is set to 0 "
                      "(NaN with no usable draw)", AnalogWarning, stacklevel=2)
        between = np.where(thin, np.where(m == 1, 0.0, np.nan), between)
    with np.errstate(invalid="ignore", divide="ignore"):
        factor = 1.0 + 1.0 / m
        total = within + factor * between
        riv = np.where(factor * between == 0, 0.0, factor * between / within)
        lam = np.where(factor * between == 0, 0.0, factor * between / total)
        df_old = np.where(lam == 0, np.inf, (m - 1) / lam ** 2)
        if df_complete is None:
            df = df_old
        else:
            # 1 - lambda as W / T: no cancellation when W is tiny next to B
            df_obs = ((df_complete + 1.0) / (df_complete + 3.0) * df_complete
                      * np.where(lam == 0, 1.0, within / total))
            df = np.where(np.isinf(df_old), df_obs, df_old * df_obs / (df_old + df_obs))
        fmi = np.where(np.isinf(riv), 1.0, (riv + 2.0 / (df + 3.0)) / (1.0 + riv))  # W = 0: limit 1
    nan = m == 0
    df = np.where(nan, np.nan, df)
    fmi = np.where(nan, np.nan, fmi)
    return RubinResult(estimate=_out(qbar), within=_out(within), between=_out(between),
                       total=_out(total), se=_out(np.sqrt(total)), df=_out(df),
                       m=int(m) if np.ndim(m) == 0 else m, riv=_out(riv), lambda_=_out(lam),
                       fmi=_out(fmi))
