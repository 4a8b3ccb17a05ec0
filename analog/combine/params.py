"""Options of the combine stage ([combine] in study.toml)."""
from __future__ import annotations

from dataclasses import dataclass, field

from ..params import Params

__all__ = ["CombineParams", "PARAMS"]


@dataclass(frozen=True)
class CombineParams(Params):
    """How the analog and trajectory evidence are merged, tiered and compared."""

    method: str = field(default="logit", metadata={
        "choices": ("logit", "rank"),
        "doc": "'logit': order taxa by the weighted logit pool of the two probabilities; "
               "'rank': order them by the weighted mean of their percentile ranks in each line "
               "(combined_p stays the logit pool so regional sums remain in units of taxa)."})
    analog_weight: float | None = field(default=None, metadata={
        "min": 0.0, "max": 1.0,
        "doc": "Weight of the analog line (the trajectory line gets 1 - analog_weight). "
               "Unset: weights from each line's measured skill, w ∝ max(AUC - 0.5, weight_floor)."})
    weight_floor: float = field(default=0.05, metadata={
        "min": 0.001, "max": 0.5,
        "doc": "Smallest skill margin (AUC - 0.5) a line is credited with, so a line with no "
               "demonstrated skill still counts a little; NaN skill counts as no skill."})
    tier_rule: str = field(default="quantile", metadata={
        "choices": ("quantile", "threshold"),
        "doc": "'quantile': tiers cut at quantiles of combined_p among assessed taxa; "
               "'threshold': tiers cut at fixed values of combined_p."})
    tier_quantiles: tuple[float, ...] = field(default=(0.9, 0.75, 0.5), metadata={
        "doc": "Three descending quantiles of combined_p separating the tiers highest | high | "
               "moderate | lower (default: top 10 %, next 15 %, next 25 %, bottom half)."})
    tier_thresholds: tuple[float, ...] = field(default=(0.5, 0.3, 0.15), metadata={
        "doc": "Three descending values of combined_p separating the tiers (tier_rule='threshold')."})
    interval: float = field(default=0.9, metadata={
        "min": 0.5, "max": 0.999,
        "doc": "Coverage of combined_low / combined_high (central percentile interval of the draws)."})
    top_k: tuple[int, ...] = field(default=(5, 10, 20), metadata={
        "doc": "Sizes k of the top-k overlap between the analog and trajectory rankings."})
    n_boot: int = field(default=1000, metadata={
        "min": 50, "max": 100000,
        "doc": "Bootstrap resamples of taxa for the intervals of Kendall's tau-b and Spearman's rho."})
    n_disagreements: int = field(default=10, metadata={
        "min": 1, "max": 1000, "doc": "Rows of the disagreement table (largest rank differences)."})
    n_drivers: int = field(default=3, metadata={
        "min": 1, "max": 20, "doc": "Trait terms named as drivers of each taxon's analog score."})
    sensitivity_steps: int = field(default=11, metadata={
        "min": 3, "max": 101,
        "doc": "Number of analog weights, evenly from 0 to 1, in the sensitivity table."})
    sensitivity_k: int = field(default=10, metadata={
        "min": 1, "max": 10000, "doc": "Size of the top set tracked in the sensitivity table."})

    def __post_init__(self):
        for name in ("tier_quantiles", "tier_thresholds"):
            cuts = tuple(getattr(self, name))
            if len(cuts) != 3 or any(not 0.0 < c < 1.0 for c in cuts) or list(cuts) != sorted(cuts, reverse=True) \
                    or len(set(cuts)) != 3:
                raise ValueError(f"{name} must be three distinct descending numbers between 0 and 1, got {list(cuts)}")
        if not self.top_k or any(k < 1 for k in self.top_k):
            raise ValueError(f"top_k must list whole numbers >= 1, got {list(self.top_k)}")


PARAMS = CombineParams
