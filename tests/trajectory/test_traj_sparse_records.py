"""A living taxon found in too few bins gets no trajectory score, never an extreme one."""
import numpy as np
import pandas as pd

from analog.rng import stage_generators
from analog.trajectory import run_trajectory
from analog.trajectory.params import PARAMS


def _study_with_one_old_record():
    from types import SimpleNamespace

    rng = np.random.default_rng(3)
    rows = []
    # T1: a well-sampled living lineage; T2: one record at ~200 Ma, then nothing; many localities sampled
    for b in range(25):
        mid = 5 + 10 * b
        for loc in range(12):
            rows.append(("T0", mid, f"L{b}-{loc}"))  # a filler taxon that keeps every bin sampled
            if rng.random() < 0.4:
                rows.append(("T1", mid, f"L{b}-{loc}"))
    rows.append(("T2", 205.0, "L20-0"))
    occ = pd.DataFrame(rows, columns=["taxon_id", "mid", "locationID"])
    occ["occurrenceID"] = [f"o{i}" for i in range(len(occ))]
    occ["oldest_ma"] = occ["mid"] + 1.0
    occ["youngest_ma"] = occ["mid"] - 1.0
    occ["decimalLatitude"] = -45.0
    occ["decimalLongitude"] = -120.0
    taxa = pd.DataFrame({"taxon_id": ["T0", "T1", "T2"], "scientificName": ["Filla", "Welsampla", "Unorecorda"],
                         "extant": [False, True, True]})
    intervals = pd.DataFrame(columns=["interval_id", "name", "oldest_ma", "youngest_ma"])
    return SimpleNamespace(taxa=taxa, fossil_occurrences=occ.drop(columns="mid"), intervals=intervals)


def test_single_old_record_gets_no_trajectory_score():
    study = _study_with_one_old_record()
    params = PARAMS(units="locality", n_bootstrap=20, n_null=200, n_skill_boot=20)
    result = run_trajectory(study, params, rng=stage_generators(1)["trajectory"])
    risk = result.risk.set_index("taxon_id")
    assert np.isnan(risk.loc["T2", "trajectory_p"])
    assert "found in only 1 bin(s)" in risk.loc["T2", "note"]
    assert "T2" not in result.risk_draws.index
    assert np.isfinite(risk.loc["T1", "trajectory_p"])
