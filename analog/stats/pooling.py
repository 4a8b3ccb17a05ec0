"""Combining probabilities or scores from several sources."""
from __future__ import annotations

import numpy as np
from scipy import special, stats

from ..errors import AnalogError

__all__ = ["logit_pool", "rank_average"]


def logit_pool(p, weights, *, eps=1e-6):
    """Weighted mean of probabilities on the logit scale.

    Parameters
    ----------
    p : array_like of shape (..., m)
        Probabilities from ``m`` sources along the last axis; NaN marks a
        source with no value for that row.
    weights : array_like of shape (m,) or broadcastable to ``p``
        Non-negative weights of the sources; only their ratios matter.
    eps : float, default=1e-6
        Probabilities are clipped to ``[eps, 1 - eps]`` before the logit so
        that 0 and 1 do not dominate with infinite log-odds.

    Returns
    -------
    float or ndarray of shape p.shape[:-1]
        ``expit(sum_j w_j logit(p_j) / sum_j w_j)`` over the sources present
        in each row. NaN where no source with positive weight is present.

    Raises
    ------
    AnalogError
        If a probability lies outside [0, 1], a weight is negative or not
        finite, the weights do not fit ``p``, or ``eps`` is not in [0, 0.5).

    Notes
    -----
    Missing sources are dropped row by row and the remaining weights
    renormalized, so a row with a single source returns that source's value.
    Identical inputs are returned unchanged (within ``[eps, 1 - eps]``). The
    pool equals the normalized weighted geometric mean of the odds,
    ``prod p_j^w_j / (prod p_j^w_j + prod (1 - p_j)^w_j)`` with weights
    summing to 1, the logarithmic opinion pool for a yes/no event.

    References
    ----------
    Genest, C. & Zidek, J. V. (1986). Combining probability distributions: a
    critique and an annotated bibliography. Statist. Sci. 1, 114-148.

    Satopää, V. A., Baron, J., Foster, D. P., Mellers, B. A., Tetlock, P. E.
    & Ungar, L. H. (2014). Combining multiple probability predictions using a
    simple logit model. Int. J. Forecasting 30, 344-356.
    """
    if not (isinstance(eps, (int, float)) and 0 <= eps < 0.5):
        raise AnalogError(f"The 'eps' parameter of logit_pool must be a number in [0, 0.5). "
                          f"Got {eps!r} instead.")
    p = np.asarray(p, dtype=float)
    if p.ndim == 0:
        raise AnalogError("`p` of logit_pool must have the sources along its last axis; "
                          "got a scalar")
    outside = ~np.isnan(p) & ((p < 0) | (p > 1))
    if outside.any():
        raise AnalogError("`p` of logit_pool must hold probabilities in [0, 1]; "
                          f"found {float(p[outside][0])!r}")
    w = _weights(weights, p.shape, "logit_pool")

    present = ~np.isnan(p)
    w = np.where(present, w, 0.0)
    total = w.sum(axis=-1)
    lo = special.logit(np.clip(np.where(present, p, 0.5), eps, 1 - eps))
    with np.errstate(invalid="ignore", divide="ignore"):
        out = np.where(total > 0, special.expit((w * lo).sum(axis=-1) / total), np.nan)
    return out[()] if out.ndim == 0 else out


def rank_average(scores, weights=None):
    """Weighted average of per-source percentile ranks.

    Parameters
    ----------
    scores : array_like of shape (n,) or (n, m)
        Scores of ``n`` items from ``m`` sources (columns); higher is nearer
        the top. NaN marks a missing score.
    weights : array_like of shape (m,), optional
        Non-negative source weights; equal weights by default.

    Returns
    -------
    ndarray of shape (n,)
        Average percentile rank in (0, 1) of each item over the sources that
        score it; NaN for items no source with positive weight scores.

    Notes
    -----
    Within each source the percentile rank of an item is
    ``(r - 0.5) / n_s``, with ``r`` its mid-rank among the ``n_s`` items that
    source scores (ties share the average rank). This is the mean of the
    strict and weak percentiles (``scipy.stats.percentileofscore`` with
    ``kind='mean'``), symmetric about 0.5 and never exactly 0 or 1. Missing
    scores are dropped item by item and the remaining weights renormalized.
    Only the order within each source matters, so sources on different
    scales can be combined.

    References
    ----------
    Kendall, M. G. (1948). Rank Correlation Methods. Griffin, London
    (mid-ranks for ties).

    Borda, J.-C. de (1781). Mémoire sur les élections au scrutin. Histoire de
    l'Académie Royale des Sciences, Paris (averaging of ranks).
    """
    s = np.asarray(scores, dtype=float)
    if s.ndim == 1:
        s = s[:, None]
    if s.ndim != 2:
        raise AnalogError(f"`scores` of rank_average must be 1-D or 2-D; got {s.ndim} "
                          "dimensions")
    n, m = s.shape
    w = np.ones(s.shape) if weights is None else _weights(weights, s.shape, "rank_average")
    present = ~np.isnan(s)
    if n == 0:
        return np.empty(0)
    ranks = stats.rankdata(s, axis=0, nan_policy="omit")
    pct = (ranks - 0.5) / present.sum(axis=0, keepdims=True)
    w = np.where(present, w, 0.0)
    total = w.sum(axis=1)
    with np.errstate(invalid="ignore", divide="ignore"):
        return np.where(total > 0, np.where(present, w * pct, 0.0).sum(axis=1) / total, np.nan)


def _weights(weights, shape, caller):
    w = np.asarray(weights, dtype=float)
    if w.ndim == 1 and w.size != shape[-1]:
        raise AnalogError(f"`weights` of {caller} must have one entry per source ({shape[-1]}); "
                          f"got {w.size}")
    try:
        w = np.broadcast_to(w, shape)
    except ValueError:
        raise AnalogError(f"`weights` of {caller} of shape {w.shape} do not fit the inputs of "
                          f"shape {shape}") from None
    if not np.all(np.isfinite(w)) or np.any(w < 0):
        raise AnalogError(f"`weights` of {caller} must be finite and non-negative")
    if w.size and not np.any(w > 0):
        raise AnalogError(f"`weights` of {caller} must include a positive weight; all are 0")
    return w
