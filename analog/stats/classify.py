"""Skill of probabilistic binary predictions: ROC AUC, Brier score, bootstrap intervals."""
from __future__ import annotations

import numpy as np
from scipy import stats

from ..errors import AnalogError

__all__ = ["roc_auc", "brier_score", "bootstrap_skill"]


def roc_auc(y_true, score):
    """Area under the ROC curve, in its Mann-Whitney form.

    Parameters
    ----------
    y_true : array_like
        Outcomes coded 1 (event) and 0 (no event), or booleans. NaN marks a
        missing outcome.
    score : array_like
        Predicted scores; higher means the event is more likely. Only their
        order matters.

    Returns
    -------
    float
        The probability that a random event case scores above a random
        non-event case, ties counting 1/2. NaN when either class is absent
        after dropping pairs with a missing value.

    Notes
    -----
    Computed from mid-ranks of the pooled scores:
    ``AUC = (R_1 - n_1 (n_1 + 1) / 2) / (n_1 n_0)``, where ``R_1`` is the rank
    sum of the ``n_1`` events; this is the Mann-Whitney ``U`` of the events
    over ``n_1 n_0``.

    References
    ----------
    Mann, H. B. & Whitney, D. R. (1947). On a test of whether one of two
    random variables is stochastically larger than the other. Ann. Math.
    Stat. 18, 50-60.

    Hanley, J. A. & McNeil, B. J. (1982). The meaning and use of the area
    under a receiver operating characteristic (ROC) curve. Radiology 143,
    29-36.
    """
    y, s = _complete(y_true, score, "roc_auc")
    n1 = int(y.sum())
    n0 = y.size - n1
    if n1 == 0 or n0 == 0:
        return float("nan")
    ranks = stats.rankdata(s)
    return float((ranks[y == 1].sum() - n1 * (n1 + 1) / 2) / (n1 * n0))


def brier_score(y_true, p):
    """Mean squared difference between predicted probabilities and outcomes.

    Parameters
    ----------
    y_true : array_like
        Outcomes coded 1 (event) and 0 (no event), or booleans. NaN marks a
        missing outcome.
    p : array_like
        Predicted probabilities of the event, in [0, 1]. NaN marks a missing
        prediction.

    Returns
    -------
    float
        ``mean((p - y) ** 2)`` over complete pairs; 0 is perfect, 0.25 is
        what a constant 0.5 scores. NaN when no pair is complete.

    Raises
    ------
    AnalogError
        If a probability lies outside [0, 1].

    Notes
    -----
    Brier (1950) sums the squared error over both outcome classes, which for
    a yes/no event is twice the value returned here; the one-class form used
    here is the one in common use for binary outcomes.

    References
    ----------
    Brier, G. W. (1950). Verification of forecasts expressed in terms of
    probability. Monthly Weather Review 78, 1-3.
    """
    y, q = _complete(y_true, p, "brier_score")
    if np.any((q < 0) | (q > 1)):
        bad = q[(q < 0) | (q > 1)][0]
        raise AnalogError("`p` of brier_score must hold probabilities in [0, 1]; "
                          f"found {float(bad)!r}")
    if y.size == 0:
        return float("nan")
    return float(np.mean((q - y) ** 2))


def bootstrap_skill(y_true, score, *, n_boot=1000, rng, alpha=0.05):
    """ROC AUC and Brier score with stratified bootstrap percentile intervals.

    Parameters
    ----------
    y_true : array_like
        Outcomes coded 1/0 or booleans; NaN marks a missing outcome.
    score : array_like
        Predicted probabilities of the event. Scores outside [0, 1] are
        allowed for the AUC; the Brier entries are then NaN.
    n_boot : int, default=1000
        Bootstrap replicates (0 skips the intervals, which are then NaN).
    rng : numpy.random.Generator or int
        Source of randomness (an int is used as a seed).
    alpha : float, default=0.05
        Intervals are percentile intervals covering ``1 - alpha``.

    Returns
    -------
    dict
        ``auc, auc_low, auc_high, brier, brier_low, brier_high`` as floats.
        All NaN when either class is absent.

    Notes
    -----
    Events and non-events are resampled separately, each with replacement
    and at its own size (stratified bootstrap), so every replicate keeps
    both classes and the AUC stays defined. Replicate AUCs come from mid-ranks
    of each resample, all replicates at once.

    References
    ----------
    Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap.
    Chapman & Hall.

    Hanley, J. A. & McNeil, B. J. (1982). The meaning and use of the area
    under a receiver operating characteristic (ROC) curve. Radiology 143,
    29-36.

    Brier, G. W. (1950). Verification of forecasts expressed in terms of
    probability. Monthly Weather Review 78, 1-3.
    """
    y, s = _complete(y_true, score, "bootstrap_skill")
    if isinstance(n_boot, bool) or not isinstance(n_boot, (int, np.integer)) or n_boot < 0:
        raise AnalogError("The 'n_boot' parameter of bootstrap_skill must be an integer >= 0. "
                          f"Got {n_boot!r} instead.")
    if not (isinstance(alpha, (int, float)) and 0 < alpha < 1):
        raise AnalogError("The 'alpha' parameter of bootstrap_skill must be a number in (0, 1). "
                          f"Got {alpha!r} instead.")
    if rng is None:
        raise AnalogError("`rng` is required: pass a numpy.random.Generator or an integer seed")
    rng = np.random.default_rng(rng)

    nan = float("nan")
    out = dict(auc=nan, auc_low=nan, auc_high=nan, brier=nan, brier_low=nan, brier_high=nan)
    pos, neg = s[y == 1], s[y == 0]
    n1, n0 = pos.size, neg.size
    if n1 == 0 or n0 == 0:
        return out
    is_prob = bool(np.all((s >= 0) & (s <= 1)))
    out["auc"] = roc_auc(y, s)
    if is_prob:
        out["brier"] = brier_score(y, s)
    if n_boot == 0:
        return out

    bp = pos[rng.integers(0, n1, size=(n_boot, n1))]
    bn = neg[rng.integers(0, n0, size=(n_boot, n0))]
    ranks = stats.rankdata(np.concatenate([bp, bn], axis=1), axis=1)
    aucs = (ranks[:, :n1].sum(axis=1) - n1 * (n1 + 1) / 2) / (n1 * n0)
    lo, hi = np.percentile(aucs, [100 * alpha / 2, 100 * (1 - alpha / 2)])
    out["auc_low"], out["auc_high"] = float(lo), float(hi)
    if is_prob:
        briers = (((1 - bp) ** 2).sum(axis=1) + (bn**2).sum(axis=1)) / (n1 + n0)
        lo, hi = np.percentile(briers, [100 * alpha / 2, 100 * (1 - alpha / 2)])
        out["brier_low"], out["brier_high"] = float(lo), float(hi)
    return out


def _complete(y_true, score, caller):
    """Outcomes as 0/1 floats and scores, keeping pairs where both are present."""
    y = np.asarray(_to_float(y_true)).ravel()
    s = np.asarray(_to_float(score)).ravel()
    if y.size != s.size:
        raise AnalogError(f"`y_true` and the scores of {caller} must have the same length; "
                          f"got {y.size} and {s.size}")
    keep = ~(np.isnan(y) | np.isnan(s))
    y, s = y[keep], s[keep]
    odd = (y != 0) & (y != 1)
    if odd.any():
        raise AnalogError(f"`y_true` of {caller} must be coded 0/1 or True/False; "
                          f"found {float(y[odd][0])!r}")
    return y, s


def _to_float(values):
    """Float array with NaN for missing entries (accepts pandas nullable types)."""
    if hasattr(values, "to_numpy"):
        return values.to_numpy(dtype=float, na_value=np.nan)
    return np.asarray(values, dtype=float)
