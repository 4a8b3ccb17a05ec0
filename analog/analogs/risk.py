"""Analog risk per modern taxon: pooled trait model shrunk toward its relatives' observed fates."""
from __future__ import annotations

import warnings

import numpy as np
from scipy.special import expit, logit

from ..errors import AnalogWarning

from .selectivity import fit_design, pool_terms

__all__ = ["model_log_odds", "relative_evidence", "shrink_to_relatives", "bootstrap_risk"]


def model_log_odds(X: np.ndarray, beta: np.ndarray, fill: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """Trait-model log odds of loss and each term's contribution.

    Parameters
    ----------
    X : ndarray, shape (E, p)
        Design rows of modern taxa (intercept first; NaN where a trait is missing).
    beta : ndarray, shape (p,)
        Pooled coefficients (intercept = baseline log odds of a reference taxon).
    fill : ndarray, shape (p,)
        Value used for a missing entry: the mean of that column over the fossil taxa
        the model was fitted to, so a missing trait contributes its average effect.

    Returns
    -------
    log_odds : ndarray (E,)
    contributions : ndarray (E, p)
    """
    Xf = np.where(np.isnan(X), fill[None, :], X)
    contrib = Xf * np.nan_to_num(beta)[None, :]
    return contrib.sum(axis=1), contrib


def relative_evidence(index: np.ndarray, similarity: np.ndarray, at_risk: np.ndarray, lost: np.ndarray,
                      weights: np.ndarray, *, counts: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """Similarity-weighted trials and losses of each modern taxon's relatives.

    Parameters
    ----------
    index, similarity : ndarrays, shape (E, k)
        Kept relatives (fossil column, -1 = none) and their similarity.
    at_risk, lost : ndarrays, shape (I, F)
        Share (or 0/1 flag) of each fossil taxon at risk / lost per interval.
    weights : ndarray, shape (I,)
        Interval similarity weights (largest = 1).
    counts : ndarray, shape (F,), optional
        Times each fossil taxon appears in a bootstrap resample (default 1).

    Returns
    -------
    trials, losses : ndarrays, shape (E,)
        ``sum_r s_r c_r sum_i w_i at_risk[i, r]`` and the same with ``lost``.
    """
    n_r = weights @ at_risk
    k_r = weights @ lost
    if counts is not None:
        n_r, k_r = n_r * counts, k_r * counts
    safe = np.where(index >= 0, index, 0)
    s = np.where(index >= 0, similarity, 0.0)
    return (s * n_r[safe]).sum(axis=1), (s * k_r[safe]).sum(axis=1)


def shrink_to_relatives(p_model: np.ndarray, trials: np.ndarray, losses: np.ndarray, *,
                        prior_strength: float = 10.0) -> np.ndarray:
    """Posterior mean loss probability under a Beta prior centred on the model prediction.

    ``(m * p_model + losses) / (m + trials)`` with ``m = prior_strength``: the Beta(m p, m (1 - p))
    prior updated with the relatives' weighted losses out of weighted trials. With no
    relative evidence the model prediction is returned.
    """
    m = float(prior_strength)
    denom = m + trials
    with np.errstate(invalid="ignore", divide="ignore"):
        post = (m * p_model + losses) / denom
    return np.where(denom > 0, post, p_model)


def bootstrap_risk(*, X_fossil: np.ndarray, complete: np.ndarray, at_risk: np.ndarray, lost: np.ndarray,
                   used: np.ndarray, weights_all: np.ndarray, X_modern: np.ndarray, fill: np.ndarray,
                   beta_full: np.ndarray, index: np.ndarray, similarity: np.ndarray,
                   pool_method: str, hksj: str, prior_strength: float, n_boot: int,
                   rng: np.random.Generator, progress=None) -> tuple[np.ndarray, int, int]:
    """Bootstrap draws of analog risk, resampling fossil taxa.

    Parameters
    ----------
    X_fossil, complete : design (F, p) and complete-case mask (F,) of the candidate fossil taxa
    at_risk, lost : bool arrays (D, I_all, F) for every catalogue interval
    used : int array
        Intervals that enter the selectivity model.
    weights_all : ndarray (I_all,)
        Interval similarity weights (largest = 1).
    X_modern, fill, beta_full : modern design (E, p), fill values and full-data pooled
        coefficients (used for a term a replicate cannot estimate)
    index, similarity : kept relatives, as in :func:`relative_evidence`
    pool_method, hksj, prior_strength : as in the stage parameters
    n_boot : int
    rng : numpy.random.Generator
    progress : callable, optional

    Returns
    -------
    draws : ndarray, shape (E, n_boot)
    n_fallback : int
        Replicate-terms that could not be estimated and used the full-data value.
    n_warnings : int
        Numerical warnings raised inside the replicates (fits or pooling that did not
        settle); they are counted here instead of being repeated.

    Notes
    -----
    Each replicate resamples the fossil taxa with replacement, picks one age draw at
    random (so age uncertainty is carried), refits the Firth model per interval
    (estimates and Wald variances only, for speed), re-pools with the same method and
    weights, and recomputes the relatives' evidence with each relative counted as often
    as it was resampled.
    """
    E = X_modern.shape[0]
    Xc = np.nan_to_num(X_fossil)
    w_used = weights_all[used]
    out = np.empty((E, n_boot))
    fallback = 0
    step = max(1, n_boot // 20)
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", AnalogWarning)
        for b in range(n_boot):
            fallback += _replicate(b, out, Xc, complete, at_risk, lost, used, w_used, weights_all, X_modern, fill,
                                   beta_full, index, similarity, pool_method, hksj, prior_strength, rng)
            if progress is not None and ((b + 1) % step == 0 or b + 1 == n_boot):
                progress("bootstrap", b + 1, n_boot)
    n_warn = sum(issubclass(w.category, AnalogWarning) for w in caught)
    return out, fallback, n_warn


def _replicate(b, out, Xc, complete, at_risk, lost, used, w_used, weights_all, X_modern, fill, beta_full,
               index, similarity, pool_method, hksj, prior_strength, rng) -> int:
    """One bootstrap replicate, written into ``out[:, b]``; returns the number of fallbacks."""
    F = Xc.shape[0]
    D = at_risk.shape[0]
    idx = rng.integers(0, F, size=F)
    d = int(rng.integers(0, D)) if D > 1 else 0
    counts = np.bincount(idx, minlength=F).astype(float)
    est = np.full((used.size, Xc.shape[1]), np.nan)
    var = np.full_like(est, np.nan)
    drawn = counts > 0
    for n, i in enumerate(used):
        rows = np.flatnonzero(drawn & at_risk[d, i] & complete)
        # resampled taxa enter once with their count as a frequency weight (same fit as repeated
        # rows, fewer rows); estimates only, so a looser tolerance than the main fits
        est[n], var[n], _, _ = fit_design(Xc[rows], lost[d, i, rows], ci=None, tol=1e-6, weights=counts[rows])
    beta = pool_terms(est, var, w_used, method=pool_method, hksj=hksj,
                      intervals=False)["estimate"].to_numpy(dtype=float)
    bad = ~np.isfinite(beta)
    beta = np.where(bad, beta_full, beta)
    lp, _ = model_log_odds(X_modern, beta, fill)
    trials, losses = relative_evidence(index, similarity, at_risk[d].astype(float), lost[d].astype(float),
                                       weights_all, counts=counts)
    out[:, b] = shrink_to_relatives(expit(lp), trials, losses, prior_strength=prior_strength)
    return int(bad.sum())


def relatives_shift(p_model: np.ndarray, p_final: np.ndarray) -> np.ndarray:
    """Log-odds shift the relatives' evidence adds to the model prediction."""
    eps = 1e-12
    return logit(np.clip(p_final, eps, 1 - eps)) - logit(np.clip(p_model, eps, 1 - eps))
