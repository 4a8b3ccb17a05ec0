"""Options of the analog-evidence stage: the ``[analog]`` section of study.toml."""
from __future__ import annotations

from dataclasses import dataclass, field, fields

from ..errors import AnalogError
from ..params import Params

__all__ = ["AnalogParams", "PARAMS"]


@dataclass(frozen=True)
class AnalogParams(Params):
    """Options of :func:`analog.analogs.run_analog`.

    Every option has a default; ``[analog]`` in study.toml overrides any of them.
    """

    # --- fates -----------------------------------------------------------------------------
    age_draws: int = field(default=20, metadata={
        "min": 1, "max": 1000,
        "doc": "Number of age draws (each occurrence's age drawn uniformly within its range); "
               "fates and fits are repeated per draw and combined with Rubin's rules. "
               "1 = no age Monte Carlo: range midpoints are used."})
    at_risk_rule: str = field(default="overlap", metadata={
        "choices": ("overlap", "crossers"),
        "doc": "Which taxa count as at risk in an interval. 'overlap': the taxon's range (first to last "
               "occurrence) reaches into the interval window. 'crossers': only taxa whose first "
               "occurrence is older than the window (they cross its older boundary; Foote 2000)."})
    max_age_range: float = field(default=10.0, metadata={
        "min": 0.0, "max": 1000.0,
        "doc": "Occurrences dated more coarsely than this (oldest_ma - youngest_ma, Myr) are not used "
               "for first and last appearances: they cannot place a range end relative to a window of a "
               "few Myr. 0 keeps every occurrence. Default 10 Myr, the tool's default bin width."})
    drop_singletons: bool = field(default=True, metadata={
        "doc": "Leave out of an interval taxa whose whole observed range lies inside that window "
               "(single-occurrence and single-interval taxa); they would all count as lost."})
    range_through: bool = field(default=True, metadata={
        "doc": "Treat a taxon as present between its first and last occurrence. If false, a taxon is "
               "at risk only in windows where it has an occurrence (sampled-in-window)."})
    min_at_risk: int = field(default=10, metadata={
        "min": 2, "max": 100000,
        "doc": "Intervals with fewer taxa at risk (average over age draws, after dropping taxa with "
               "missing traits) are left out of the selectivity analysis."})
    # --- selectivity -----------------------------------------------------------------------
    min_class_size: int = field(default=5, metadata={
        "min": 1, "max": 100000,
        "doc": "Trait classes with fewer taxa at risk in an interval, or with no losses or no "
               "survivors, are flagged as too thin to estimate (the Firth estimate is still finite)."})
    ci_method: str = field(default="profile", metadata={
        "choices": ("profile", "wald"),
        "doc": "Per-interval confidence intervals: profile penalized likelihood or Wald."})
    profile_draws: int = field(default=1, metadata={
        "min": 1, "max": 1000,
        "doc": "With profile intervals: number of distinct age draws per interval whose profile "
               "intervals are computed (they are slow); their average shape is widened by Rubin's "
               "rules over all draws."})
    ci_level: float = field(default=0.95, metadata={
        "min": 0.5, "max": 0.999, "doc": "Confidence level of every interval the stage reports."})
    # --- pooling ---------------------------------------------------------------------------
    pooling_method: str = field(default="REML", metadata={
        "choices": ("REML", "DL"),
        "doc": "Estimator of the between-interval variance tau^2: REML or DerSimonian-Laird."})
    hksj: str = field(default="auto", metadata={
        "choices": ("auto", "on", "off"),
        "doc": "Hartung-Knapp-Sidik-Jonkman adjustment of the pooled interval; 'auto' = on when "
               "fewer than 5 intervals inform a term."})
    weight_scale_c: float = field(default=2.0, metadata={
        "min": 0.1, "max": 100.0,
        "doc": "Scale (deg C) of the Gaussian similarity weight exp(-0.5 * ((interval warming - "
               "scenario warming) / scale)^2) given to each interval."})
    # --- matching --------------------------------------------------------------------------
    taxonomy_weight: float = field(default=0.5, metadata={
        "min": 0.0, "max": 1.0,
        "doc": "Share of taxonomic distance in the match distance; the rest is Gower trait distance."})
    n_relatives: int = field(default=5, metadata={
        "min": 1, "max": 100, "doc": "Fossil relatives kept per modern taxon (the most similar)."})
    min_similarity: float = field(default=0.5, metadata={
        "min": 0.0, "max": 1.0, "doc": "Relatives less similar than this are not used."})
    # --- analog risk -----------------------------------------------------------------------
    prior_strength: float = field(default=10.0, metadata={
        "min": 0.0, "max": 1.0e6,
        "doc": "Weight, in taxon-interval trials, of the trait-model prediction against the "
               "relatives' observed fates (Beta prior strength)."})
    n_bootstrap: int = field(default=200, metadata={
        "min": 0, "max": 100000,
        "doc": "Bootstrap replicates over fossil taxa for the analog-risk intervals (0 = none)."})

    def __post_init__(self):
        # the same checks as Params.from_section, for options built directly in Python
        for f in fields(self):
            value, meta = getattr(self, f.name), f.metadata
            if "choices" in meta and value not in meta["choices"]:
                raise AnalogError(f"The '{f.name}' option of [analog] must be one of {list(meta['choices'])}. "
                                  f"Got {value!r} instead.")
            lo, hi = meta.get("min"), meta.get("max")
            if isinstance(value, (int, float)) and not isinstance(value, bool) and (
                    (lo is not None and value < lo) or (hi is not None and value > hi)):
                raise AnalogError(f"The '{f.name}' option of [analog] must be in [{lo}, {hi}]. "
                                  f"Got {value!r} instead.")


PARAMS = AnalogParams
