"""Trajectory evidence: each lineage's own occupancy history.

``run_trajectory(study, params, *, rng, progress=None) -> TrajectoryResult`` builds
occupancy series, fits rise-and-fall, random-walk and stasis models, projects the
chance that extant lineages fall below a quasi-extinction threshold, compares
completed histories with the noise null of Brownian excursions, and hindcasts which
reading predicts loss on the study's own data.
"""
from __future__ import annotations

from dataclasses import dataclass, field

import numpy as np
import pandas as pd

from ..errors import AnalogWarning
from .extinction import averaged_probability, bootstrap_probabilities, model_probabilities
from .hindcast import HINDCAST_COLUMNS, run_hindcast
from .models import FitSet, SeriesBatch, fit_models, reading_label
from .null import NULL_COLUMNS, noise_null
from .occupancy import build_occupancy
from .params import MODEL_NAMES, PARAMS, TrajectoryParams

__all__ = ["run_trajectory", "TrajectoryResult", "TrajectoryParams", "PARAMS", "MODEL_NAMES",
           "OCCUPANCY_COLUMNS", "FIT_COLUMNS", "RISK_COLUMNS", "HINDCAST_COLUMNS", "NULL_COLUMNS"]

OCCUPANCY_COLUMNS = ["taxon_id", "bin_oldest_ma", "bin_youngest_ma", "occupied", "sampled", "occupancy"]
FIT_COLUMNS = ["taxon_id", "model", "loglik", "k", "aicc", "weight"]
RISK_COLUMNS = ["taxon_id", "scientificName", "trajectory_p", "trajectory_low", "trajectory_high",
                "preferred_model", "note"]


@dataclass
class TrajectoryResult:
    """Everything the trajectory stage produced.

    Attributes
    ----------
    occupancy : DataFrame
        ``taxon_id, bin_oldest_ma, bin_youngest_ma, occupied, sampled, occupancy``, then
        ``low_sample, empirical_logit, bin_index, bin_mid_ma``. One row per taxon and bin
        from its first to its last occupied bin (extant taxa: to the youngest bin).
    fits : DataFrame
        ``taxon_id, model, loglik, k, aicc, weight``, then ``n_fitted, preferred, reading``
        and each model's parameters (``mean_logit, sd, step_sd, drift_per_myr,
        peak_age_ma, peak_logit, rise_width_myr, fall_width_myr, slope_per_myr``).
    risk : DataFrame
        Extant taxa: ``taxon_id, scientificName, trajectory_p, trajectory_low,
        trajectory_high, preferred_model, note``, then ``reading, preferred_weight,
        n_bins, current_occupancy, horizon_myr`` and ``p_<model>`` per model.
    risk_draws : DataFrame
        Index ``taxon_id`` (extant taxa with an estimate), columns ``0..B-1``:
        parametric-bootstrap draws of ``trajectory_p``.
    hindcast : DataFrame
        ``model, auc, auc_low, auc_high, brier, n_lost, n_survived`` and more.
    noise_null : DataFrame
        Per-taxon (``level='taxon'``) and dataset-level (``level='dataset'``) rows.
    skill : float
        Hindcast AUC of the model average (NaN if not computable).
    """

    occupancy: pd.DataFrame
    fits: pd.DataFrame
    risk: pd.DataFrame
    risk_draws: pd.DataFrame
    hindcast: pd.DataFrame
    noise_null: pd.DataFrame
    skill: float
    params: TrajectoryParams
    bins: pd.DataFrame = field(default_factory=pd.DataFrame)
    dropped: pd.DataFrame = field(default_factory=pd.DataFrame)
    hindcast_cases: pd.DataFrame = field(default_factory=pd.DataFrame)
    fitset: FitSet | None = None
    step_myr: float = float("nan")
    threshold_logit: float = float("nan")
    method: str = ""
    null_summary: dict = field(default_factory=dict)
    null_samples: pd.DataFrame = field(default_factory=pd.DataFrame)
    notes: list[str] = field(default_factory=list)

    def tables(self) -> dict[str, pd.DataFrame]:
        """Output file name -> table."""
        return {"occupancy.csv": self.occupancy, "trajectory_fits.csv": self.fits,
                "trajectory_risk.csv": self.risk, "hindcast.csv": self.hindcast,
                "noise_null.csv": self.noise_null}

    def summary(self) -> str:
        p = self.params
        r = self.risk
        est = r["trajectory_p"].notna()
        lines = ["Trajectory evidence",
                 f"  {self.method}",
                 f"  series: {self.occupancy['taxon_id'].nunique()} taxa over {len(self.bins)} bins; "
                 f"{int(self.bins['low_sample'].sum())} bins flagged low_sample (< {p.min_sampled} sampled units)"]
        for row in self.dropped.itertuples():
            lines.append(f"  left out: {row.count} occurrences ({row.reason})")
        if len(self.fits):
            pref = self.fits.loc[self.fits["preferred"]]
            counts = pref["reading"].value_counts()
            lines.append("  preferred readings: " + ", ".join(f"{k} {v}" for k, v in counts.items()))
        lines.append(f"  extant taxa with an estimate: {int(est.sum())} of {len(r)}; horizon {p.horizon_bins} "
                     f"bin(s) = {p.horizon_bins * self.step_myr:g} Myr of geological time; threshold occupancy "
                     f"{p.threshold_occupancy:g}. Scores are for ranking, not dated forecasts.")
        for group, stats in self.null_summary.items():
            if "symmetry" in stats:
                obs, null, pv, ks = stats["symmetry"]
                lines.append(f"  noise null ({group}): mean symmetry {obs:+.3f} vs excursions {null:+.3f} "
                             f"(p = {pv:.3g}); KS p = {ks:.3g}")
        if len(self.hindcast):
            h = self.hindcast.set_index("model")
            parts = [f"{m} {h.at[m, 'auc']:.2f}" for m in h.index if np.isfinite(h.at[m, "auc"])]
            if parts:
                lines.append("  hindcast AUC: " + ", ".join(parts) +
                             f" (lost {int(h['n_lost'].iloc[0])}, survived {int(h['n_survived'].iloc[0])})")
        lines.append(f"  skill (model-average hindcast AUC): {self.skill:.3f}" if np.isfinite(self.skill)
                     else "  skill: not computable (too few hindcast cases)")
        return "\n".join(lines)


def _logit(p: float) -> float:
    return float(np.log(p / (1.0 - p)))


def _ends_in_interval(occurrences: pd.DataFrame, intervals: pd.DataFrame, taxon_ids) -> pd.Series:
    """Catalogue interval(s) the last occurrence of each taxon overlaps ('' for none)."""
    occ = occurrences.loc[occurrences["taxon_id"].astype(str).isin(set(taxon_ids)),
                          ["taxon_id", "oldest_ma", "youngest_ma"]].copy()
    occ["taxon_id"] = occ["taxon_id"].astype(str)
    occ["mid"] = (occ["oldest_ma"] + occ["youngest_ma"]) / 2.0
    last = occ.sort_values(["taxon_id", "mid"], kind="stable").groupby("taxon_id").head(1)
    out = pd.Series("", index=pd.Index(last["taxon_id"].to_numpy(), name="taxon_id"), dtype=object)
    if intervals is None or not len(intervals) or not len(last):
        return out
    lo, hi = last["youngest_ma"].to_numpy()[:, None], last["oldest_ma"].to_numpy()[:, None]
    iv_lo = intervals["youngest_ma"].to_numpy(float)[None, :]
    iv_hi = intervals["oldest_ma"].to_numpy(float)[None, :]
    hit = (lo <= iv_hi) & (hi >= iv_lo)
    ids = np.asarray(intervals["interval_id"].astype(str))
    out[:] = [";".join(ids[row]) for row in hit]
    return out


def run_trajectory(study, params: TrajectoryParams | None = None, *, rng: np.random.Generator,
                   progress=None, engine=None) -> TrajectoryResult:
    """Run the trajectory stage on a validated study.

    Parameters
    ----------
    study : analog.study.Study
    params : TrajectoryParams, optional
        ``study.config.params('trajectory')``; defaults if omitted.
    rng : numpy.random.Generator
        The stage's random stream (age draws, subsampling, bootstrap, null, hindcast).
    progress : callable, optional
        ``progress(label, done, total)``.
    engine : {'local', 'dask'} or analog.engine.Engine, optional
        Where the age draws, bootstrap replicates and hindcast resamples run (default: in
        this process). Every engine gives the same numbers for the same ``rng``.

    Returns
    -------
    TrajectoryResult

    Notes
    -----
    Models are fitted to the empirical logit ``log((occupied + 0.5) / (sampled −
    occupied + 0.5))`` (the +0.5 continuity correction is common practice), i.e.
    logit of ``(occupied + 0.5) / (sampled + 1)``. Series run from a taxon's first to
    its last occupied bin; extant taxa's series run on to the youngest bin. All models
    are conditioned on the first observation so their AICc values use the same data.

    References
    ----------
    Foote, M. et al. (2007). Rise and fall of species occupancy in Cenozoic fossil
    mollusks. Science 318, 1131-1134.

    Liow, L. H. & Stenseth, N. C. (2007). The rise and fall of species. Proc. R. Soc. B
    274, 2745-2752.

    Lande, R. & Orzack, S. H. (1988). PNAS 85, 7418-7421; Dennis, B., Munholland, P. L. &
    Scott, J. M. (1991). Ecol. Monogr. 61, 115-143.

    Hurvich, C. M. & Tsai, C.-L. (1989). Biometrika 76, 297-307.
    """
    from ..engine import engine_scope

    with engine_scope(engine) as eng:
        return _run(study, params, rng=rng, progress=progress, engine=eng)


def _run(study, params, *, rng, progress, engine) -> TrajectoryResult:
    import warnings

    p = params if params is not None else PARAMS()
    r_occ, r_boot, r_null, r_hind = rng.spawn(4)
    total = 5

    def step(label, done):
        if progress is not None:
            progress(label, done, total)

    step("occupancy", 0)
    timescale = None
    if p.bins == "stages":
        from ..reference import load_timescale
        timescale = load_timescale()
    occ = build_occupancy(study.fossil_occurrences, study.taxa, units=p.units, cell_km=p.cell_km, bins=p.bins,
                          bin_width_ma=p.bin_width_ma, age_handling=p.age_handling, age_draws=p.age_draws,
                          quota=p.quota, subsample_reps=p.subsample_reps, min_sampled=p.min_sampled,
                          timescale=timescale, rng=r_occ, engine=engine)
    table = occ.table
    table["bin_mid_ma"] = (table["bin_oldest_ma"] + table["bin_youngest_ma"]) / 2.0
    step_myr = occ.step_myr
    for row in occ.dropped.itertuples():
        warnings.warn(f"trajectory: {row.count} fossil occurrences left out of the occupancy series "
                      f"({row.reason})", AnalogWarning, stacklevel=3)

    step("model fits", 1)
    taxa = study.taxa.assign(taxon_id=study.taxa["taxon_id"].astype(str))
    extant = pd.Series(taxa["extant"].to_numpy(bool), index=taxa["taxon_id"])
    batch = SeriesBatch.from_table(table)
    fitset = fit_models(batch, models=p.models, min_series_bins=p.min_series_bins)
    labels = reading_label(fitset)
    fits = _fits_table(fitset, labels, p.min_series_bins)

    step("extinction probability", 2)
    thr = _logit(p.threshold_occupancy)
    is_ext = extant.reindex(batch.key).fillna(False).to_numpy(bool)
    n_occupied = table.loc[table["occupied"] > 0].groupby("taxon_id").size()
    enough = n_occupied.reindex(batch.key).fillna(0).to_numpy() >= p.min_occupied_bins
    ext_idx = np.flatnonzero(is_ext & enough & (fitset.weights.sum(axis=1) > 0))
    ext_fits = FitSet(batch.take(ext_idx), {m: f.take(ext_idx) for m, f in fitset.fits.items()},
                      fitset.weights[ext_idx], fitset.models)
    probs = model_probabilities(ext_fits, threshold=thr, horizon_bins=p.horizon_bins, step_myr=step_myr)
    avg = averaged_probability(probs, ext_fits.weights)
    draws = bootstrap_probabilities(ext_fits, threshold=thr, horizon_bins=p.horizon_bins, step_myr=step_myr,
                                    n_boot=p.n_bootstrap, rng=r_boot, min_series_bins=p.min_series_bins,
                                    progress=progress, engine=engine)
    risk, risk_draws = _risk_table(taxa, table, batch, fitset, labels, ext_idx, probs, avg, draws, p, step_myr,
                                   n_occupied)
    _warn_if_threshold_above_most(risk, p)

    step("noise null", 3)
    extinct_ids = taxa.loc[~taxa["extant"].astype(bool), "taxon_id"]
    done_series = table.loc[table["taxon_id"].isin(set(extinct_ids))]
    ends_in = _ends_in_interval(study.fossil_occurrences, study.intervals, extinct_ids)
    null_table, null_summary, null_samples = noise_null(done_series, ends_in, scale=p.null_scale, n_null=p.n_null, level=p.interval_level,
                                          rng=r_null)

    step("hindcast", 4)
    hind, cases = run_hindcast(table, extant, models=p.models, lead_bins=p.hindcast_lead_bins,
                               min_series_bins=p.min_series_bins, threshold=thr, step_myr=step_myr,
                               n_boot=p.n_skill_boot, level=p.interval_level, rng=r_hind, engine=engine)
    avg_row = hind.loc[hind["model"] == "model_average", "auc"]
    skill = float(avg_row.iloc[0]) if len(avg_row) and pd.notna(avg_row.iloc[0]) else float("nan")
    step("done", 5)

    cols = OCCUPANCY_COLUMNS + ["low_sample", "empirical_logit", "bin_index", "bin_mid_ma"]
    return TrajectoryResult(
        occupancy=table[cols].reset_index(drop=True), fits=fits, risk=risk, risk_draws=risk_draws,
        hindcast=hind, noise_null=null_table, skill=skill, params=p, bins=occ.bins, dropped=occ.dropped,
        hindcast_cases=cases, fitset=fitset, step_myr=step_myr, threshold_logit=thr, method=occ.method,
        null_summary=null_summary, null_samples=null_samples)


def _warn_if_threshold_above_most(risk: pd.DataFrame, p) -> None:
    """Warn when most scored taxa already sit at or below the quasi-extinction threshold.

    Their probabilities are then all near 1, so the trajectory line hardly ranks them; this
    happens when occupancy is low everywhere (many sampling units, few per taxon).
    """
    import warnings

    scored = risk["trajectory_p"].notna()
    below = scored & (risk["current_occupancy"] <= p.threshold_occupancy)
    if not scored.any() or below.sum() < 0.5 * scored.sum():
        return
    median = float(risk.loc[scored, "current_occupancy"].median())
    warnings.warn(
        f"{int(below.sum()):,} of {int(scored.sum()):,} living taxa with a trajectory score are "
        f"already at or below the quasi-extinction threshold (occupancy {p.threshold_occupancy:g}; median "
        f"current occupancy {median:.2g}), so their scores sit near 1 and hardly rank them. Set [trajectory] "
        "threshold_occupancy below the typical occupancy, or count larger sampling units (a larger cell_km), "
        "so that the score can separate taxa.", AnalogWarning, stacklevel=3)


def _fits_table(fitset: FitSet, labels: np.ndarray, min_bins: int) -> pd.DataFrame:
    frame = fitset.to_frame()
    if not len(frame):
        return pd.DataFrame(columns=FIT_COLUMNS + ["n_fitted", "preferred", "reading"])
    pref = pd.Series(fitset.preferred, index=fitset.batch.key)
    lab = pd.Series(labels, index=fitset.batch.key)
    n = pd.Series(fitset.batch.n, index=fitset.batch.key)
    frame = frame.loc[frame["taxon_id"].map(n) >= min_bins].copy()
    frame["aicc"] = frame["aicc"].replace([np.inf, -np.inf], np.nan)
    frame["preferred"] = frame["model"].to_numpy() == frame["taxon_id"].map(pref).to_numpy()
    frame["reading"] = frame["taxon_id"].map(lab)
    rest = [c for c in frame.columns if c not in FIT_COLUMNS + ["n_fitted", "preferred", "reading"]]
    return frame[FIT_COLUMNS + ["n_fitted", "preferred", "reading"] + rest].reset_index(drop=True)


def _risk_table(taxa, table, batch, fitset, labels, ext_idx, probs, avg, draws, p, step_myr, n_occupied):
    level = p.interval_level
    ext_taxa = taxa.loc[taxa["extant"].astype(bool), ["taxon_id", "scientificName"]].reset_index(drop=True)
    keys = batch.key[ext_idx]
    est = pd.DataFrame({"taxon_id": keys, "trajectory_p": avg})
    if draws.shape[1]:
        with np.errstate(invalid="ignore"):
            lo, hi = np.nanquantile(draws, [(1 - level) / 2, 1 - (1 - level) / 2], axis=1) if len(draws) else (
                np.zeros(0), np.zeros(0))
        est["trajectory_low"], est["trajectory_high"] = lo, hi
    else:
        est["trajectory_low"] = est["trajectory_high"] = np.nan
    est["preferred_model"] = fitset.preferred[ext_idx]
    est["reading"] = labels[ext_idx]
    est["preferred_weight"] = fitset.weights[ext_idx].max(axis=1) if len(ext_idx) else np.zeros(0)
    for j, m in enumerate(fitset.models):
        est[f"p_{m}"] = probs[:, j]
    risk = ext_taxa.merge(est, on="taxon_id", how="left")
    n_bins = pd.Series(batch.n, index=batch.key)
    risk["n_bins"] = risk["taxon_id"].map(n_bins).fillna(0).astype(int)
    last = table.loc[table["empirical_logit"].notna()].groupby("taxon_id").tail(1).set_index("taxon_id")
    risk["current_occupancy"] = risk["taxon_id"].map(last["occupancy"])
    risk["last_sampled_bin_ma"] = risk["taxon_id"].map(last["bin_mid_ma"])
    risk["horizon_myr"] = p.horizon_bins * step_myr
    horizon = (f"horizon {p.horizon_bins} bin(s) = {p.horizon_bins * step_myr:g} Myr of geological time; "
               "a score for ranking, not a dated forecast")
    notes = np.where(risk["trajectory_p"].notna(), horizon, "")
    no_fossil = risk["n_bins"] == 0
    short = ~no_fossil & risk["trajectory_p"].isna()
    notes = np.where(no_fossil, "no fossil occurrences: no trajectory estimate", notes)
    notes = np.where(short, [f"series of {n} bin(s) with data, fewer than needed ({p.min_series_bins}): "
                             "no trajectory estimate" for n in risk["n_bins"]], notes)
    occ_bins = risk["taxon_id"].map(n_occupied).fillna(0).astype(int)
    sparse = ~no_fossil & risk["trajectory_p"].isna() & (occ_bins < p.min_occupied_bins)
    notes = np.where(sparse, [f"found in only {n} bin(s), fewer than needed ({p.min_occupied_bins}): "
                              "no trajectory estimate" for n in occ_bins], notes)
    stale = risk["trajectory_p"].notna() & (risk["last_sampled_bin_ma"] > step_myr)
    notes = np.where(stale, [f"{n}; last sampled bin centred at {a:g} Ma" for n, a in
                             zip(notes, risk["last_sampled_bin_ma"])], notes)
    risk["note"] = notes
    risk["preferred_model"] = risk["preferred_model"].fillna("")
    risk["reading"] = risk["reading"].fillna("")
    extra = [c for c in risk.columns if c not in RISK_COLUMNS]
    risk = risk[RISK_COLUMNS + extra]
    risk_draws = pd.DataFrame(draws, index=pd.Index(keys, name="taxon_id"), columns=range(draws.shape[1]))
    return risk, risk_draws
