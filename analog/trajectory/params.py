"""Options of the trajectory stage (the ``[trajectory]`` section of study.toml)."""
from __future__ import annotations

from dataclasses import dataclass, field

from ..params import Params

__all__ = ["TrajectoryParams", "PARAMS", "MODEL_NAMES"]

# Model names in the order they are reported.
MODEL_NAMES = ("stasis", "random_walk", "random_walk_drift", "rise_fall", "rise_fall_asymmetric")


@dataclass(frozen=True)
class TrajectoryParams(Params):
    """How occupancy series are built, modelled, projected and tested."""

    units: str = field(default="grid", metadata={
        "choices": ("grid", "locality"),
        "doc": "Sampling units counted for occupancy: equal-area grid cells ('grid') "
               "or localities by locationID ('locality')."})
    cell_km: float = field(default=100.0, metadata={
        "min": 1.0, "max": 5000.0,
        "doc": "Side of an equal-area grid cell in km (units = 'grid'); cells are squares in the "
               "EPSG:6933 equal-area projection."})
    bins: str = field(default="fixed", metadata={
        "choices": ("fixed", "stages"),
        "doc": "Time bins: fixed width anchored at 0 Ma ('fixed') or the stages of the bundled ICS "
               "time scale ('stages')."})
    bin_width_ma: float = field(default=10.0, metadata={
        "min": 0.1, "max": 100.0,
        "doc": "Width of fixed time bins in Myr (10 Myr is common practice for genus-level marine data)."})
    age_handling: str = field(default="monte_carlo", metadata={
        "choices": ("single_bin", "monte_carlo"),
        "doc": "Occurrence age ranges: keep only occurrences whose range fits in one bin ('single_bin'; the "
               "rest are counted and reported) or draw point ages uniformly within each range and average "
               "the counts over draws ('monte_carlo')."})
    age_draws: int = field(default=20, metadata={
        "min": 1, "max": 10000,
        "doc": "Number of point-age draws when age_handling = 'monte_carlo'."})
    quota: int = field(default=0, metadata={
        "min": 0, "max": 1_000_000,
        "doc": "Subsample each bin to this many sampled units, repeated subsample_reps times and averaged "
               "(0 = no subsampling). Bins with fewer sampled units are used whole."})
    subsample_reps: int = field(default=20, metadata={
        "min": 1, "max": 10000,
        "doc": "Repetitions of the subsampling when quota > 0."})
    min_sampled: int = field(default=5, metadata={
        "min": 1, "max": 1_000_000,
        "doc": "Bins with fewer sampled units than this are flagged low_sample (kept, not hidden)."})
    min_occupied_bins: int = field(default=3, metadata={
        "min": 1, "max": 1000,
        "doc": "Fewest bins in which a living taxon must actually be found before its trajectory is scored. "
               "A taxon known from one or two old records followed by empty bins says little about its own "
               "trajectory; it gets no trajectory score (its analog score still stands)."})
    min_series_bins: int = field(default=5, metadata={
        "min": 3, "max": 1000,
        "doc": "Shortest occupancy series (bins with data) that is modelled. Models with more parameters "
               "also need enough bins for AICc to exist; they are left out of shorter series."})
    models: tuple[str, ...] = field(default=MODEL_NAMES, metadata={
        "doc": f"Models compared, any of {list(MODEL_NAMES)}."})
    threshold_occupancy: float = field(default=0.02, metadata={
        "min": 1e-6, "max": 0.5,
        "doc": "Quasi-extinction threshold on the occupancy scale (converted to logit). A bin with no "
               "occupied unit has empirical logit log(0.5 / (sampled + 0.5)), which lies below the "
               "threshold only when sampled > 0.5 / threshold_occupancy - 0.5 (24 units at 0.02)."})
    horizon_bins: int = field(default=1, metadata={
        "min": 1, "max": 100,
        "doc": "Projection horizon in time bins (geological time: one bin is bin_width_ma Myr)."})
    n_bootstrap: int = field(default=200, metadata={
        "min": 0, "max": 100000,
        "doc": "Parametric-bootstrap refits per extant taxon for trajectory_low / trajectory_high "
               "(0 = no interval)."})
    interval_level: float = field(default=0.95, metadata={
        "min": 0.5, "max": 0.999,
        "doc": "Coverage of trajectory_low / trajectory_high and of the hindcast intervals."})
    null_scale: str = field(default="logit", metadata={
        "choices": ("logit", "occupancy"),
        "doc": "Scale on which completed histories are compared with the excursion null: the logit scale "
               "of the models, heights above each series' own minimum ('logit'), or occupancy with zero "
               "before the first and after the last bin ('occupancy'). Peak position does not depend on "
               "the scale; peakedness does."})
    n_null: int = field(default=2000, metadata={
        "min": 100, "max": 1_000_000,
        "doc": "Simulated Brownian excursions per series length in the noise null."})
    hindcast_lead_bins: int = field(default=1, metadata={
        "min": 0, "max": 50,
        "doc": "Hindcast cut point: this many bins before the last occupied bin of lost taxa; the score "
               "is the probability of loss within hindcast_lead_bins + 1 bins."})
    n_skill_boot: int = field(default=1000, metadata={
        "min": 0, "max": 100000,
        "doc": "Bootstrap resamples of the hindcast cases for the AUC intervals (0 = no interval)."})

    def __post_init__(self):
        bad = [m for m in self.models if m not in MODEL_NAMES]
        if bad or not self.models:
            raise ValueError(f"[trajectory] models was {list(self.models)} but each must be one of "
                             f"{list(MODEL_NAMES)} (at least one)")
        if len(set(self.models)) != len(self.models):
            raise ValueError(f"[trajectory] models lists a model twice: {list(self.models)}")


PARAMS = TrajectoryParams
