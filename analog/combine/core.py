"""Merge the analog and trajectory evidence into one ranking with uncertainty."""
from __future__ import annotations

import warnings
from typing import Callable

import numpy as np
import pandas as pd
from scipy.stats import rankdata

from .. import stats
from ..errors import AnalogError, AnalogWarning
from ..figures.style import TIER_NAMES
from .compare import compare_rankings, disagreement_table, sensitivity_table
from .params import PARAMS, CombineParams
from .result import RANKING_COLUMNS, CombinedResult

__all__ = ["combine_evidence", "skill_weights", "assign_tiers"]

LINES = ("analog", "trajectory")


def combine_evidence(study, analog_result, trajectory_result, params: CombineParams | None = None, *,
                     rng: np.random.Generator, progress: Callable[[str, int, int], None] | None = None
                     ) -> CombinedResult:
    """Merge the two lines of deep-time evidence into one ranking of living taxa.

    Parameters
    ----------
    study : analog.study.Study
        The validated study (``taxa`` gives the extant taxa and their names).
    analog_result : AnalogResult or None
        Needs ``risk`` (taxon_id, analog_p, analog_low, analog_high, ...), ``risk_draws``
        (index taxon_id, one column per bootstrap draw), ``contributions`` and ``skill``.
        ``None`` when the analog stage did not run.
    trajectory_result : TrajectoryResult or None
        Needs ``risk`` (taxon_id, trajectory_p, ..., preferred_model, note), ``risk_draws``, ``skill``.
    params : CombineParams, optional
        The [combine] options; defaults when omitted.
    rng : numpy.random.Generator
        Stream for the bootstrap intervals of the rank statistics.
    progress : callable, optional
        ``progress(label, done, total)``.

    Returns
    -------
    CombinedResult

    Notes
    -----
    *Weights.* Unless the user sets ``analog_weight``, each line gets
    ``w ∝ max(AUC - 0.5, weight_floor)`` where AUC is its measured skill (leave-one-interval-out
    AUC for the analog line, hindcast AUC for the trajectory line); a NaN skill counts as no
    demonstrated skill, so two NaN skills give equal weights.

    *Pooling.* ``combined_p = expit(w_a logit(analog_p) + w_t logit(trajectory_p))`` with
    ``w_a + w_t = 1`` (weighted logit pooling, the geometric mean of odds). A taxon with one line
    keeps that line's probability and draws. ``method='rank'`` orders taxa instead by the weighted
    mean of their percentile ranks in each line, which ignores the lines' different calibration;
    ``combined_p`` stays the logit pool so regional sums remain in units of taxa.

    *Uncertainty.* Draw ``i`` of the analog line is pooled with draw ``i`` of the trajectory line
    (the two bootstraps are independent, so this pairing is a random pairing);
    ``combined_low/high`` are the central ``interval`` percentiles of the pooled draws.

    *Tiers.* ``tier_rule='quantile'``: a taxon's tier is set by the share of assessed taxa ranked
    strictly above it (below ``1 - q`` for the three ``tier_quantiles``); tied taxa share a tier.
    ``tier_rule='threshold'``: ``combined_p`` is cut at ``tier_thresholds``.

    References
    ----------
    Genest, C. & Zidek, J. V. (1986). Combining probability distributions: a critique and an
    annotated bibliography. Statistical Science 1, 114-135 (logarithmic opinion pools).
    """
    params = params or PARAMS()
    if analog_result is None and trajectory_result is None:
        raise AnalogError("combine_evidence needs at least one line of evidence; both results are None")
    notes: list[str] = []
    frame = _line_frame(study, analog_result, trajectory_result)
    has = {line: frame[f"{line}_p"].notna().to_numpy() for line in LINES}
    frame["evidence"] = np.select([has["analog"] & has["trajectory"], has["analog"], has["trajectory"]],
                                  ["both", "analog only", "trajectory only"], "none")
    skill = {"analog": _skill(analog_result), "trajectory": _skill(trajectory_result)}
    weights = _weights(params, skill, analog_result, trajectory_result, notes)
    if progress:
        progress("combine", 1, 4)

    draws = _aligned_draws(frame, {"analog": analog_result, "trajectory": trajectory_result}, notes)
    assessed = frame["evidence"] != "none"
    ids = frame.index[assessed]
    a_draws = draws["analog"].loc[ids]
    t_draws = draws["trajectory"].loc[ids]
    wa, wt = weights["analog"], weights["trajectory"]
    combined = pool_pair(a_draws.to_numpy(), t_draws.to_numpy(), wa, wt)
    combined_draws = pd.DataFrame(combined, index=ids, columns=a_draws.columns)

    frame["combined_p"] = pool_pair(frame["analog_p"].to_numpy(), frame["trajectory_p"].to_numpy(), wa, wt)
    alpha = (1.0 - params.interval) / 2.0
    low = pd.Series(np.nan, index=frame.index)
    high = pd.Series(np.nan, index=frame.index)
    if len(ids) and combined.shape[1]:
        low.loc[ids], high.loc[ids] = _row_quantiles(combined, (alpha, 1.0 - alpha))
    frame["combined_low"], frame["combined_high"] = low, high
    if progress:
        progress("combine", 2, 4)

    score = ordering_score(frame, wa, wt, method=params.method)
    frame["rank_score"] = score if params.method == "rank" else np.nan
    frame["combined_rank"] = _rank_desc(score)
    frame["tier"] = assign_tiers(score, frame["combined_p"].to_numpy(), params)
    for line in LINES:
        p = frame[f"{line}_p"].to_numpy()
        frame[f"{line}_rank"] = _rank_desc(p)
        frame[f"{line}_tier"] = assign_tiers(p, p, params)
    frame = frame.reset_index()
    order = np.lexsort((frame["taxon_id"].to_numpy(), -frame["combined_p"].fillna(-1).to_numpy(),
                        frame["combined_rank"].fillna(np.inf).to_numpy()))
    frame = frame.iloc[order].reset_index(drop=True)
    for col in ("combined_rank", "analog_rank", "trajectory_rank"):
        frame[col] = frame[col].astype("Int64")
    extra = ["analog_low", "analog_high", "trajectory_low", "trajectory_high", "analog_rank",
             "trajectory_rank", "analog_tier", "trajectory_tier", "rank_score", "preferred_model"]
    rankings = frame[RANKING_COLUMNS + extra]

    comparison = compare_rankings(rankings, a_draws, t_draws, params, rng=rng)
    if progress:
        progress("combine", 3, 4)
    contributions = getattr(analog_result, "contributions", None)
    disagreements = disagreement_table(rankings, contributions, frame.set_index("taxon_id")["trajectory_note"],
                                       n=params.n_disagreements, n_drivers=params.n_drivers)
    sensitivity = sensitivity_table(rankings, weights, params, score_fn=ordering_score)
    if progress:
        progress("combine", 4, 4)
    for msg in notes:
        warnings.warn(msg, AnalogWarning, stacklevel=2)
    return CombinedResult(rankings=rankings, comparison=comparison, disagreements=disagreements,
                          sensitivity=sensitivity, draws=combined_draws, weights=weights,
                          analog_draws=a_draws, trajectory_draws=t_draws, skill=skill, params=params,
                          warnings=notes)


def _row_quantiles(values: np.ndarray, qs) -> list[np.ndarray]:
    """``np.nanquantile(values, q, axis=1)`` for each ``q``: rows without NaN in one vectorized
    ``np.quantile`` (the same numbers), only the rows with NaN one by one."""
    gaps = np.isnan(values).any(axis=1)
    out = [np.empty(values.shape[0]) for _ in qs]
    full = np.flatnonzero(~gaps)
    if len(full):
        for o, q in zip(out, np.quantile(values[full], qs, axis=1)):
            o[full] = q
    if gaps.any():
        rows = values[gaps]
        for o, q in zip(out, qs):
            o[gaps] = np.nanquantile(rows, q, axis=1)
    return out


# -- weights ------------------------------------------------------------------------------------

def skill_weights(analog_skill: float, trajectory_skill: float, *, floor: float = 0.05) -> tuple[float, float]:
    """Line weights from measured skill: ``w ∝ max(AUC - 0.5, floor)``, normalised to sum to 1.

    A NaN (or missing) skill counts as no demonstrated skill and gets ``floor``; two NaN skills
    therefore give equal weights.
    """
    margins = []
    for s in (analog_skill, trajectory_skill):
        s = np.nan if s is None else float(s)
        margins.append(floor if not np.isfinite(s) else max(s - 0.5, floor))
    total = sum(margins)
    return margins[0] / total, margins[1] / total


def _skill(result) -> float:
    if result is None:
        return np.nan
    s = getattr(result, "skill", np.nan)
    return np.nan if s is None else float(s)


def _weights(params, skill, analog_result, trajectory_result, notes) -> dict:
    if analog_result is None or trajectory_result is None:
        present = "analog" if trajectory_result is None else "trajectory"
        missing = "trajectory" if present == "analog" else "analog"
        notes.append(f"the {missing} line of evidence is missing; the ranking uses the {present} line alone")
        return {"analog": float(present == "analog"), "trajectory": float(present == "trajectory"),
                "source": "single line"}
    if params.analog_weight is not None:
        return {"analog": float(params.analog_weight), "trajectory": 1.0 - float(params.analog_weight),
                "source": "user"}
    for line in LINES:
        if not np.isfinite(skill[line]):
            notes.append(f"the {line} line has no measured skill (AUC is NaN); it was weighted as a line "
                         f"with no demonstrated skill (margin {params.weight_floor:g}); set [combine] "
                         "analog_weight to choose the weights yourself")
    wa, wt = skill_weights(skill["analog"], skill["trajectory"], floor=params.weight_floor)
    return {"analog": wa, "trajectory": wt, "source": "skill"}


# -- tables and draws ---------------------------------------------------------------------------

def _line_frame(study, analog_result, trajectory_result) -> pd.DataFrame:
    """One row per extant taxon (plus any taxon a line reports), the two lines side by side."""
    taxa = study.taxa
    ids = list(taxa.loc[taxa["extant"].astype(bool), "taxon_id"].astype(str))
    names = dict(zip(taxa["taxon_id"].astype(str), taxa["scientificName"].astype(str)))
    cols = {"analog": ["analog_p", "analog_low", "analog_high"],
            "trajectory": ["trajectory_p", "trajectory_low", "trajectory_high", "preferred_model", "note"]}
    parts = {}
    for line, result in (("analog", analog_result), ("trajectory", trajectory_result)):
        if result is None:
            parts[line] = pd.DataFrame(columns=cols[line], index=pd.Index([], name="taxon_id"))
            continue
        risk = result.risk.copy()
        risk["taxon_id"] = risk["taxon_id"].astype(str)
        if risk["taxon_id"].duplicated().any():
            dup = risk.loc[risk["taxon_id"].duplicated(), "taxon_id"].iloc[0]
            raise AnalogError(f"the {line} risk table lists taxon '{dup}' more than once")
        parts[line] = risk.set_index("taxon_id")[[c for c in cols[line] if c in risk.columns]]
        known = set(ids)
        ids += [t for t in parts[line].index if t not in known]
    ids = list(dict.fromkeys(ids))
    frame = pd.DataFrame(index=pd.Index(ids, name="taxon_id"))
    frame["scientificName"] = [names.get(t, t) for t in ids]
    a = parts["analog"].reindex(ids)
    t = parts["trajectory"].reindex(ids)
    for c in cols["analog"]:
        frame[c] = pd.to_numeric(a[c], errors="coerce").astype(float) if c in a else np.nan
    for c in cols["trajectory"][:3]:
        frame[c] = pd.to_numeric(t[c], errors="coerce").astype(float) if c in t else np.nan
    frame["preferred_model"] = t["preferred_model"].astype(object) if "preferred_model" in t else None
    frame["trajectory_note"] = t["note"].astype(object) if "note" in t else None
    return frame


def _aligned_draws(frame: pd.DataFrame, results: dict, notes: list[str]) -> dict[str, pd.DataFrame]:
    """Each line's draws reindexed to ``frame``'s taxa, cut to a common number of draws."""
    raw = {}
    for line, result in results.items():
        d = getattr(result, "risk_draws", None) if result is not None else None
        if d is None:
            d = pd.DataFrame(index=pd.Index([], name="taxon_id"))
        d = d.copy()
        d.index = d.index.astype(str)
        raw[line] = d
    sizes = {line: raw[line].shape[1] for line in LINES if results[line] is not None}
    n = min(sizes.values()) if sizes else 0
    if len(set(sizes.values())) > 1:
        notes.append(f"the two lines have different numbers of bootstrap draws ({sizes}); the first {n} "
                     "of each were paired")
    out = {}
    for line in LINES:
        d = raw[line].iloc[:, :n] if raw[line].shape[1] else pd.DataFrame(index=raw[line].index)
        values = (d.reindex(frame.index).to_numpy(dtype=float, copy=True) if d.shape[1]
                  else np.full((len(frame), n), np.nan))
        p = frame[f"{line}_p"].to_numpy()
        no_draws = ~np.isnan(p) & np.isnan(values).all(axis=1) if n else np.zeros(len(p), bool)
        if no_draws.any():
            notes.append(f"{int(no_draws.sum())} taxa have a {line} estimate but no draws; their draws were set "
                         "to the estimate (no uncertainty from that line)")
            values[no_draws] = p[no_draws, None]
        values[np.isnan(p)] = np.nan  # a line without an estimate contributes no draws
        out[line] = pd.DataFrame(values, index=frame.index, columns=pd.RangeIndex(n))
    return out


# -- pooling, ordering, tiers -------------------------------------------------------------------

def pool_pair(a, t, wa: float, wt: float) -> np.ndarray:
    """Elementwise weighted logit pool of two probability arrays; where one is NaN keep the other."""
    a = np.asarray(a, dtype=float)
    t = np.asarray(t, dtype=float)
    out = np.where(np.isnan(a), t, a)
    both = ~np.isnan(a) & ~np.isnan(t)
    if both.any():
        stacked = np.column_stack([a[both], t[both]])
        out[both] = stats.logit_pool(stacked, np.array([wa, wt]))
    return out


def ordering_score(frame: pd.DataFrame, wa: float, wt: float, *, method: str = "logit") -> np.ndarray:
    """The score that orders taxa (higher = more vulnerable); NaN for taxa without evidence."""
    a = frame["analog_p"].to_numpy(dtype=float)
    t = frame["trajectory_p"].to_numpy(dtype=float)
    if method == "logit":
        return pool_pair(a, t, wa, wt)
    if method != "rank":
        raise AnalogError(f"`method` was {method!r} but is expected to be in {{'logit', 'rank'}}")
    # weighted mean of within-line percentile ranks (analog.stats.rank_average); a taxon with a
    # single line keeps its percentile in that line whatever the weights (even a zero weight)
    scores = np.column_stack([a, t])
    out = np.full(len(a), np.nan)
    both = ~np.isnan(scores).any(axis=1)
    if both.any():
        out[both] = stats.rank_average(scores, np.array([wa, wt]))[both]
    single = np.isnan(scores).sum(axis=1) == 1
    if single.any():
        own = np.where(np.isnan(a), _percentile(t), _percentile(a))
        out[single] = own[single]
    return out


def _percentile(x: np.ndarray) -> np.ndarray:
    """Percentile ranks within one line (analog.stats.rank_average with a single source)."""
    if np.isnan(x).all():
        return np.full(len(x), np.nan)
    return stats.rank_average(x)


def _rank_desc(score) -> np.ndarray:
    """1 = highest score; ties share the smallest rank; NaN stays NaN."""
    score = np.asarray(score, dtype=float)
    ok = ~np.isnan(score)
    out = np.full(len(score), np.nan)
    if ok.any():
        out[ok] = rankdata(-score[ok], method="min")
    return out


def assign_tiers(score, p, params: CombineParams) -> np.ndarray:
    """Tier name per taxon (``TIER_NAMES``, most to least vulnerable); None where ``score`` is NaN.

    ``tier_rule='quantile'`` places a taxon by the share of scored taxa ranked strictly above it:
    below ``1 - q1`` -> first tier, below ``1 - q2`` -> second, below ``1 - q3`` -> third, else last.
    ``tier_rule='threshold'`` cuts ``p`` at the three descending ``tier_thresholds``.
    """
    score = np.asarray(score, dtype=float)
    p = np.asarray(p, dtype=float)
    ok = ~np.isnan(score)
    out = np.full(len(score), None, dtype=object)
    if not ok.any():
        return out
    if params.tier_rule == "quantile":
        above = (rankdata(-score[ok], method="min") - 1) / ok.sum()
        idx = np.searchsorted(1.0 - np.asarray(params.tier_quantiles), above, side="right")
    else:
        idx = (p[ok, None] < np.asarray(params.tier_thresholds)[None, :]).sum(axis=1)
    out[ok] = np.asarray(TIER_NAMES, dtype=object)[idx]
    return out
