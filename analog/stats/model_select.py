"""Small-sample information criterion and Akaike weights."""
from __future__ import annotations

import numpy as np

__all__ = ["aicc", "akaike_weights"]


def aicc(loglik, k, n):
    """Akaike's information criterion with the small-sample correction (AICc).

    Parameters
    ----------
    loglik : float or array_like
        Maximized log-likelihood of each model.
    k : float or array_like
        Number of estimated parameters (including variances and intercepts).
    n : float or array_like
        Number of observations the likelihood is based on.

    Returns
    -------
    float or ndarray
        ``-2 loglik + 2 k + 2 k (k + 1) / (n - k - 1)``, broadcast over the
        inputs. ``+inf`` where ``n - k - 1 <= 0`` (the correction is undefined:
        too many parameters for the data), NaN where any input is NaN or
        ``k`` or ``n`` is negative.

    Notes
    -----
    Returning ``+inf`` when ``n - k - 1 <= 0`` follows
    ``statsmodels.tools.eval_measures.aicc``; such a model then gets weight 0
    in :func:`akaike_weights`. The correction was derived for linear models
    with normal errors and is used generally as a small-sample guard
    (Burnham & Anderson 2002, sec. 2.4).

    References
    ----------
    Hurvich, C. M. & Tsai, C.-L. (1989). Regression and time series model
    selection in small samples. Biometrika 76, 297-307.

    Burnham, K. P. & Anderson, D. R. (2002). Model Selection and Multimodel
    Inference, 2nd ed. Springer.
    """
    ll, kk, nn = np.broadcast_arrays(*(np.asarray(a, dtype=float) for a in (loglik, k, n)))
    with np.errstate(divide="ignore", invalid="ignore"):
        dof = nn - kk - 1.0
        out = -2.0 * ll + 2.0 * kk + 2.0 * kk * (kk + 1.0) / dof
        out = np.where(dof > 0, out, np.inf)
        out = np.where(np.isnan(ll) | np.isnan(kk) | np.isnan(nn) | (kk < 0) | (nn < 0),
                       np.nan, out)
    return out[()] if out.ndim == 0 else out


def akaike_weights(aicc_values, *, axis=-1):
    """Akaike weights of competing models.

    Parameters
    ----------
    aicc_values : array_like
        Information criterion values (AICc or AIC) of the competing models
        along ``axis``; a 2-D array holds one set of models per row.
    axis : int, default=-1
        Axis along which models compete.

    Returns
    -------
    ndarray
        Weights ``exp(-delta / 2) / sum(exp(-delta / 2))`` with
        ``delta = value - min(value)``, same shape as the input, summing to 1
        along ``axis``. Non-finite values (NaN, +inf, -inf) get weight 0; a set
        with no finite value gives NaN weights.

    Notes
    -----
    Differences from the minimum are taken before exponentiating, so large
    criterion values do not underflow. A weight is the estimated probability
    that the model is the best of the set in the Kullback-Leibler sense
    (Burnham & Anderson 2002, sec. 2.9).

    References
    ----------
    Akaike, H. (1978). On the likelihood of a time series model. J. R. Stat.
    Soc. D 27, 217-235.

    Burnham, K. P. & Anderson, D. R. (2002). Model Selection and Multimodel
    Inference, 2nd ed. Springer.
    """
    a = np.asarray(aicc_values, dtype=float)
    if a.ndim == 0:
        a = a[None]
        scalar = True
    else:
        scalar = False
    finite = np.isfinite(a)
    with np.errstate(invalid="ignore"):
        best = np.min(np.where(finite, a, np.inf), axis=axis, keepdims=True)
        rel = np.where(finite, np.exp(-0.5 * (a - best)), 0.0)
        total = rel.sum(axis=axis, keepdims=True)
        w = np.where(total > 0, rel / total, np.nan)
    return w[0] if scalar else w
