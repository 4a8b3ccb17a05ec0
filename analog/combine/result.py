"""The combined ranking as a result object."""
from __future__ import annotations

from dataclasses import dataclass, field
from typing import Any

import pandas as pd

__all__ = ["CombinedResult", "RANKING_COLUMNS", "COMPARISON_COLUMNS", "DISAGREEMENT_COLUMNS",
           "SENSITIVITY_COLUMNS"]

RANKING_COLUMNS = ["taxon_id", "scientificName", "analog_p", "trajectory_p", "combined_p", "combined_low",
                   "combined_high", "combined_rank", "tier", "evidence"]
COMPARISON_COLUMNS = ["statistic", "estimate", "low", "high", "note"]
DISAGREEMENT_COLUMNS = ["taxon_id", "scientificName", "analog_rank", "trajectory_rank", "rank_difference",
                        "higher_on", "analog_p", "trajectory_p", "analog_drivers", "trajectory_driver"]
SENSITIVITY_COLUMNS = ["analog_weight", "trajectory_weight", "k", "jaccard_vs_default", "n_shared",
                       "entered", "left", "is_default"]


@dataclass
class CombinedResult:
    """Merged ranking of living taxa with its comparison tables.

    Attributes
    ----------
    rankings : DataFrame
        One row per extant taxon (``rankings.csv``); columns ``taxon_id, scientificName, analog_p,
        trajectory_p, combined_p, combined_low, combined_high, combined_rank, tier, evidence``, then
        ``analog_low, analog_high, trajectory_low, trajectory_high, analog_rank, trajectory_rank,
        analog_tier, trajectory_tier, rank_score, preferred_model``. Taxa with neither line of
        evidence are kept at the bottom with ``evidence='none'`` and blank scores.
    comparison : DataFrame
        ``statistic, estimate, low, high, note``: Kendall's tau-b, Spearman's rho, top-k overlaps.
    disagreements : DataFrame
        Taxa whose analog and trajectory ranks differ most, with what drives each side.
    sensitivity : DataFrame
        The top-k set as the analog weight moves from 0 to 1 (Jaccard index against the default).
    draws : DataFrame
        Index ``taxon_id`` (assessed taxa), columns ``0..B-1``: draws of combined_p.
    analog_draws, trajectory_draws : DataFrame
        The aligned draws of each line (same index and columns as ``draws``; NaN where a line is
        missing for a taxon).
    weights : dict
        ``{'analog': w, 'trajectory': w, 'source': 'skill' | 'user' | 'single line'}``.
    skill : dict
        ``{'analog': AUC, 'trajectory': AUC}`` as reported by each line.
    """

    rankings: pd.DataFrame
    comparison: pd.DataFrame
    disagreements: pd.DataFrame
    sensitivity: pd.DataFrame
    draws: pd.DataFrame
    weights: dict
    analog_draws: pd.DataFrame
    trajectory_draws: pd.DataFrame
    skill: dict = field(default_factory=dict)
    params: Any = None
    warnings: list[str] = field(default_factory=list)

    def tables(self) -> dict[str, pd.DataFrame]:
        """Output tables keyed by file name."""
        return {"rankings.csv": self.rankings, "comparison.csv": self.comparison,
                "disagreements.csv": self.disagreements, "sensitivity.csv": self.sensitivity}

    def to_frame(self) -> pd.DataFrame:
        """The rankings table."""
        return self.rankings

    def assessed(self) -> pd.DataFrame:
        """Rows of the rankings with at least one line of evidence."""
        return self.rankings[self.rankings["evidence"] != "none"]

    def summary(self) -> str:
        r = self.rankings
        counts = r["evidence"].value_counts()
        w = self.weights
        lines = [
            "Combined ranking",
            f"  taxa ranked: {int((r['evidence'] != 'none').sum())} "
            f"(both lines {int(counts.get('both', 0))}, analog only {int(counts.get('analog only', 0))}, "
            f"trajectory only {int(counts.get('trajectory only', 0))}; no evidence {int(counts.get('none', 0))})",
            f"  weights: analog {w['analog']:.2f}, trajectory {w['trajectory']:.2f} (from {w['source']}; "
            f"skill AUC analog {_fmt(self.skill.get('analog'))}, trajectory {_fmt(self.skill.get('trajectory'))})",
            f"  method: {getattr(self.params, 'method', 'logit')}",
        ]
        comp = self.comparison.set_index("statistic")
        for stat in ("kendall_tau_b", "spearman_rho"):
            if stat in comp.index and pd.notna(comp.at[stat, "estimate"]):
                row = comp.loc[stat]
                lines.append(f"  {stat}: {row['estimate']:.2f} ({_fmt(row['low'])} to {_fmt(row['high'])})")
        top = r[r["tier"] == "highest"].head(5)
        if len(top):
            lines.append("  highest tier (first 5): " + ", ".join(top["scientificName"].astype(str)))
        if len(self.sensitivity):
            lowest = self.sensitivity["jaccard_vs_default"].min()
            lines.append(f"  top-{int(self.sensitivity['k'].iloc[0])} stability over analog weights 0..1: "
                         f"lowest Jaccard {lowest:.2f}")
        return "\n".join(lines)


def _fmt(x) -> str:
    return "n/a" if x is None or pd.isna(x) else f"{x:.2f}"
