"""Hindcast cases and the skill table."""
import numpy as np
import pandas as pd

from analog.trajectory.hindcast import HINDCAST_COLUMNS, hindcast_cases, run_hindcast


def _series(spec):
    """spec: taxon -> list of (bin_index, occupied) from old to young."""
    rows = [(t, b, o, np.log((o + 0.5) / (20 - o + 0.5))) for t, bins in spec.items() for b, o in bins]
    df = pd.DataFrame(rows, columns=["taxon_id", "bin_index", "occupied", "empirical_logit"])
    df["bin_mid_ma"] = df["bin_index"] * 10 + 5.0
    return df


SPEC = {
    "X": [(b, 5) for b in range(9, 1, -1)],               # extinct, last occupied bin 2
    "Y": [(b, 4) for b in range(9, -1, -1)],              # extant, runs to bin 0
    "Z": [(4, 3), (3, 2), (2, 1)],                        # extinct, too short
}
EXTANT = pd.Series({"X": False, "Y": True, "Z": False})


def test_cut_points_follow_the_rules():
    cases = hindcast_cases(_series(SPEC), EXTANT, lead_bins=1, min_bins=4, rng=np.random.default_rng(0))
    lost = cases.loc[cases["lost"] == 1].set_index("taxon_id")
    assert list(lost.index) == ["X"]
    assert lost.at["X", "cut_bin"] == 3                   # one bin before the last occupied bin
    assert lost.at["X", "n_kept"] == 7                    # bins 9..3
    surv = cases.loc[cases["lost"] == 0].set_index("taxon_id")
    # X survives lead + 1 = 2 bins after a cut only at bins >= 4 and keeps >= 4 bins only at bins <= 6
    assert 4 <= surv.at["X", "cut_bin"] <= 6
    assert 2 <= surv.at["Y", "cut_bin"] <= 6              # extant: alive at bin 0
    assert "Z" not in cases["taxon_id"].to_numpy()
    assert (cases["n_kept"] >= 4).all()


def test_cut_points_are_drawn_reproducibly():
    a = hindcast_cases(_series(SPEC), EXTANT, lead_bins=1, min_bins=4, rng=np.random.default_rng(3))
    b = hindcast_cases(_series(SPEC), EXTANT, lead_bins=1, min_bins=4, rng=np.random.default_rng(3))
    pd.testing.assert_frame_equal(a, b)


def _planted(n_each=25, seed=0):
    """Lost taxa decline before they vanish; survivors hold steady."""
    rng = np.random.default_rng(seed)
    spec, extant = {}, {}
    for i in range(n_each):
        end = int(rng.integers(1, 6))
        spec[f"lost{i}"] = [(b, int(rng.binomial(20, min(0.6, 0.06 * (b - end + 1)))))
                            for b in range(end + 11, end - 1, -1)]
        spec[f"lost{i}"][-1] = (end, 1)
        extant[f"lost{i}"] = False
        spec[f"kept{i}"] = [(b, int(rng.binomial(20, 0.35))) for b in range(12, -1, -1)]
        extant[f"kept{i}"] = True
    return _series(spec), pd.Series(extant)


def test_skill_table_columns_and_ranges():
    series, extant = _planted()
    table, cases = run_hindcast(series, extant, models=("stasis", "random_walk", "random_walk_drift", "rise_fall",
                                                        "rise_fall_asymmetric"),
                                lead_bins=1, min_series_bins=5, threshold=float(np.log(0.02 / 0.98)),
                                step_myr=10.0, n_boot=200, rng=np.random.default_rng(1))
    assert list(table.columns) == HINDCAST_COLUMNS
    assert list(table["model"]) == ["stasis", "random_walk", "random_walk_drift", "rise_fall",
                                    "rise_fall_asymmetric", "model_average", "current_occupancy"]
    assert (table["n_lost"] == 25).all() and (table["n_survived"] == 50).all()   # 25 extant + 25 earlier cuts
    assert table["auc"].between(0, 1).all()
    assert (table["auc_low"] <= table["auc"]).all() and (table["auc"] <= table["auc_high"]).all()
    probs = table.loc[table["model"] != "current_occupancy"]
    assert probs["brier"].between(0, 1).all()
    assert np.isnan(table.set_index("model").at["current_occupancy", "brier"])
    # declines before loss: the model average separates lost from kept better than chance
    avg = table.set_index("model").loc["model_average"]
    assert avg["auc"] > 0.7 and avg["auc_low"] > 0.5
    assert set(cases["lost"]) == {0, 1}
    for m in table["model"]:
        assert cases[m].notna().all()                     # every model scored every case
