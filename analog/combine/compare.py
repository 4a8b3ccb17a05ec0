"""Where the analog and trajectory rankings agree, where they disagree and why, and how stable
the top of the combined ranking is to the weights."""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy.stats import rankdata

from .. import stats
from .result import COMPARISON_COLUMNS, DISAGREEMENT_COLUMNS, SENSITIVITY_COLUMNS

__all__ = ["compare_rankings", "disagreement_table", "sensitivity_table", "paired_ranks"]


def paired_ranks(rankings: pd.DataFrame) -> pd.DataFrame:
    """Taxa with both lines and their ranks within that shared set (1 = most vulnerable, ties averaged)."""
    both = rankings[rankings["evidence"] == "both"]
    out = both[["taxon_id", "scientificName", "analog_p", "trajectory_p", "combined_rank", "tier"]].copy()
    out["analog_rank"] = rankdata(-both["analog_p"].to_numpy(dtype=float), method="average")
    out["trajectory_rank"] = rankdata(-both["trajectory_p"].to_numpy(dtype=float), method="average")
    return out.reset_index(drop=True)


def compare_rankings(rankings: pd.DataFrame, analog_draws: pd.DataFrame, trajectory_draws: pd.DataFrame,
                     params, *, rng: np.random.Generator) -> pd.DataFrame:
    """``comparison.csv``: Kendall's tau-b, Spearman's rho and top-k overlaps between the two lines.

    Notes
    -----
    Computed on taxa with both lines. The rank correlations' intervals resample taxa
    (``params.n_boot`` bootstrap resamples, percentile intervals). The top-k overlap's interval is
    the central ``params.interval`` range of the overlap recomputed on each pair of aligned draws,
    so it reflects the uncertainty of the two estimates rather than the choice of taxa.
    """
    pr = paired_ranks(rankings)
    n = len(pr)
    rows = [{"statistic": "n_taxa_both_lines", "estimate": float(n), "low": np.nan, "high": np.nan,
             "note": "taxa with both an analog and a trajectory estimate; every statistic below uses these"}]
    x = pr["analog_p"].to_numpy(dtype=float)
    y = pr["trajectory_p"].to_numpy(dtype=float)
    if n >= 3:
        agree = stats.rank_agreement(x, y, n_boot=params.n_boot, rng=rng, alpha=1.0 - params.interval)
        rows += _agreement_rows(agree, params.n_boot, params.interval)
    else:
        rows += [{"statistic": s, "estimate": np.nan, "low": np.nan, "high": np.nan,
                  "note": f"not computed: {n} taxa with both lines (need at least 3)"}
                 for s in ("kendall_tau_b", "spearman_rho")]
    alpha = (1.0 - params.interval) / 2.0
    ids = pr["taxon_id"].to_numpy()
    a_d = analog_draws.reindex(ids).to_numpy(dtype=float)
    t_d = trajectory_draws.reindex(ids).to_numpy(dtype=float)
    for k in params.top_k:
        if k > n:
            rows.append({"statistic": f"top_{k}_overlap", "estimate": np.nan, "low": np.nan, "high": np.nan,
                         "note": f"not computed: k={k} exceeds the {n} taxa with both lines"})
            continue
        est = float(stats.top_k_overlap(x, y, k))
        per_draw = np.array([stats.top_k_overlap(a_d[:, b], t_d[:, b], k) for b in range(a_d.shape[1])
                             if not (np.isnan(a_d[:, b]).any() or np.isnan(t_d[:, b]).any())], dtype=float)
        lo, hi = (np.quantile(per_draw, [alpha, 1 - alpha]) if len(per_draw) else (np.nan, np.nan))
        rows.append({"statistic": f"top_{k}_overlap", "estimate": est, "low": float(lo), "high": float(hi),
                     "note": f"share of the {k} most vulnerable taxa by analog evidence that are also among the "
                             f"{k} most vulnerable by trajectory evidence; interval over {len(per_draw)} "
                             "paired bootstrap draws"})
    return pd.DataFrame(rows, columns=COMPARISON_COLUMNS)


def _agreement_rows(agree, n_boot: int, interval: float) -> list[dict]:
    """Rows for the :class:`analog.stats.RankAgreement` result."""
    out = []
    for stat, prefix, label in (("kendall_tau_b", "kendall", "Kendall's tau-b"),
                                ("spearman_rho", "spearman", "Spearman's rho")):
        out.append({"statistic": stat, "estimate": float(getattr(agree, stat)),
                    "low": float(getattr(agree, f"{prefix}_low")), "high": float(getattr(agree, f"{prefix}_high")),
                    "note": f"{label} between analog and trajectory probabilities; {100 * interval:g}% percentile "
                            f"interval from {n_boot} bootstrap resamples of taxa"})
    return out


def disagreement_table(rankings: pd.DataFrame, contributions: pd.DataFrame | None,
                       trajectory_note: pd.Series, *, n: int = 10, n_drivers: int = 3) -> pd.DataFrame:
    """``disagreements.csv``: taxa whose analog and trajectory ranks differ most.

    Ranks are taken within the taxa that have both lines (1 = most vulnerable, ties averaged);
    ``rank_difference = analog_rank - trajectory_rank`` (negative: the analog evidence places the
    taxon higher). ``analog_drivers`` lists the ``n_drivers`` trait terms with the largest absolute
    contribution to the taxon's analog log-odds; ``trajectory_driver`` is the preferred trajectory
    model with the stage's note.
    """
    pr = paired_ranks(rankings)
    if pr.empty:
        return pd.DataFrame(columns=DISAGREEMENT_COLUMNS + ["preferred_model", "tier"])
    pr["rank_difference"] = pr["analog_rank"] - pr["trajectory_rank"]
    pr["higher_on"] = np.select([pr["rank_difference"] < 0, pr["rank_difference"] > 0],
                                ["analog", "trajectory"], "neither")
    order = np.lexsort((pr["taxon_id"].to_numpy(), -pr["rank_difference"].abs().to_numpy()))
    top = pr.iloc[order[:n]].reset_index(drop=True)
    top = top[top["rank_difference"] != 0].reset_index(drop=True)
    top["analog_drivers"] = top["taxon_id"].map(_drivers(contributions, n_drivers)).fillna(
        "no trait contributions reported")
    model = rankings.set_index("taxon_id")["preferred_model"]
    note = trajectory_note.reindex(top["taxon_id"]).to_numpy()
    pm = model.reindex(top["taxon_id"]).to_numpy()
    top["preferred_model"] = pm
    top["trajectory_driver"] = [
        (str(m) if pd.notna(m) and str(m) else "no preferred model")
        + (f": {s}" if isinstance(s, str) and s.strip() else "") for m, s in zip(pm, note)]
    return top[DISAGREEMENT_COLUMNS + ["preferred_model", "tier"]]


def _drivers(contributions: pd.DataFrame | None, n_drivers: int) -> pd.Series:
    """taxon_id -> "term (+0.82); term (-0.40)" for the largest absolute contributions."""
    if contributions is None or len(contributions) == 0:
        return pd.Series(dtype=object)
    c = contributions[["taxon_id", "term", "log_odds_contribution"]].copy()
    c["taxon_id"] = c["taxon_id"].astype(str)
    # the intercept is common to every taxon: it does not say what sets this taxon apart
    c = c[c["log_odds_contribution"].notna() & ~c["term"].astype(str).str.lower().str.strip("()").eq("intercept")]
    c["abs"] = c["log_odds_contribution"].abs()
    c = c[c["abs"] >= 0.005]  # terms that round to +0.00 push nothing
    c = c.sort_values(["taxon_id", "abs", "term"], ascending=[True, False, True])
    c = c.groupby("taxon_id", sort=False).head(n_drivers)
    c["text"] = c["term"].astype(str) + " (" + c["log_odds_contribution"].map(lambda v: f"{v:+.2f}") + ")"
    return c.groupby("taxon_id", sort=False)["text"].agg("; ".join)


def sensitivity_table(rankings: pd.DataFrame, weights: dict, params, *, score_fn) -> pd.DataFrame:
    """``sensitivity.csv``: how the top-k set moves as the analog weight goes from 0 to 1.

    For each analog weight on an even grid (plus the weight in use) the taxa are re-scored with
    ``score_fn`` and the top ``k = min(sensitivity_k, assessed taxa)`` set is compared with the set
    under the weights in use: Jaccard index |A ∩ B| / |A ∪ B|, taxa that enter and leave (taxon_id,
    ';'-separated). Ties at the cut are broken by taxon_id.
    """
    r = rankings[rankings["evidence"] != "none"].reset_index(drop=True)
    k = min(params.sensitivity_k, len(r))
    if k == 0:
        return pd.DataFrame(columns=SENSITIVITY_COLUMNS)
    ids = r["taxon_id"].to_numpy()

    def top_set(wa):
        s = score_fn(r, wa, 1.0 - wa, method=params.method)
        order = np.lexsort((ids, -s))
        return set(ids[order[:k]])

    default_wa = float(weights["analog"])
    base = top_set(default_wa)
    grid = np.linspace(0.0, 1.0, params.sensitivity_steps)
    grid = np.unique(np.round(np.append(grid, default_wa), 6))
    rows = []
    for wa in grid:
        s = top_set(wa)
        rows.append({"analog_weight": float(wa), "trajectory_weight": float(1.0 - wa), "k": k,
                     "jaccard_vs_default": len(s & base) / len(s | base), "n_shared": len(s & base),
                     "entered": ";".join(sorted(s - base)), "left": ";".join(sorted(base - s)),
                     "is_default": bool(np.isclose(wa, round(default_wa, 6)))})
    return pd.DataFrame(rows, columns=SENSITIVITY_COLUMNS)
