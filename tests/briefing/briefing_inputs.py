"""A small synthetic run for the briefing tests: real Study and RunResult, stand-in stage results.

The stage results are plain dataclasses with ``tables()``/``summary()`` and the attributes the
briefing reads, with the columns the stages write (the ``*_COLUMNS`` lists of each stage
package). Names include markup and odd characters on purpose, to check escaping. The fixtures
that use them are in conftest.py; tests import the names from here.
"""
from __future__ import annotations

import dataclasses
from dataclasses import dataclass, field
from pathlib import Path

import geopandas as gpd
import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402
import numpy as np  # noqa: E402
import pandas as pd  # noqa: E402
from shapely.geometry import box  # noqa: E402

from analog.output import render_figure  # noqa: E402
from analog.study import InputFile, Study, StudyConfig, TraitSpec  # noqa: E402

ODD_TAXON = "<b>Taxon & co</b>"
ODD_REGION_NAME = "<script>alert(1)</script> Bay & Shoals"
ODD_REGION_ID = "R 2/x"


@dataclass(frozen=True)
class CombineSettings:
    """Stand-in for the combine stage's parameters (only what the briefing reads)."""

    interval: float = 0.9
    tier_rule: str = "quantile"
    tier_quantiles: tuple = (0.9, 0.75, 0.5)

    def to_dict(self):
        return {f.name: getattr(self, f.name) for f in dataclasses.fields(self)}


@dataclass
class FakeAnalog:
    pooling: pd.DataFrame
    loo: pd.DataFrame
    selectivity: pd.DataFrame
    risk: pd.DataFrame
    interval_weights: pd.DataFrame
    skill: float = 0.68

    def tables(self):
        return {"selectivity.csv": self.selectivity, "pooling.csv": self.pooling,
                "leave_one_out.csv": self.loo, "analog_risk.csv": self.risk}

    def summary(self):
        return "analog evidence (synthetic)"


@dataclass
class FakeTrajectory:
    risk: pd.DataFrame
    hindcast: pd.DataFrame
    noise_null: pd.DataFrame
    skill: float = 0.61

    def tables(self):
        return {"trajectory_risk.csv": self.risk, "hindcast.csv": self.hindcast, "noise_null.csv": self.noise_null}

    def summary(self):
        return "trajectory evidence (synthetic)"


@dataclass
class FakeCombined:
    rankings: pd.DataFrame
    comparison: pd.DataFrame
    disagreements: pd.DataFrame
    sensitivity: pd.DataFrame
    weights: dict = field(default_factory=lambda: {"analog": 0.6, "trajectory": 0.4, "source": "skill"})
    skill: dict = field(default_factory=lambda: {"analog": 0.68, "trajectory": 0.61})

    def tables(self):
        return {"rankings.csv": self.rankings, "comparison.csv": self.comparison,
                "disagreements.csv": self.disagreements, "sensitivity.csv": self.sensitivity}

    def summary(self):
        return "combined (synthetic)"


@dataclass
class FakeRegions:
    presence: pd.DataFrame
    summary_table: pd.DataFrame
    unassigned: int = 17
    projection: str = "EPSG:6933"

    def tables(self):
        return {"region_taxa.csv": self.presence, "region_summary.csv": self.summary_table}

    @property
    def layer(self):
        geoms = {"R1": box(0, 0, 1, 1), ODD_REGION_ID: box(1, 0, 2, 1), "R3": box(2, 0, 3, 1)}
        return gpd.GeoDataFrame(self.summary_table.copy(),
                                geometry=[geoms[i] for i in self.summary_table["region_id"]], crs="EPSG:4326")

    def summary(self):
        return "regions (synthetic)"


TAXA = [  # taxon_id, name, rank, evidence, combined_p
    ("t1", "Alpha marina", "genus", "both", 0.81),
    ("t2", ODD_TAXON, "genus", "both", 0.64),
    ("t3", "Gamma profunda", "genus", "analog only", 0.52),
    ("t4", "Deltidae", "family", "trajectory only", 0.40),
    ("t5", "Epsilon lenta", "genus", "both", 0.33),
    ("t6", "Zeta parva", "genus", "both", 0.21),
    ("t7", "Eta rara", "genus", "both", 0.12),
    ("t8", "Theta ignota", "genus", "none", np.nan),
]
TIER_OF = {"t1": "highest", "t2": "high", "t3": "high", "t4": "moderate", "t5": "moderate",
           "t6": "lower", "t7": "lower"}


def make_study(tmp: Path, *, name: str = "Synthetic coast") -> Study:
    config = StudyConfig(
        name=name, seed=11, folder=tmp, warming_c=4.0, data_date="2026-11-01",
        description="A made-up study for tests & checks.",
        traits={"depth_zone": TraitSpec("depth_zone", "categorical", ("shelf", "slope", "basin"), "shelf",
                                        "Depth zone")},
        sections={"combine": CombineSettings()})
    taxa = pd.DataFrame({"taxon_id": [t[0] for t in TAXA], "scientificName": [t[1] for t in TAXA],
                         "taxonRank": [t[2] for t in TAXA], "extant": True})
    regions = gpd.GeoDataFrame({"region_id": ["R1", ODD_REGION_ID, "R3"],
                                "name": ["Northern Shelf", ODD_REGION_NAME, "Far Reef"]},
                               geometry=[box(0, 0, 1, 1), box(1, 0, 2, 1), box(2, 0, 3, 1)], crs="EPSG:4326")
    intervals = pd.DataFrame({"interval_id": ["I1", "I2"], "name": ["First warm spell", "Second warm spell"],
                              "oldest_ma": [100.0, 60.0], "youngest_ma": [95.0, 55.0], "warming_c": [3.0, 6.0]})
    files = [InputFile("taxa", Path("taxa.csv"), "a" * 64, 8),
             InputFile("modern_occurrences", Path("modern & <odd>.csv"), "b" * 64, 120)]
    dropped = pd.DataFrame({"role": ["modern_occurrences"], "reason": ["name not in taxa"], "count": [3],
                            "examples": ["Nonesuch <i>sp.</i>"]})
    return Study(config=config, taxa=taxa, fossil_occurrences=pd.DataFrame(), modern_occurrences=pd.DataFrame(),
                 regions=regions, intervals=intervals, files=files, dropped=dropped,
                 warnings=["3 modern records did not match a taxon"])


def make_results():
    ids = [t[0] for t in TAXA]
    p = np.array([t[4] for t in TAXA])
    rank = pd.Series(p).rank(ascending=False, method="first")
    rankings = pd.DataFrame({
        "taxon_id": ids, "scientificName": [t[1] for t in TAXA],
        "analog_p": np.where([t[3] in ("both", "analog only") for t in TAXA], p + 0.05, np.nan),
        "trajectory_p": np.where([t[3] in ("both", "trajectory only") for t in TAXA], p - 0.05, np.nan),
        "combined_p": p, "combined_low": p - 0.1, "combined_high": p + 0.1,
        "combined_rank": rank.where(~np.isnan(p)),
        "tier": [TIER_OF.get(i, pd.NA) for i in ids], "evidence": [t[3] for t in TAXA]})
    comparison = pd.DataFrame({"statistic": ["kendall_tau_b", "spearman_rho", "top_5_overlap"],
                               "estimate": [0.42, 0.55, 0.6], "low": [0.12, 0.2, np.nan],
                               "high": [0.7, 0.8, np.nan], "note": ["", "", "3 of 5 shared"]})
    disagreements = pd.DataFrame({"taxon_id": ["t3"], "scientificName": ["Gamma profunda"], "analog_rank": [2],
                                  "trajectory_rank": [7], "rank_difference": [5], "higher_on": ["analog"],
                                  "analog_p": [0.57], "trajectory_p": [0.2],
                                  "analog_drivers": ["depth zone: basin (+0.8)"], "trajectory_driver": ["random_walk"]})
    sensitivity = pd.DataFrame({"analog_weight": [0.0, 0.5, 1.0], "trajectory_weight": [1.0, 0.5, 0.0], "k": 3,
                                "jaccard_vs_default": [0.5, 1.0, 0.5], "n_shared": [2, 3, 2],
                                "entered": ["t4", "", "t5"], "left": ["t3", "", "t2"],
                                "is_default": [False, True, False]})
    combined = FakeCombined(rankings, comparison, disagreements, sensitivity)

    pooling = pd.DataFrame({"term": ["depth_zone[T.slope]", "depth_zone[T.basin]"], "estimate": [0.1, 1.2],
                            "se": [0.3, 0.3], "ci_low": [-0.5, 0.6], "ci_high": [0.7, 1.8], "tau2": [0.02, 0.1],
                            "i2": [0.1, 0.35], "q": [1.1, 3.2], "q_p": [0.29, 0.07], "k": [2, 2],
                            "method": ["DL", "DL"]})
    loo = pd.DataFrame({"interval_id": ["I1", "I2"], "auc": [0.7, 0.66], "n_at_risk": [40, 55], "n_lost": [9, 14]})
    weights = pd.DataFrame({"interval_id": ["I1", "I2"], "warming_c": [3.0, 6.0], "weight": [0.7, 0.3]})
    analog = FakeAnalog(pooling, loo, pd.DataFrame({"scope": ["pooled"], "term": ["x"]}),
                        rankings[["taxon_id", "scientificName", "analog_p"]], weights)

    hindcast = pd.DataFrame({"model": ["rise_and_fall", "random_walk", "model_average"], "auc": [0.71, 0.55, 0.66],
                             "auc_low": [0.62, 0.45, 0.57], "auc_high": [0.8, 0.65, 0.75],
                             "brier": [0.18, 0.24, 0.2], "n_lost": [20, 20, 20], "n_survived": [30, 30, 30]})
    noise = pd.DataFrame({  # columns as analog.trajectory.null.NULL_COLUMNS
        "level": ["taxon", "taxon", "dataset", "dataset", "dataset", "dataset"],
        "group": ["completed", "completed", "completed", "completed", "completed", "ends_in_interval"],
        "taxon_id": ["x1", "x2", pd.NA, pd.NA, pd.NA, pd.NA],
        "statistic": ["peak_position", "peak_position", "peak_position", "symmetry", "peakedness", "symmetry"],
        "observed": [0.4, 0.6, 0.52, 0.01, 2.6, 0.2], "null_mean": [0.5, 0.5, 0.5, 0.0, 1.8, 0.0],
        "null_low": [0.1, 0.1, 0.45, -0.05, 1.7, -0.05], "null_high": [0.9, 0.9, 0.55, 0.05, 1.9, 0.05],
        "p_value": [0.5, 0.4, 0.6, 0.7, 0.001, 0.004], "test_p_value": [np.nan, np.nan, 0.3, 0.5, 0.002, 0.01],
        "n_taxa": [1, 1, 2, 2, 2, 3]})
    traj = FakeTrajectory(pd.DataFrame({"taxon_id": ids, "preferred_model": ["rise_and_fall", "random_walk"] * 4}),
                          hindcast, noise)

    presence = pd.DataFrame({"region_id": ["R1", "R1", "R1", ODD_REGION_ID, ODD_REGION_ID, "R3"],
                             "taxon_id": ["t1", "t2", "t8", "t2", "t5", "t6"],
                             "n_records": [40, 12, 5, 30, 8, 2], "present": [True, True, True, True, True, False]})
    summary = pd.DataFrame({"region_id": ["R1", ODD_REGION_ID, "R3"],
                            "name": ["Northern Shelf", ODD_REGION_NAME, "Far Reef"],
                            "n_taxa": [3, 2, 0], "n_records": [57, 38, 2],
                            "expected_losses": [1.45, 0.97, np.nan], "expected_losses_low": [1.1, 0.7, np.nan],
                            "expected_losses_high": [1.8, 1.2, np.nan], "mean_combined_p": [0.72, 0.49, np.nan],
                            "n_top_tier": [1, 0, 0], "data_flag": ["ok", "ok", "insufficient: 2 records"],
                            "analog_expected_losses": [1.5, 1.0, np.nan],
                            "trajectory_expected_losses": [1.3, 0.9, np.nan],
                            "diversity_loss": [0.3, 0.2, np.nan]})
    regions = FakeRegions(presence, summary)
    return analog, traj, combined, regions


def png_figure(seed: int, fmt: str = "png") -> dict[str, bytes]:
    rng = np.random.default_rng(seed)
    fig, ax = plt.subplots(figsize=(3, 2))
    ax.plot(rng.normal(size=20).cumsum())
    try:
        return {fmt: render_figure(fig, fmt, dpi=60)}
    finally:
        plt.close(fig)
