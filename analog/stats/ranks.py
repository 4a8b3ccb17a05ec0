"""Agreement between two rankings: Kendall's tau-b, Spearman's rho, top-k overlap."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd
from scipy import stats

from ..errors import AnalogError

__all__ = ["RankAgreement", "rank_agreement", "top_k_overlap"]

# above this many pairs the bootstrap tau-b calls scipy per replicate instead of
# building the n x n concordance matrix (memory and O(n_boot n^2) time)
_KENDALL_MATRIX_MAX_N = 2000


@dataclass(frozen=True)
class RankAgreement:
    """Rank correlations between two scorings with bootstrap percentile intervals.

    Attributes
    ----------
    n : int
        Number of complete pairs used.
    kendall_tau_b, kendall_low, kendall_high : float
        Kendall's tau-b and its interval.
    spearman_rho, spearman_low, spearman_high : float
        Spearman's rho and its interval.
    alpha : float
        The intervals cover ``1 - alpha``.
    n_boot : int
        Bootstrap replicates drawn.
    """

    n: int
    kendall_tau_b: float
    kendall_low: float
    kendall_high: float
    spearman_rho: float
    spearman_low: float
    spearman_high: float
    alpha: float
    n_boot: int

    def to_frame(self) -> pd.DataFrame:
        """One row per statistic: ``statistic, estimate, low, high, n``."""
        return pd.DataFrame({
            "statistic": ["kendall_tau_b", "spearman_rho"],
            "estimate": [self.kendall_tau_b, self.spearman_rho],
            "low": [self.kendall_low, self.spearman_low],
            "high": [self.kendall_high, self.spearman_high],
            "n": [self.n, self.n],
        })

    def summary(self) -> str:
        """One sentence for people: both statistics with their intervals."""
        level = f"{100 * (1 - self.alpha):g}%"
        return (f"Rank agreement over {self.n} pairs ({level} bootstrap intervals, "
                f"{self.n_boot} replicates): Kendall's tau-b {self.kendall_tau_b:.3f} "
                f"[{self.kendall_low:.3f}, {self.kendall_high:.3f}], Spearman's rho "
                f"{self.spearman_rho:.3f} [{self.spearman_low:.3f}, {self.spearman_high:.3f}]")


def rank_agreement(x, y, *, n_boot=1000, rng, alpha=0.05):
    """Kendall's tau-b and Spearman's rho between two scorings, with bootstrap intervals.

    Parameters
    ----------
    x, y : array_like
        Scores of the same items under two methods. Pairs with a NaN in either
        are dropped.
    n_boot : int, default=1000
        Bootstrap replicates (0 skips the intervals, which are then NaN).
    rng : numpy.random.Generator or int
        Source of randomness (an int is used as a seed).
    alpha : float, default=0.05
        Intervals are percentile intervals covering ``1 - alpha``.

    Returns
    -------
    RankAgreement

    Notes
    -----
    Each replicate resamples pairs with replacement (the pairs bootstrap)
    and recomputes both statistics; resampling creates ties, handled by
    tau-b and by mid-ranks. Replicates in which a statistic is undefined
    (one side constant) are left out of its interval. Fewer than 2 complete
    pairs, or a constant side, give NaN.

    For up to 2000 pairs the replicates' tau-b are computed together from
    the n x n concordance matrix weighted by each replicate's resampling
    counts: with counts ``c``, the number of concordant minus discordant
    pairs is ``c' S c / 2`` and the tie counts follow from the counts summed
    within groups of equal values. Larger inputs call
    :func:`scipy.stats.kendalltau` per replicate. Spearman's rho is Pearson's
    correlation of mid-ranks, computed for all replicates at once.

    References
    ----------
    Kendall, M. G. (1945). The treatment of ties in ranking problems.
    Biometrika 33, 239-251.

    Spearman, C. (1904). The proof and measurement of association between
    two things. Am. J. Psychol. 15, 72-101.

    Efron, B. & Tibshirani, R. J. (1993). An Introduction to the Bootstrap.
    Chapman & Hall (percentile intervals, ch. 13).
    """
    x, y = _pairs(x, y, "rank_agreement")
    n_boot = _check_n_boot(n_boot, "rank_agreement")
    alpha = _check_alpha(alpha, "rank_agreement")
    rng = _generator(rng)
    n = x.size
    nan = float("nan")
    if n < 2:
        return RankAgreement(n, nan, nan, nan, nan, nan, nan, alpha, n_boot)
    # both statistics depend on ranks only; ranking also makes +-inf scores harmless
    x, y = stats.rankdata(x), stats.rankdata(y)

    tau = _tau_b_counts(x, y, np.ones((1, n)))[0] if n <= _KENDALL_MATRIX_MAX_N else \
        float(stats.kendalltau(x, y, variant="b").statistic)
    rho = _spearman_rows(x[None, :], y[None, :])[0]

    k_lo = k_hi = s_lo = s_hi = nan
    if n_boot > 0:
        idx = rng.integers(0, n, size=(n_boot, n))
        if n <= _KENDALL_MATRIX_MAX_N:
            counts = np.bincount((idx + n * np.arange(n_boot)[:, None]).ravel(),
                                 minlength=n_boot * n).reshape(n_boot, n).astype(float)
            taus = _tau_b_counts(x, y, counts)
        else:
            taus = np.array([stats.kendalltau(x[i], y[i], variant="b").statistic for i in idx])
        rhos = _spearman_rows(x[idx], y[idx])
        k_lo, k_hi = _percentile_interval(taus, alpha)
        s_lo, s_hi = _percentile_interval(rhos, alpha)
    return RankAgreement(n, float(tau), k_lo, k_hi, float(rho), s_lo, s_hi, alpha, n_boot)


def top_k_overlap(x, y, k):
    """Share of the top ``k`` items of ``x`` that are also in the top ``k`` of ``y``.

    Parameters
    ----------
    x, y : array_like
        Scores of the same items; higher means nearer the top. Pairs with a
        NaN in either are dropped.
    k : int
        Size of the top set, ``>= 1``.

    Returns
    -------
    float
        Overlap in [0, 1]; NaN when ``k`` exceeds the number of complete pairs.

    Notes
    -----
    Ties at the cut-off are shared out, not broken by position: if ``g``
    items tie at the ``k``-th value and ``r`` places remain for them, each
    counts as ``r / g`` of a member. The result is the expected overlap when
    ties are broken at random, independently in ``x`` and ``y``, so it does
    not depend on the order of the items. Because both top sets have ``k``
    members the overlap is symmetric in ``x`` and ``y``.

    References
    ----------
    Fagin, R., Kumar, R. & Sivakumar, D. (2003). Comparing top k lists.
    SIAM J. Discrete Math. 17, 134-160.
    """
    x, y = _pairs(x, y, "top_k_overlap")
    if isinstance(k, bool) or not isinstance(k, (int, np.integer)) or k < 1:
        raise AnalogError(f"The 'k' parameter of top_k_overlap must be an integer >= 1. "
                          f"Got {k!r} instead.")
    if k > x.size:
        return float("nan")
    return float(np.sum(_top_membership(x, k) * _top_membership(y, k)) / k)


def _top_membership(v, k):
    """Share of each item in the top k, ties at the cut-off shared equally."""
    cut = np.partition(v, v.size - k)[v.size - k]  # k-th largest value
    above = v > cut
    tied = v == cut
    return np.where(above, 1.0, np.where(tied, (k - above.sum()) / tied.sum(), 0.0))


def _tau_b_counts(x, y, counts):
    """Kendall's tau-b of the samples that repeat item i counts[b, i] times, per row b."""
    s = np.sign(x[:, None] - x[None, :])
    s *= np.sign(y[:, None] - y[None, :])
    num = 0.5 * np.einsum("bi,bi->b", counts @ s, counts)
    total = counts.sum(axis=1)
    n0 = total * (total - 1) / 2
    with np.errstate(invalid="ignore", divide="ignore"):
        denom = np.sqrt((n0 - _tied_pairs(x, counts)) * (n0 - _tied_pairs(y, counts)))
        return np.where(denom > 0, num / denom, np.nan)


def _tied_pairs(v, counts):
    """Pairs of draws with equal v (including repeats of one item), per row of counts."""
    order = np.argsort(v, kind="stable")
    sv = v[order]
    starts = np.flatnonzero(np.r_[True, sv[1:] != sv[:-1]])
    group = np.add.reduceat(counts[:, order], starts, axis=1)
    return 0.5 * ((group**2).sum(axis=1) - counts.sum(axis=1))


def _spearman_rows(xs, ys):
    """Spearman's rho per row: Pearson correlation of mid-ranks."""
    rx = stats.rankdata(xs, axis=1)
    ry = stats.rankdata(ys, axis=1)
    rx -= rx.mean(axis=1, keepdims=True)
    ry -= ry.mean(axis=1, keepdims=True)
    with np.errstate(invalid="ignore", divide="ignore"):
        den = np.sqrt((rx**2).sum(axis=1) * (ry**2).sum(axis=1))
        return np.where(den > 0, (rx * ry).sum(axis=1) / den, np.nan)


def _percentile_interval(values, alpha):
    finite = values[np.isfinite(values)]
    if finite.size == 0:
        return float("nan"), float("nan")
    lo, hi = np.percentile(finite, [100 * alpha / 2, 100 * (1 - alpha / 2)])
    return float(lo), float(hi)


def _pairs(x, y, caller):
    x = np.asarray(x, dtype=float).ravel()
    y = np.asarray(y, dtype=float).ravel()
    if x.size != y.size:
        raise AnalogError(f"`x` and `y` of {caller} must have the same length; "
                          f"got {x.size} and {y.size}")
    keep = ~(np.isnan(x) | np.isnan(y))
    return x[keep], y[keep]


def _check_n_boot(n_boot, caller):
    if isinstance(n_boot, bool) or not isinstance(n_boot, (int, np.integer)) or n_boot < 0:
        raise AnalogError(f"The 'n_boot' parameter of {caller} must be an integer >= 0. "
                          f"Got {n_boot!r} instead.")
    return int(n_boot)


def _check_alpha(alpha, caller):
    if not (isinstance(alpha, (int, float)) and 0 < alpha < 1):
        raise AnalogError(f"The 'alpha' parameter of {caller} must be a number in (0, 1). "
                          f"Got {alpha!r} instead.")
    return float(alpha)


def _generator(rng):
    if rng is None:
        raise AnalogError("`rng` is required: pass a numpy.random.Generator or an integer seed")
    return np.random.default_rng(rng)
