"""The analog-evidence stage: fates -> selectivity -> pooling -> matching -> analog risk."""
from __future__ import annotations

import warnings
from dataclasses import dataclass, field
from typing import Callable

import numpy as np
import pandas as pd
from scipy.special import expit

from ..errors import AnalogWarning
from ..study import Study
from .._blas import one_blas_thread
from .fates import compute_fates
from .matching import match_relatives
from .params import AnalogParams
from .risk import bootstrap_risk, model_log_odds, relative_evidence, relatives_shift, shrink_to_relatives
from .selectivity import (INTERCEPT, Design, build_design, fit_intervals, leave_one_out, pool_terms,
                          warn_thin)

__all__ = ["AnalogResult", "run_analog"]

SELECTIVITY_COLUMNS = ["scope", "term", "log_odds", "se", "ci_low", "ci_high", "odds_ratio", "n_at_risk",
                       "n_lost", "method"]
POOLING_COLUMNS = ["term", "estimate", "se", "ci_low", "ci_high", "tau2", "i2", "q", "q_p", "k", "method"]
RISK_COLUMNS = ["taxon_id", "scientificName", "analog_p", "analog_low", "analog_high", "n_relatives", "note"]

RELATIVE_VULNERABILITY = ("Analog risk is a relative vulnerability: how taxa like this fared in past warming "
                          "of similar size. It is not a forecast for any date.")


@dataclass
class AnalogResult:
    """Analog evidence: what past warming intervals say about each modern taxon.

    Attributes
    ----------
    matches : DataFrame
        matches.csv: ``taxon_id, relative_id, relative_rank, similarity, shared_rank,
        trait_distance, reason``.
    selectivity : DataFrame
        selectivity.csv: ``scope, term, log_odds, se, ci_low, ci_high, odds_ratio, n_at_risk,
        n_lost, method`` then ``trait, level, unit, label, n_missing_traits, draws_fitted, flag``.
        ``scope`` is an interval_id or ``'pooled'``. Counts are averages over age draws
        (sums over intervals on pooled rows); ``flag`` marks classes too thin to estimate well.
    pooling : DataFrame
        pooling.csv: ``term, estimate, se, ci_low, ci_high, tau2, i2, q, q_p, k, method``.
    loo : DataFrame
        leave_one_out.csv: ``interval_id, auc, n_at_risk, n_lost``.
    fates : DataFrame
        fates.csv: ``interval_id, taxon_id, p_at_risk, p_lost`` (shares of age draws).
    risk : DataFrame
        analog_risk.csv: ``taxon_id, scientificName, analog_p, analog_low, analog_high,
        n_relatives, note`` then ``model_p, relatives_trials, relatives_lost``.
    risk_draws : DataFrame
        Index taxon_id (modern taxa with an estimate), columns 0..B-1: bootstrap draws.
    contributions : DataFrame
        ``taxon_id, term, log_odds_contribution``: the baseline ('intercept'), each trait
        term, and the shift from fossil relatives ('fossil relatives').
    interval_weights : DataFrame
        ``interval_id, warming_c, weight`` then ``name, used, reason``.
    skill : float
        Mean leave-one-interval-out AUC (NaN if not computable).
    notes : list of str
        Assumptions and caveats, in plain words.
    """

    matches: pd.DataFrame
    selectivity: pd.DataFrame
    pooling: pd.DataFrame
    loo: pd.DataFrame
    fates: pd.DataFrame
    risk: pd.DataFrame
    risk_draws: pd.DataFrame
    contributions: pd.DataFrame
    interval_weights: pd.DataFrame
    skill: float
    notes: list[str] = field(default_factory=list)
    params: AnalogParams | None = None

    def tables(self) -> dict[str, pd.DataFrame]:
        """Output file name -> table."""
        return {
            "matches.csv": self.matches,
            "selectivity.csv": self.selectivity,
            "pooling.csv": self.pooling,
            "leave_one_out.csv": self.loo,
            "fates.csv": self.fates,
            "analog_risk.csv": self.risk,
        }

    def summary(self) -> str:
        used = self.interval_weights[self.interval_weights["used"]]
        lines = ["Analog evidence (past warming intervals)",
                 f"  intervals used: {len(used)}"
                 + (f" ({', '.join(f'{r.interval_id} w={r.weight:.2f}' for r in used.itertuples())})"
                    if len(used) else "")]
        pooled = self.pooling[self.pooling["term"] != INTERCEPT]
        if len(pooled):
            lines.append("  pooled odds ratios of loss:")
            for r in pooled.itertuples():
                if np.isfinite(r.estimate):
                    lines.append(f"    {r.term}: {np.exp(r.estimate):.2f} "
                                 f"({np.exp(r.ci_low):.2f}-{np.exp(r.ci_high):.2f}), k={r.k}, I2={r.i2:.0%}"
                                 if np.isfinite(r.i2) else
                                 f"    {r.term}: {np.exp(r.estimate):.2f} "
                                 f"({np.exp(r.ci_low):.2f}-{np.exp(r.ci_high):.2f}), k={r.k}")
        lines.append(f"  leave-one-interval-out AUC: {self.skill:.2f}" if np.isfinite(self.skill)
                     else "  leave-one-interval-out AUC: not computable")
        n_est = int(self.risk["analog_p"].notna().sum())
        n_rel = int((self.risk["n_relatives"] > 0).sum())
        lines.append(f"  modern taxa scored: {n_est} of {len(self.risk)} ({n_rel} with fossil relatives)")
        lines += [f"  note: {n}" for n in self.notes]
        return "\n".join(lines)


def _empty(columns: list[str]) -> pd.DataFrame:
    return pd.DataFrame({c: pd.Series(dtype=float) for c in columns})


def run_analog(study: Study, params: AnalogParams | None = None, *, rng: np.random.Generator,
               progress: Callable[[str, int, int], None] | None = None) -> AnalogResult:
    """Analog evidence for every modern taxon of a study.

    Parameters
    ----------
    study : Study
        A validated study (:func:`analog.intake.load_study`).
    params : AnalogParams, optional
        The ``[analog]`` options (defaults if None).
    rng : numpy.random.Generator
        The stage's random stream (age draws, bootstrap).
    progress : callable, optional
        ``progress(label, done, total)``.

    Returns
    -------
    AnalogResult

    Notes
    -----
    1. Fates per interval and age draw (:func:`analog.analogs.fates.compute_fates`).
    2. Per interval, a Firth logistic regression of loss on the declared traits, draws
       combined with Rubin's rules (:func:`analog.analogs.selectivity.fit_intervals`).
       Taxa with a missing trait are left out of the fits and counted.
    3. Random-effects pooling of each term over intervals, each interval weighted by
       the similarity of its warming to the scenario (``analog.reference.interval_weights``);
       leave-one-interval-out AUC.
    4. Modern taxa matched to fossil relatives (:func:`analog.analogs.matching.match_relatives`).
    5. Analog risk = Beta-binomial posterior mean: prior centred on the pooled trait
       model's prediction (baseline = pooled intercept, the weighted log odds of loss of
       a reference taxon) with strength ``prior_strength``, updated with the relatives'
       losses and trials, each weighted by match similarity and interval weight.
       Bootstrap over fossil taxa gives ``analog_low``/``analog_high``.

    Counts (``n_at_risk``, ``n_lost``) are averages over age draws; on ``'pooled'`` rows
    they are sums over the intervals used (taxon-interval pairs).

    OpenBLAS is held to one thread while the stage runs (:mod:`analog._blas`): the
    fits multiply skinny matrices, where threads only wait on each other, and a threaded
    product would make the last bits of the estimates depend on the machine's core count.

    References
    ----------
    Foote, M. (2000). Origination and extinction components of taxonomic diversity: general
    problems. Paleobiology 26(S4), 74-102.
    Firth, D. (1993). Bias reduction of maximum likelihood estimates. Biometrika 80, 27-38.
    Heinze, G. & Schemper, M. (2002). A solution to the problem of separation in logistic
    regression. Statistics in Medicine 21, 2409-2419.
    Rubin, D. B. (1987). Multiple Imputation for Nonresponse in Surveys. Wiley.
    DerSimonian, R. & Laird, N. (1986). Meta-analysis in clinical trials. Controlled Clinical
    Trials 7, 177-188.
    Gower, J. C. (1971). A general coefficient of similarity and some of its properties.
    Biometrics 27, 857-871.
    """
    with one_blas_thread():
        return _run_analog(study, params, rng=rng, progress=progress)


def _run_analog(study: Study, params: AnalogParams | None, *, rng: np.random.Generator,
                progress: Callable[[str, int, int], None] | None) -> AnalogResult:
    from ..reference import interval_weights

    params = params or AnalogParams()
    alpha = 1.0 - params.ci_level
    notes: list[str] = []
    taxa = study.taxa
    intervals = study.intervals.reset_index(drop=True)
    traits = dict(study.traits)

    # --- interval weights ------------------------------------------------------------------
    w_raw = np.asarray(interval_weights(intervals["warming_c"].to_numpy(dtype=float), study.config.warming_c,
                                        scale_c=params.weight_scale_c), dtype=float)
    w_raw = np.where(np.isfinite(w_raw), w_raw, 0.0)
    weights = w_raw / w_raw.max() if w_raw.max() > 0 else w_raw

    # --- fates -------------------------------------------------------------------------------
    fd = compute_fates(taxa, study.fossil_occurrences, intervals, age_draws=params.age_draws,
                       at_risk_rule=params.at_risk_rule, drop_singletons=params.drop_singletons,
                       range_through=params.range_through, max_age_range=params.max_age_range, rng=rng)
    if progress is not None:
        progress("fates", 1, 1)
    fates_table = fd.shares()
    if fd.coarse_occurrences:
        notes.append(f"{fd.coarse_occurrences} fossil occurrences dated more coarsely than {params.max_age_range:g} "
                     f"Myr were not used for first and last appearances ({len(fd.coarse_only_taxa)} taxa known "
                     "only from such occurrences have no fates).")
    candidates = fd.at_risk.any(axis=(0, 1))
    cand_ids = fd.taxon_ids[candidates]
    by_id = taxa.set_index(taxa["taxon_id"].astype(str))
    fossil = by_id.loc[cand_ids].reset_index(drop=True)
    at_risk = fd.at_risk[:, :, candidates]
    lost = fd.lost[:, :, candidates]
    notes.append("Fates use first and last occurrences; last occurrences precede true extinction "
                 "(Signor-Lipps effect), so losses can be placed too early or missed, and singletons "
                 f"inflate losses ({'left out' if params.drop_singletons else 'kept'} here).")

    # --- design ------------------------------------------------------------------------------
    design = build_design(fossil, traits)
    for name, why in design.dropped.items():
        warnings.warn(f"trait '{name}' left out of the selectivity model: {why}.", AnalogWarning, stacklevel=2)
    X_fossil, missing_fossil = design.encode(fossil)
    complete = ~missing_fossil.any(axis=1).to_numpy() if len(design.specs) else np.ones(len(fossil), bool)

    # --- which intervals inform the model ---------------------------------------------------
    weight_table = _interval_table(intervals, weights, at_risk, lost, complete, params)
    used = np.flatnonzero(weight_table["used"].to_numpy())
    notes.append(f"Intervals are weighted by exp(-0.5 ((warming - {study.config.warming_c:g}) / "
                 f"{params.weight_scale_c:g})^2), scaled so the closest is 1; in pooling each interval's "
                 "random-effects weight 1 / (variance + tau^2) is multiplied by its similarity weight "
                 "(tau^2, Q and I^2 are from the unweighted fit).")

    # --- selectivity per interval and pooled -------------------------------------------------
    if used.size:
        fits = fit_intervals(X_fossil, complete, at_risk[:, used], lost[:, used], fd.interval_ids[used], design,
                             ci_method=params.ci_method, alpha=alpha, min_class_size=params.min_class_size,
                             profile_draws=params.profile_draws,
                             progress=progress)
        warn_thin(fits)
        n_missing = fits.n_missing
        if n_missing.max() > 0:
            notes.append(f"Taxa at risk with a missing trait are left out of the fits "
                         f"(up to {n_missing.max():.3g} per interval; column n_missing_traits).")
        pooled = pool_terms(fits.estimate, fits.variance, weights[used], method=params.pooling_method,
                            hksj=params.hksj, alpha=alpha)
        loo = leave_one_out(fits, X_fossil, complete, at_risk[:, used], lost[:, used], weights[used],
                            method=params.pooling_method, hksj=params.hksj)
        if params.ci_method == "profile" and params.age_draws > 1:
            notes.append(f"Per-interval profile intervals are computed on {params.profile_draws} age draw(s) per "
                         "interval; their distances below and above the estimate are placed around the Rubin "
                         "estimate and widened by sqrt(total / within variance) and t / z on Rubin's degrees "
                         "of freedom.")
    else:
        fits, pooled, loo = None, None, _empty(["interval_id", "auc", "n_at_risk", "n_lost"])
        warnings.warn("no warming interval has enough fossil data for the selectivity model; analog risk "
                      "is not estimated.", AnalogWarning, stacklevel=2)
    selectivity = _selectivity_table(fits, pooled, design, params) if fits is not None else _empty(
        SELECTIVITY_COLUMNS)
    pooling = _pooling_table(pooled, design) if pooled is not None else _empty(POOLING_COLUMNS)
    skill = float(np.nanmean(loo["auc"])) if loo["auc"].notna().any() else float("nan")

    # --- matching ---------------------------------------------------------------------------
    modern = taxa[taxa["extant"].astype(bool)].reset_index(drop=True)
    matches = match_relatives(modern, fossil, traits, taxonomy_weight=params.taxonomy_weight,
                              n_relatives=params.n_relatives, min_similarity=params.min_similarity)
    if progress is not None:
        progress("matching", 1, 1)

    # --- analog risk ------------------------------------------------------------------------
    risk, draws, contributions = _risk(modern, design, fossil, X_fossil, complete, at_risk, lost, weights, used,
                                       pooled, matches, params, rng, progress, notes)
    notes.append(RELATIVE_VULNERABILITY)
    return AnalogResult(matches=matches.table, selectivity=selectivity, pooling=pooling, loo=loo,
                        fates=fates_table, risk=risk, risk_draws=draws, contributions=contributions,
                        interval_weights=weight_table, skill=skill, notes=notes, params=params)


def _interval_table(intervals: pd.DataFrame, weights: np.ndarray, at_risk: np.ndarray, lost: np.ndarray,
                    complete: np.ndarray, params: AnalogParams) -> pd.DataFrame:
    """interval_id, warming_c, weight, name, used, reason (why an interval is left out), window."""
    usable = at_risk & complete[None, None, :]
    mean_risk = usable.sum(axis=2).mean(axis=0)
    any_lost = (lost & usable).sum(axis=2).max(axis=0) > 0
    any_surv = (usable & ~lost).sum(axis=2).max(axis=0) > 0
    reason = np.full(len(intervals), "", dtype=object)
    reason[weights <= 0] = "no warming estimate or zero weight"
    reason[(reason == "") & (mean_risk < params.min_at_risk)] = f"fewer than {params.min_at_risk} taxa at risk"
    reason[(reason == "") & ~any_lost] = "no taxon lost"
    reason[(reason == "") & ~any_surv] = "no taxon survived"
    skipped = [f"{intervals.at[i, 'interval_id']} ({reason[i]}, {mean_risk[i]:.3g} at risk)"
               for i in range(len(intervals)) if reason[i] and mean_risk[i] > 0]
    if skipped:
        warnings.warn("intervals left out of the selectivity model: " + "; ".join(skipped) + ".",
                      AnalogWarning, stacklevel=3)
    ids = intervals["interval_id"].astype(str)
    return pd.DataFrame({
        "interval_id": ids,
        "warming_c": intervals["warming_c"].to_numpy(dtype=float),
        "weight": weights,
        "name": intervals["name"].astype(str) if "name" in intervals else ids,
        "used": reason == "",
        "reason": pd.array(reason.astype(str), dtype="str"),
        "oldest_ma": intervals["oldest_ma"].to_numpy(dtype=float),
        "youngest_ma": intervals["youngest_ma"].to_numpy(dtype=float),
    })


def _selectivity_table(fits, pooled: pd.DataFrame, design: Design, params: AnalogParams) -> pd.DataFrame:
    ci = "profile" if params.ci_method == "profile" else "Wald"
    draws = f"Rubin over {params.age_draws} age draws" if params.age_draws > 1 else "range-midpoint ages"
    method = f"Firth logit, {ci} CI, {draws}"
    frames = []
    for i, iid in enumerate(fits.interval_ids):
        frames.append(pd.DataFrame({
            "scope": str(iid), "term": design.names,
            "log_odds": fits.estimate[i], "se": np.sqrt(fits.variance[i]),
            "ci_low": fits.low[i], "ci_high": fits.high[i],
            "n_at_risk": fits.n_at_risk[i], "n_lost": fits.n_lost[i], "method": method,
            "n_missing_traits": fits.n_missing[i], "draws_fitted": fits.draws_fitted[i].astype(int),
            "flag": [("too thin: " + fits.flags[i][t.name]) if t.name in fits.flags[i] else "" for t in design.terms],
        }))
    frames.append(pd.DataFrame({
        "scope": "pooled", "term": design.names,
        "log_odds": pooled["estimate"].to_numpy(), "se": pooled["se"].to_numpy(),
        "ci_low": pooled["ci_low"].to_numpy(), "ci_high": pooled["ci_high"].to_numpy(),
        "n_at_risk": fits.n_at_risk.sum(axis=0), "n_lost": fits.n_lost.sum(axis=0),
        "method": pooled["method"].to_numpy(), "n_missing_traits": fits.n_missing.sum(),
        "draws_fitted": 0, "flag": "",
    }))
    out = pd.concat(frames, ignore_index=True)
    out["odds_ratio"] = np.exp(out["log_odds"])
    info = pd.DataFrame({"term": design.names, "trait": [t.trait or "" for t in design.terms],
                         "level": [t.level or "" for t in design.terms], "unit": [t.unit for t in design.terms],
                         "label": [t.label for t in design.terms]})
    out = out.merge(info, on="term", how="left")
    for c in ("n_at_risk", "n_lost", "n_missing_traits"):
        out[c] = out[c].round(2)
    extra = ["trait", "level", "unit", "label", "n_missing_traits", "draws_fitted", "flag"]
    return out[SELECTIVITY_COLUMNS + extra]


def _pooling_table(pooled: pd.DataFrame, design: Design) -> pd.DataFrame:
    out = pooled.copy()
    out.insert(0, "term", design.names)
    out["odds_ratio"] = np.exp(out["estimate"])
    out["k"] = out["k"].astype(int)
    return out[POOLING_COLUMNS + ["odds_ratio"]]


def _risk(modern, design, fossil, X_fossil, complete, at_risk, lost, weights, used, pooled, matches,
          params, rng, progress, notes):
    ids = modern["taxon_id"].astype(str).to_numpy()
    n_mod = len(modern)
    base = pd.DataFrame({"taxon_id": pd.array(ids, dtype="str"),
                         "scientificName": modern["scientificName"].astype(str).to_numpy()})
    note = [[] for _ in range(n_mod)]
    for e in np.flatnonzero(matches.n_relatives == 0):
        note[e].append("no fossil relatives; trait model only")
    if pooled is None or not np.isfinite(pooled["estimate"].iloc[0]):
        base["analog_p"] = np.nan
        base["analog_low"] = np.nan
        base["analog_high"] = np.nan
        base["n_relatives"] = matches.n_relatives.astype(int)
        base["note"] = "no selectivity model (no usable warming interval); not scored"
        return (base[RISK_COLUMNS], pd.DataFrame(index=pd.Index([], name="taxon_id", dtype="str")),
                _empty(["taxon_id", "term", "log_odds_contribution"]))

    beta = pooled["estimate"].to_numpy(dtype=float)
    X_mod, missing_mod = design.encode(modern)
    in_fit = complete & at_risk[:, used].any(axis=(0, 1))
    fill = np.nanmean(np.where(in_fit[:, None], X_fossil, np.nan), axis=0) if in_fit.any() else np.zeros(len(beta))
    fill[0] = 1.0
    for name in missing_mod.columns[missing_mod.any(axis=0).to_numpy()]:
        label = design.specs[name].display
        raw = modern[name]
        for e in np.flatnonzero(missing_mod[name].to_numpy()):
            what = (f"{label} missing" if pd.isna(raw.iloc[e])
                    else f"{label} '{raw.iloc[e]}' not seen among fossil taxa")
            note[e].append(f"{what}; its average effect used")
    lp, contrib = model_log_odds(X_mod, beta, fill)
    p_model = expit(lp)
    p_risk = at_risk.mean(axis=0).astype(float)
    p_lost = lost.mean(axis=0).astype(float)
    trials, losses = relative_evidence(matches.index, matches.similarity, p_risk, p_lost, weights)
    analog_p = shrink_to_relatives(p_model, trials, losses, prior_strength=params.prior_strength)
    for e in np.flatnonzero((matches.n_relatives > 0) & (trials <= 0)):
        note[e].append("relatives never at risk in a weighted interval; trait model only")

    if params.n_bootstrap > 0:
        draws, fallback, n_warn = bootstrap_risk(
            X_fossil=X_fossil, complete=complete, at_risk=at_risk, lost=lost, used=used, weights_all=weights,
            X_modern=X_mod, fill=fill, beta_full=beta, index=matches.index, similarity=matches.similarity,
            pool_method=params.pooling_method, hksj=params.hksj, prior_strength=params.prior_strength,
            n_boot=params.n_bootstrap, rng=rng, progress=progress)
        a = 1.0 - params.ci_level
        low, high = np.quantile(draws, [a / 2, 1 - a / 2], axis=1)
        notes.append(f"analog_low/analog_high: {params.ci_level:.0%} percentile interval over "
                     f"{params.n_bootstrap} bootstrap resamples of fossil taxa (one random age draw and "
                     "Firth estimates with Wald variances per resample).")
        if fallback:
            notes.append(f"{fallback} bootstrap term estimates were not estimable and used the full-data value.")
        if n_warn:
            notes.append(f"{n_warn} numerical warnings inside the bootstrap replicates (fits or tau^2 iterations "
                         "that did not settle) were counted, not repeated.")
    else:
        draws = np.empty((n_mod, 0))
        low = high = np.full(n_mod, np.nan)

    base["analog_p"] = analog_p
    base["analog_low"] = low
    base["analog_high"] = high
    base["n_relatives"] = matches.n_relatives.astype(int)
    base["note"] = pd.array(["; ".join(n) for n in note], dtype="str")
    base["model_p"] = p_model
    base["relatives_trials"] = trials
    base["relatives_lost"] = losses
    risk_draws = pd.DataFrame(draws, index=pd.Index(ids, name="taxon_id", dtype="str"))

    shift = relatives_shift(p_model, analog_p)
    names = design.names + ["fossil relatives"]
    values = np.column_stack([contrib, shift])
    contributions = pd.DataFrame({
        "taxon_id": pd.array(np.repeat(ids, len(names)), dtype="str"),
        "term": pd.array(np.tile(names, n_mod), dtype="str"),
        "log_odds_contribution": values.ravel(),
    })
    return base, risk_draws, contributions
