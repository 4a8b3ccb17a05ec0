"""Hindcast: which reading of the occupancy histories predicts loss on this dataset?

Series whose fate is known are cut short and scored by every model:

- *lost* cases: extinct taxa, cut ``lead`` bins before their last occupied bin;
- *survived* cases: taxa still present at least ``lead + 1`` bins after a cut point
  (extant taxa, and extinct taxa well before their end), cut at one point drawn at
  random among those that leave a long enough series.

Each case is scored with each model's probability of falling below the
quasi-extinction threshold within ``lead + 1`` bins, with the model average, and
with a plain baseline (lower occupancy at the cut = higher risk). AUC and Brier
score, with bootstrap intervals over cases, say which reading separates lost from
surviving lineages better.
"""
from __future__ import annotations

import numpy as np
import pandas as pd

from .extinction import averaged_probability, model_probabilities
from .models import MODEL_K, MODEL_LABELS, SeriesBatch, fit_models

__all__ = ["hindcast_cases", "run_hindcast", "HINDCAST_COLUMNS"]

HINDCAST_COLUMNS = ["model", "auc", "auc_low", "auc_high", "brier", "n_lost", "n_survived", "brier_low",
                    "brier_high", "reading", "what_is_scored"]
BASELINE = "current_occupancy"


def hindcast_cases(series: pd.DataFrame, extant: pd.Series, *, lead_bins: int, min_bins: int,
                   rng: np.random.Generator) -> pd.DataFrame:
    """Choose the cut point of every hindcast case.

    Parameters
    ----------
    series : DataFrame
        Occupancy series rows: ``taxon_id, bin_index, occupied, empirical_logit``
        (bin 0 is the youngest).
    extant : Series
        Index ``taxon_id`` → bool.
    lead_bins : int
        Lost cases are cut this many bins before the last occupied bin.
    min_bins : int
        Observations a truncated series must keep.
    rng : numpy.random.Generator

    Returns
    -------
    DataFrame
        ``case_id, taxon_id, lost (0/1), cut_bin, n_kept``.
    """
    s = series[["taxon_id", "bin_index", "occupied", "empirical_logit"]].copy()
    s["taxon_id"] = s["taxon_id"].astype(str)
    s["is_extant"] = s["taxon_id"].map(extant).fillna(False).astype(bool)
    occupied_bins = s.loc[s["occupied"] > 0].groupby("taxon_id")["bin_index"].min()
    s["end_bin"] = s["taxon_id"].map(occupied_bins).astype(float)
    s = s.sort_values(["taxon_id", "bin_index"], ascending=[True, False], kind="stable")
    s["n_kept"] = s["empirical_logit"].notna().astype(int).groupby(s["taxon_id"]).cumsum()

    # lost: extinct taxa cut lead bins before the last occupied bin
    lost = s.loc[~s["is_extant"] & (s["bin_index"] >= s["end_bin"] + lead_bins)]
    lost = lost.groupby("taxon_id", sort=False).agg(cut_bin=("bin_index", "min"), n_kept=("n_kept", "max"))
    lost = lost.loc[(lost["n_kept"] >= min_bins)].reset_index()
    lost["lost"] = 1

    # survived: cut at an observed bin with lead + 1 bins of known survival after it
    horizon = lead_bins + 1
    alive_after = np.where(s["is_extant"], s["bin_index"] - horizon >= 0,
                           s["bin_index"] - horizon >= s["end_bin"])
    cand = s.loc[alive_after & s["empirical_logit"].notna() & (s["n_kept"] >= min_bins)].copy()
    cand["_r"] = rng.random(len(cand))
    pick = cand.sort_values(["taxon_id", "_r"], kind="stable").groupby("taxon_id", sort=False).head(1)
    surv = pick[["taxon_id", "bin_index", "n_kept"]].rename(columns={"bin_index": "cut_bin"})
    surv["lost"] = 0
    cases = pd.concat([lost, surv], ignore_index=True)[["taxon_id", "lost", "cut_bin", "n_kept"]]
    cases = cases.sort_values(["taxon_id", "lost"], kind="stable").reset_index(drop=True)
    cases.insert(0, "case_id", [f"{t}@{int(b)}" for t, b in zip(cases["taxon_id"], cases["cut_bin"])])
    cases["cut_bin"] = cases["cut_bin"].astype(np.int64)
    return cases


def run_hindcast(series: pd.DataFrame, extant: pd.Series, *, models, lead_bins: int, min_series_bins: int,
                 threshold: float, step_myr: float, n_boot: int, level: float = 0.95,
                 rng: np.random.Generator, engine=None):
    """Score truncated series of known fate with each model; AUC and Brier per model.

    Parameters
    ----------
    series : DataFrame
        Occupancy series rows with ``taxon_id, bin_index, bin_mid_ma, occupied,
        empirical_logit``.
    extant : Series
        Index ``taxon_id`` → bool.
    models : sequence of str
    lead_bins : int
    min_series_bins : int
    threshold : float
        Quasi-extinction threshold (logit).
    step_myr : float
        Myr per bin.
    n_boot : int
        Bootstrap resamples of the cases for the intervals (stratified by fate).
    level : float, default=0.95
        Coverage of the intervals.
    rng : numpy.random.Generator
    engine : {'local', 'dask'} or analog.engine.Engine, optional
        Where the bootstrap of each score runs (default: in this process); results are
        identical.

    Returns
    -------
    table : DataFrame
        :data:`HINDCAST_COLUMNS`, one row per model, the model average and the baseline.
    cases : DataFrame
        One row per case with its fate and every score.

    Notes
    -----
    Every case keeps enough observations for *every* compared model to have an AICc
    (``max k + 3`` and at least ``min_series_bins``), so all rows are scored on the
    same cases and their AUCs are comparable. The score is the probability of falling
    below the threshold within ``lead_bins + 1`` bins; the outcome is observed loss
    within that window, so the Brier score also reflects how well the threshold stands
    for loss.

    The cut points are drawn from the first of two streams spawned from ``rng``; each
    score's bootstrap has its own stream spawned from the second, so the scores can be
    resampled in parallel with the same result.
    """
    from ..engine import engine_scope

    models = tuple(models)
    need = max(min_series_bins, max(MODEL_K[m] for m in models) + 3)
    r_cases, r_skill = rng.spawn(2)
    cases = hindcast_cases(series, extant, lead_bins=lead_bins, min_bins=need, rng=r_cases)
    horizon = lead_bins + 1
    score_cols = list(models) + ["model_average", BASELINE]
    if len(cases):
        rows = cases[["case_id", "taxon_id", "cut_bin"]].merge(
            series[["taxon_id", "bin_index", "bin_mid_ma", "empirical_logit"]], on="taxon_id")
        rows = rows.loc[rows["bin_index"] >= rows["cut_bin"]].sort_values(
            ["case_id", "bin_index"], ascending=[True, False], kind="stable")
        batch = SeriesBatch.from_table(rows, key="case_id")
        order = pd.Index(batch.key).get_indexer(cases["case_id"])
        fitset = fit_models(batch, models=models, min_series_bins=need)
        probs = model_probabilities(fitset, threshold=threshold, horizon_bins=horizon, step_myr=step_myr)
        avg = averaged_probability(probs, fitset.weights)
        for j, m in enumerate(models):
            cases[m] = probs[order, j]
        cases["model_average"] = avg[order]
        cases[BASELINE] = -batch.last(batch.y)[order]
    else:
        for c in score_cols:
            cases[c] = pd.Series(dtype=float)

    y = cases["lost"].to_numpy(int)
    scores = cases[score_cols].to_numpy(float).T if len(score_cols) else np.zeros((0, len(cases)))
    chunks = list(zip(range(len(score_cols)), r_skill.spawn(len(score_cols))))
    with engine_scope(engine) as eng:
        skills = eng.map(_skill_chunk, chunks, shared=(y, scores, n_boot, 1.0 - level))
    out = []
    for col, (n_lost, n_surv, skill) in zip(score_cols, skills):
        row = {"model": col, "n_lost": n_lost, "n_survived": n_surv}
        if skill is not None:
            row.update({k: float(v) for k, v in skill.items() if k in HINDCAST_COLUMNS})
            if col == BASELINE:  # a ranking score, not a probability
                row.update({"brier": np.nan, "brier_low": np.nan, "brier_high": np.nan})
        out.append(row)
    table = pd.DataFrame(out)
    for c in HINDCAST_COLUMNS:
        if c not in table.columns:
            table[c] = np.nan
    table["reading"] = table["model"].map({**MODEL_LABELS, "model_average": "Akaike-weighted average of the models",
                                           BASELINE: "baseline: lower occupancy at the cut = higher risk"})
    table["what_is_scored"] = (
        f"cut {lead_bins} bin(s) before the last occupied bin (lost) or at a random point with "
        f">= {horizon} bin(s) of known survival after it (survived); series of >= {need} bins; "
        f"score = probability of falling below the threshold within {horizon} bin(s)")
    table.loc[table["model"] == BASELINE, "what_is_scored"] = (
        "negative logit occupancy at the cut (a ranking score, not a probability: no Brier score)")
    return table[HINDCAST_COLUMNS], cases


def _skill_chunk(chunk, shared):
    """AUC and Brier score with bootstrap intervals for one score column."""
    from ..stats import bootstrap_skill

    j, rng = chunk
    y, scores, n_boot, alpha = shared
    score = scores[j]
    ok = ~np.isnan(score)
    yy, ss = y[ok], score[ok]
    n_lost, n_surv = int(yy.sum()), int((1 - yy).sum())
    if not (n_lost and n_surv):
        return n_lost, n_surv, None
    return n_lost, n_surv, bootstrap_skill(yy, ss, n_boot=n_boot, rng=rng, alpha=alpha)
