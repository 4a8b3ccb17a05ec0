"""Selectivity: which trait classes were lost more often, per interval and pooled across intervals.

Per interval and age draw a Firth logistic regression of loss on traits; draws
combined with Rubin's rules; intervals pooled by random-effects meta-analysis
with weights from the similarity of each interval's warming to the scenario.
"""
from __future__ import annotations

import warnings
from dataclasses import dataclass, field

import numpy as np
import pandas as pd
from scipy import stats as sps

from .. import stats
from ..errors import AnalogError, AnalogWarning
from ..study import TraitSpec

__all__ = ["Term", "Design", "build_design", "fit_design", "IntervalFits", "fit_intervals",
           "pool_terms", "leave_one_out", "hksj_for"]

INTERCEPT = "intercept"


@dataclass(frozen=True)
class Term:
    """One column of the design matrix."""

    name: str            # 'intercept', 'depth_zone[slope]', 'body_size'
    trait: str | None    # trait column, None for the intercept
    kind: str            # 'intercept', 'categorical', 'ordinal', 'numeric', 'binary'
    level: str | None = None
    unit: str = ""       # what one unit of the term is: 'vs shelf', 'per step', 'per SD (2.1)', '1 vs 0'
    label: str = ""      # readable name for tables and figures


@dataclass(frozen=True)
class Design:
    """How traits become model columns; the same coding is applied to fossil and modern taxa.

    Attributes
    ----------
    terms : tuple of Term
        The intercept first.
    specs : dict of str -> TraitSpec
        Traits actually used.
    reference : dict of str -> str
        Reference class of each categorical trait.
    scale : dict of str -> (mean, sd)
        Standardization of each numeric trait.
    dropped : dict of str -> str
        Traits left out of the model, with the reason.
    """

    terms: tuple[Term, ...]
    specs: dict[str, TraitSpec]
    reference: dict[str, str] = field(default_factory=dict)
    scale: dict[str, tuple[float, float]] = field(default_factory=dict)
    dropped: dict[str, str] = field(default_factory=dict)

    @property
    def names(self) -> list[str]:
        return [t.name for t in self.terms]

    def encode(self, taxa: pd.DataFrame) -> tuple[np.ndarray, pd.DataFrame]:
        """Design matrix for ``taxa`` (NaN where a trait is missing).

        Returns
        -------
        X : ndarray, shape (n, p)
            Intercept column of ones first.
        missing : DataFrame of bool, shape (n, n_traits)
            Which used traits are missing (or hold a class never seen among fossil taxa).
        """
        n = len(taxa)
        cols = []
        missing = {}
        for term in self.terms:
            if term.kind == "intercept":
                cols.append(np.ones(n))
                continue
            raw = taxa[term.trait]
            if term.kind == "categorical":
                values = raw.astype(object)
                known = {t.level for t in self.terms if t.trait == term.trait} | {self.reference[term.trait]}
                bad = (values.isna() | ~values.isin(known)).to_numpy()
                x = (values == term.level).to_numpy(dtype=float)
            elif term.kind == "ordinal":
                levels = list(self.specs[term.trait].levels)
                codes = pd.Categorical(raw.astype(object).where(raw.notna(), None), categories=levels).codes
                bad = codes < 0
                x = codes.astype(float)
            elif term.kind == "numeric":
                mean, sd = self.scale[term.trait]
                x = (pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float) - mean) / sd
                bad = ~np.isfinite(x)
            else:  # binary
                x = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
                bad = ~np.isfinite(x)
            x = np.where(bad, np.nan, x)
            missing[term.trait] = missing.get(term.trait, np.zeros(n, dtype=bool)) | bad
            cols.append(x)
        X = np.column_stack(cols) if cols else np.ones((n, 1))
        return X, pd.DataFrame(missing, index=taxa.index, columns=list(self.specs))


def build_design(taxa: pd.DataFrame, traits: dict[str, TraitSpec]) -> Design:
    """Coding of every declared trait, fixed from the fossil taxa ``taxa``.

    Parameters
    ----------
    taxa : DataFrame
        The fossil taxa the model is fitted to (they set reference classes and scales).
    traits : dict of str -> TraitSpec

    Returns
    -------
    Design

    Notes
    -----
    - categorical: one 0/1 column per class against a reference class (``TraitSpec.reference``,
      else the most common class among ``taxa``; ties go to the first declared or alphabetical
      class). Classes never seen among ``taxa`` get no column.
    - ordinal: one numeric column holding the level's position (0, 1, 2, ... from low to high),
      so its odds ratio is per one-step increase; this assumes equal steps on the logit scale.
    - numeric: standardized (z-score) with the mean and SD of ``taxa``; odds ratio per SD.
    - binary: the 0/1 value; odds ratio of 1 vs 0.
    Traits with no variation among ``taxa`` are left out (``Design.dropped``).
    """
    terms = [Term(INTERCEPT, None, "intercept", unit="", label="Intercept (reference taxon)")]
    specs, reference, scale, dropped = {}, {}, {}, {}
    for name, spec in traits.items():
        raw = taxa[name]
        label = spec.display
        if spec.kind == "categorical":
            values = raw.dropna().astype(str)
            counts = values.value_counts()
            if spec.levels:
                order = [lv for lv in spec.levels if lv in counts.index]
            else:
                order = sorted(counts.index)
            if len(order) < 2:
                dropped[name] = "fewer than two classes among fossil taxa"
                continue
            ref = spec.reference if spec.reference in counts.index else None
            if ref is None:
                best = counts.loc[order].max()
                ref = next(lv for lv in order if counts[lv] == best)
            reference[name] = ref
            specs[name] = spec
            for lv in order:
                if lv != ref:
                    terms.append(Term(f"{name}[{lv}]", name, "categorical", lv, f"vs {ref}",
                                      f"{label}: {lv} vs {ref}"))
        elif spec.kind == "ordinal":
            codes = pd.Categorical(raw.astype(object).where(raw.notna(), None), categories=list(spec.levels)).codes
            if np.unique(codes[codes >= 0]).size < 2:
                dropped[name] = "fewer than two levels among fossil taxa"
                continue
            specs[name] = spec
            terms.append(Term(name, name, "ordinal", None, "per step",
                              f"{label}: per step ({' < '.join(spec.levels)})"))
        elif spec.kind == "numeric":
            x = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
            x = x[np.isfinite(x)]
            sd = float(np.std(x, ddof=1)) if x.size > 1 else 0.0
            if not sd > 0:
                dropped[name] = "no variation among fossil taxa"
                continue
            specs[name] = spec
            scale[name] = (float(np.mean(x)), sd)
            terms.append(Term(name, name, "numeric", None, f"per SD ({sd:.3g})", f"{label}: per SD ({sd:.3g})"))
        elif spec.kind == "binary":
            x = pd.to_numeric(raw, errors="coerce").to_numpy(dtype=float)
            if np.unique(x[np.isfinite(x)]).size < 2:
                dropped[name] = "no variation among fossil taxa"
                continue
            specs[name] = spec
            terms.append(Term(name, name, "binary", "1", "1 vs 0", f"{label}: yes vs no"))
        else:  # intake validates kinds; guard anyway
            raise AnalogError(f"trait '{name}' has kind {spec.kind!r}; expected one of "
                              "{'categorical', 'ordinal', 'numeric', 'binary'}")
    return Design(tuple(terms), specs, reference, scale, dropped)


def _usable_columns(X: np.ndarray) -> np.ndarray:
    """Columns that vary (plus the intercept) and are not linear combinations of earlier ones."""
    varies = np.ptp(X, axis=0) > 0
    varies[0] = True
    keep = np.flatnonzero(varies)
    if np.linalg.matrix_rank(X[:, keep]) == keep.size:
        return keep
    chosen = [0]
    for j in keep[1:]:  # rare: greedy search for a full-rank subset
        if np.linalg.matrix_rank(X[:, chosen + [j]]) == len(chosen) + 1:
            chosen.append(j)
    return np.asarray(chosen)


def _fit(X: np.ndarray, y: np.ndarray, *, tol: float = 1e-8, weights: np.ndarray | None = None):
    """Firth fit on the usable columns: (kept column indices, result or None)."""
    if X.shape[0] < 2:
        return np.arange(0), None
    keep = _usable_columns(X)
    try:
        return keep, stats.firth_logit(X[:, keep], y.astype(float), tol=tol, weights=weights)
    except (AnalogError, np.linalg.LinAlgError):
        return keep, None  # not estimable here; left out of the combination


def fit_design(X: np.ndarray, y: np.ndarray, *, ci: str | None = "profile", alpha: float = 0.05,
               tol: float = 1e-8, weights: np.ndarray | None = None,
               ) -> tuple[np.ndarray, np.ndarray, np.ndarray, np.ndarray]:
    """One Firth logistic fit; columns that cannot be estimated give NaN.

    Parameters
    ----------
    X : ndarray, shape (n, p)
        Intercept first.
    y : ndarray of 0/1, shape (n,)
    ci : {'profile', 'wald', None}, default='profile'
        Interval to compute (None: estimates and variances only).
    alpha : float, default=0.05
    tol : float, default=1e-8
        Convergence tolerance of the Newton iterations (largest step, logit units).
    weights : ndarray, shape (n,), optional
        Case (frequency) weights; integer weights give the same fit as repeated rows.

    Returns
    -------
    beta, var, low, high : ndarrays, shape (p,)
        Columns without variation, or linear combinations of earlier columns, are NaN.
    """
    out = np.full((4, X.shape[1]), np.nan)
    keep, res = _fit(X, y, tol=tol, weights=weights)
    if res is not None:
        out[0, keep] = res.params
        out[1, keep] = np.asarray(res.bse) ** 2
        if ci is not None:
            out[2:, keep] = np.asarray(res.conf_int(alpha=alpha, method=ci)).T
    return tuple(out)


@dataclass
class IntervalFits:
    """Per-interval selectivity after combining age draws.

    Arrays have shape (I, p) for the intervals used (``interval_ids``) and the
    design terms.
    """

    interval_ids: np.ndarray
    terms: tuple[Term, ...]
    estimate: np.ndarray
    variance: np.ndarray
    low: np.ndarray
    high: np.ndarray
    n_at_risk: np.ndarray
    n_lost: np.ndarray
    draws_fitted: np.ndarray
    n_missing: np.ndarray          # (I,) taxa at risk left out for missing traits (mean over draws)
    flags: list[dict[str, str]]    # per interval: term name -> flag text
    draw_estimates: np.ndarray     # (D, I, p) per-draw Firth estimates
    draw_variances: np.ndarray     # (D, I, p)


def _combine_draws(est: np.ndarray, var: np.ndarray, down: float, up: float, *,
                   alpha: float, ci: str) -> tuple[float, float, float, float]:
    """Rubin's rules over draws for one coefficient (NaN draws left out).

    ``down`` and ``up`` are the mean profile distances below and above the estimate
    (used when ``ci='profile'``).
    """
    ok = np.isfinite(est) & np.isfinite(var)
    if not ok.any():
        return (np.nan,) * 4
    est, var = est[ok], var[ok]
    z = sps.norm.ppf(1 - alpha / 2)
    if est.size == 1 or (np.ptp(est) == 0 and np.ptp(var) == 0):
        # one draw, or all draws alike: no between-draw variance
        q, total, inflate = float(est[0]), float(var[0]), 1.0
        wald = (q - z * np.sqrt(total), q + z * np.sqrt(total))
    else:
        r = stats.rubin_combine(est, var)
        q, total = float(r.estimate), float(r.variance)
        wald = tuple(float(v) for v in np.asarray(r.conf_int(alpha), dtype=float).ravel()[:2])
        within = float(np.mean(var))
        df = float(r.df)
        t = sps.t.ppf(1 - alpha / 2, df) if np.isfinite(df) else z
        inflate = float(np.sqrt(total / within) * t / z) if within > 0 else 1.0
    if ci == "wald" or not (np.isfinite(down) and np.isfinite(up)):
        return q, total, wald[0], wald[1]
    return q, total, q - down * inflate, q + up * inflate


def fit_intervals(X: np.ndarray, complete: np.ndarray, at_risk: np.ndarray, lost: np.ndarray,
                  interval_ids: np.ndarray, design: Design, *, ci_method: str = "profile",
                  alpha: float = 0.05, min_class_size: int = 5, profile_draws: int = 1,
                  progress=None) -> IntervalFits:
    """Firth selectivity per interval and age draw, combined over draws.

    Parameters
    ----------
    X : ndarray, shape (T, p)
        Design matrix of the fossil taxa (NaN rows for missing traits).
    complete : bool ndarray, shape (T,)
        Taxa with every used trait known (the others are left out of the fits).
    at_risk, lost : bool ndarrays, shape (D, I, T)
    interval_ids : ndarray, shape (I,)
    design : Design
    ci_method : {'profile', 'wald'}, default='profile'
    alpha : float, default=0.05
    min_class_size : int, default=5
    profile_draws : int, default=1
        Number of distinct age draws per interval whose profile intervals are computed.
    progress : callable, optional
        ``progress(label, done, total)``.

    Returns
    -------
    IntervalFits

    Notes
    -----
    Draws with the same at-risk and lost sets share one fit. Per-draw estimates are
    combined with Rubin's rules (Rubin 1987): the point estimate is their mean and the
    variance is within + (1 + 1/m) x between. Wald intervals use Rubin's t reference
    distribution. Profile intervals (Heinze & Schemper 2002) are computed for the first
    ``profile_draws`` distinct draws (draws are exchangeable, so these are a random
    subset); their mean distances below and above the estimate are placed around the
    Rubin estimate and multiplied by sqrt(total / within variance) and by t(df) / z, so
    the interval keeps the profile's asymmetry, widens for age uncertainty like a Rubin
    interval, and reduces to the exact profile interval when the age draws agree.

    References
    ----------
    Rubin, D. B. (1987). Multiple Imputation for Nonresponse in Surveys. Wiley.
    Heinze, G. & Schemper, M. (2002). A solution to the problem of separation in logistic
    regression. Statistics in Medicine 21, 2409-2419.
    """
    D, n_int, _ = at_risk.shape
    p = X.shape[1]
    Xc = np.nan_to_num(X)
    class_cols = np.array([t.kind in ("categorical", "binary") for t in design.terms])
    parts = []
    with warnings.catch_warnings(record=True) as caught:
        warnings.simplefilter("always", AnalogWarning)
        for i in range(n_int):
            parts.append(_one_interval(Xc, complete, at_risk[:, i], lost[:, i], class_cols, design,
                                       ci_method=ci_method, alpha=alpha, min_class_size=min_class_size,
                                       profile_draws=profile_draws))
            if progress is not None:
                progress("selectivity", i + 1, n_int)
    numeric = [str(w.message) for w in caught if issubclass(w.category, AnalogWarning)]
    if numeric:
        warnings.warn(f"{len(numeric)} numerical warnings from the per-interval Firth fits, for example: "
                      f"{numeric[0]}", AnalogWarning, stacklevel=2)

    def stack(key, axis=0):
        return np.stack([part[key] for part in parts], axis=axis) if parts else np.empty((0, p))

    return IntervalFits(np.asarray(interval_ids), design.terms, stack("estimate"), stack("variance"),
                        stack("low"), stack("high"), stack("n_at_risk"), stack("n_lost"), stack("fitted"),
                        np.array([part["n_missing"] for part in parts]), [part["flags"] for part in parts],
                        stack("draw_estimates", axis=1), stack("draw_variances", axis=1))


def _one_interval(Xc, complete, at_risk, lost, class_cols, design, *, ci_method, alpha, min_class_size,
                  profile_draws) -> dict:
    """Fits of one interval over age draws; ``at_risk`` and ``lost`` have shape (D, T)."""
    D = at_risk.shape[0]
    p = Xc.shape[1]
    fits: dict = {}                      # distinct (rows, y) -> (kept columns, result)
    d_est, d_var = np.full((D, p), np.nan), np.full((D, p), np.nan)
    counts_risk, counts_lost = np.zeros((D, p)), np.zeros((D, p))
    for d in range(D):
        rows = at_risk[d] & complete
        y = lost[d][rows]
        Xi = Xc[rows]
        member = np.where(class_cols[None, :], Xi == 1, True)
        counts_risk[d] = member.sum(axis=0)
        counts_lost[d] = (member & y[:, None]).sum(axis=0)
        key = (rows.tobytes(), y.tobytes())
        if key not in fits:
            fits[key] = _fit(Xi, y)
        keep, res = fits[key]
        if res is not None:
            d_est[d, keep] = res.params
            d_var[d, keep] = np.asarray(res.bse) ** 2
    down = up = np.full(p, np.nan)
    if ci_method == "profile":
        dist = []
        for keep, res in list(fits.values())[:max(1, profile_draws)]:
            if res is None:
                continue
            lim = np.full((p, 2), np.nan)
            lim[keep] = np.asarray(res.conf_int(alpha=alpha, method="profile"))
            b = np.full(p, np.nan)
            b[keep] = res.params
            dist.append(np.column_stack([b - lim[:, 0], lim[:, 1] - b]))
        if dist:
            with warnings.catch_warnings():
                warnings.simplefilter("ignore", RuntimeWarning)  # all-NaN columns stay NaN
                mean_dist = np.nanmean(np.stack(dist), axis=0)
            down, up = mean_dist[:, 0], mean_dist[:, 1]
    combined = np.array([_combine_draws(d_est[:, j], d_var[:, j], down[j], up[j], alpha=alpha, ci=ci_method)
                         for j in range(p)])
    return {
        "estimate": combined[:, 0], "variance": combined[:, 1], "low": combined[:, 2], "high": combined[:, 3],
        "n_at_risk": counts_risk.mean(axis=0), "n_lost": counts_lost.mean(axis=0),
        "fitted": np.isfinite(d_est).sum(axis=0),
        "n_missing": float(np.mean((at_risk & ~complete[None, :]).sum(axis=1))),
        "flags": _thin_flags(design, counts_risk, counts_lost, Xc, at_risk & complete[None, :], lost,
                             min_class_size),
        "draw_estimates": d_est, "draw_variances": d_var,
    }


def _thin_flags(design: Design, counts_risk, counts_lost, Xc, rows, lost, min_class_size) -> dict[str, str]:
    """Class terms (and reference classes) too thin to estimate well in one interval."""
    flags = {}
    mean_risk, mean_lost = counts_risk.mean(axis=0), counts_lost.mean(axis=0)
    max_lost, max_surv = counts_lost.max(axis=0), (counts_risk - counts_lost).max(axis=0)
    for j, term in enumerate(design.terms):
        if term.kind not in ("categorical", "binary"):
            continue
        why = _thin_reason(mean_risk[j], mean_lost[j], max_lost[j], max_surv[j], min_class_size)
        if why:
            flags[term.name] = why
    # reference classes: every contrast of that trait leans on them
    for trait, ref in design.reference.items():
        idx = [j for j, t in enumerate(design.terms) if t.trait == trait]
        in_ref = (Xc[:, idx] == 0).all(axis=1)
        r = (rows & in_ref[None, :]).sum(axis=1)
        k = (rows & lost & in_ref[None, :]).sum(axis=1)
        why = _thin_reason(r.mean(), k.mean(), k.max(), (r - k).max(), min_class_size)
        if why:
            flags[f"{trait}[{ref}] (reference)"] = why
    return flags


def _thin_reason(mean_risk, mean_lost, max_lost, max_surv, min_class_size) -> str:
    if mean_risk < min_class_size:
        return f"{mean_risk:.3g} at risk"
    if max_lost == 0:
        return f"{mean_risk:.3g} at risk, none lost"
    if max_surv == 0:
        return f"{mean_risk:.3g} at risk, all lost"
    return ""


def hksj_for(setting: str, k: int) -> bool:
    """Whether to apply the HKSJ adjustment: {'auto', 'on', 'off'}; 'auto' = fewer than 5 intervals."""
    return setting == "on" or (setting == "auto" and k < 5)


def pool_terms(estimate: np.ndarray, variance: np.ndarray, weights: np.ndarray, *,
               method: str = "REML", hksj: str = "auto", alpha: float = 0.05,
               intervals: bool = True) -> pd.DataFrame:
    """Random-effects pooling of each term across intervals.

    Parameters
    ----------
    estimate, variance : ndarray, shape (I, p)
        Per-interval log odds and their variances (NaN = not estimated there).
    weights : ndarray, shape (I,)
        Similarity weights of the intervals, in (0, 1].
    method : {'REML', 'DL'}, default='REML'
    hksj : {'auto', 'on', 'off'}, default='auto'
    alpha : float, default=0.05
    intervals : bool, default=True
        Compute confidence limits (False: estimates and standard errors only).

    Returns
    -------
    DataFrame
        One row per term (in column order): ``estimate, se, ci_low, ci_high, tau2, i2, q,
        q_p, k, method``.

    Notes
    -----
    Per term, the between-interval variance tau^2 (and Q, its p-value and I^2) come from
    an ordinary random-effects fit of the per-interval estimates (``method``), so they
    describe heterogeneity without the weights. The pooled estimate then multiplies each
    interval's random-effects weight 1 / (v_i + tau^2) by its similarity weight w_i
    (scaled so the largest is 1): estimate = sum(w_i y_i / (v_i + tau^2)) /
    sum(w_i / (v_i + tau^2)), computed as a fixed-effect pooling of the variances
    (v_i + tau^2) / w_i. With equal weights this is the usual random-effects estimate. With
    HKSJ the same weights enter the Hartung-Knapp variance and a t law on k - 1 degrees
    of freedom is used. A term estimated in one interval only is reported as that
    interval's estimate with a normal interval.
    """
    n_int, p = estimate.shape
    w = np.asarray(weights, dtype=float)
    w = w / np.nanmax(w) if np.any(w > 0) else w
    z = sps.norm.ppf(1 - alpha / 2)
    rows = []
    for j in range(p):
        ok = np.isfinite(estimate[:, j]) & np.isfinite(variance[:, j]) & (variance[:, j] > 0) & (w > 0)
        k = int(ok.sum())
        row = dict(estimate=np.nan, se=np.nan, ci_low=np.nan, ci_high=np.nan, tau2=np.nan, i2=np.nan,
                   q=np.nan, q_p=np.nan, k=k, method="")
        y, v = estimate[ok, j], variance[ok, j]
        if k == 1:
            e, se = float(y[0]), float(np.sqrt(v[0]))
            row.update(estimate=e, se=se, ci_low=e - z * se, ci_high=e + z * se,
                       method="single interval (no pooling)")
        elif k >= 2:
            adj = hksj_for(hksj, k)
            het = stats.pool_random_effects(y, v, method=method)
            res = stats.pool_random_effects(y, (v + het.tau2) / w[ok], method="FE", hksj=adj)
            row.update(estimate=float(res.estimate), se=float(res.se), tau2=float(het.tau2), i2=float(het.i2),
                       q=float(het.q), q_p=float(het.q_p),
                       method=f"random effects ({method}{', HKSJ' if adj else ''}), warming-similarity weights")
            if intervals:
                lo, hi = np.asarray(res.conf_int(alpha), dtype=float).ravel()[:2]
                row.update(ci_low=float(lo), ci_high=float(hi))
        rows.append(row)
    return pd.DataFrame(rows)


def leave_one_out(fits: IntervalFits, X: np.ndarray, complete: np.ndarray, at_risk: np.ndarray,
                  lost: np.ndarray, weights: np.ndarray, *, method: str = "REML",
                  hksj: str = "auto") -> pd.DataFrame:
    """Leave-one-interval-out check of the pooled trait model.

    For each interval the slopes are pooled from the other intervals and used to
    score the held-out interval's taxa at risk; the AUC of those scores against the
    observed losses is averaged over age draws.

    Parameters
    ----------
    fits : IntervalFits
    X, complete : design matrix (T, p) and complete-case mask (T,) of the fossil taxa
    at_risk, lost : bool arrays (D, I, T), restricted to the intervals in ``fits``
    weights : ndarray (I,)
    method, hksj : as in :func:`pool_terms`

    Returns
    -------
    DataFrame
        ``interval_id, auc, n_at_risk, n_lost`` (mean counts over draws).

    Notes
    -----
    The AUC is rank-based, so the held-out interval's own base rate (the intercept)
    does not matter. Terms not estimable without the held-out interval score 0. AUC is
    NaN where a draw has no losses or no survivors in the held-out interval.
    """
    n_int = len(fits.interval_ids)
    D = at_risk.shape[0]
    rows = []
    Xc = np.nan_to_num(X)
    with warnings.catch_warnings():
        # tau^2 iterations on the reduced sets are diagnostics here; the full pooling reports its own
        warnings.simplefilter("ignore", AnalogWarning)
        for i in range(n_int):
            rows.append(_held_out(i, fits, Xc, complete, at_risk, lost, weights, method, hksj))
    return pd.DataFrame(rows, columns=["interval_id", "auc", "n_at_risk", "n_lost"])


def _held_out(i, fits, Xc, complete, at_risk, lost, weights, method, hksj) -> dict:
    """AUC of interval ``i`` scored with slopes pooled from the other intervals."""
    n_int = len(fits.interval_ids)
    D = at_risk.shape[0]
    rows = at_risk[:, i] & complete[None, :]
    y_all = lost[:, i] & rows
    n_risk, n_lost = rows.sum(axis=1).mean(), y_all.sum(axis=1).mean()
    others = np.arange(n_int) != i
    aucs = []
    if others.any():
        pooled = pool_terms(fits.estimate[others], fits.variance[others], weights[others], method=method,
                            hksj=hksj, intervals=False)
        beta = np.nan_to_num(pooled["estimate"].to_numpy(dtype=float))
        beta[0] = 0.0  # rank-based AUC: the intercept plays no part
        score = Xc @ beta
        for d in range(D):
            y = y_all[d][rows[d]]
            if 0 < y.sum() < y.size:
                aucs.append(float(stats.roc_auc(y.astype(int), score[rows[d]])))
    return dict(interval_id=str(fits.interval_ids[i]), auc=float(np.mean(aucs)) if aucs else np.nan,
                n_at_risk=float(n_risk), n_lost=float(n_lost))


def warn_thin(fits: IntervalFits, *, stacklevel: int = 3) -> None:
    """One AnalogWarning per interval that has classes too thin to estimate."""
    for iid, flags in zip(fits.interval_ids, fits.flags):
        if flags:
            listed = "; ".join(f"{k} ({v})" for k, v in flags.items())
            warnings.warn(f"interval '{iid}': trait classes too thin to estimate well: {listed}. "
                          "Firth estimates are kept (finite) but their intervals are wide.",
                          AnalogWarning, stacklevel=stacklevel)
