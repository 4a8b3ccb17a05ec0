"""The noise null: calibration on excursions themselves, power on planted skewed hats, flagging."""
import numpy as np
import pandas as pd
import pytest
from scipy import stats as sps

from analog.stats import brownian_excursions
from analog.trajectory.null import NULL_COLUMNS, noise_null


def _series(paths, prefix="t"):
    """Long table of interior points of each path (old -> young), on both scales."""
    rows = []
    for i, p in enumerate(paths):
        inner = p[1:-1]
        rows.append(pd.DataFrame({"taxon_id": f"{prefix}{i}", "occupancy": inner,
                                  "empirical_logit": np.log(inner + 0.01) - 3.0}))
    return pd.concat(rows, ignore_index=True)


def _no_flags(table):
    return pd.Series("", index=pd.Index(table["taxon_id"].unique()))


@pytest.mark.parametrize("scale", ["occupancy", "logit"])
def test_excursions_are_not_rejected_by_their_own_null(scale):
    rng = np.random.default_rng(11)
    series = pd.concat([_series(brownian_excursions(40, 7, rng=rng), "a"),
                        _series(brownian_excursions(40, 10, rng=rng), "b")], ignore_index=True)
    if scale == "logit":  # an excursion read directly on the logit scale
        series["empirical_logit"] = series["occupancy"] - 4.0
    table, summary, samples = noise_null(series, _no_flags(series), scale=scale, n_null=1000,
                                         rng=np.random.default_rng(12))
    per = table.loc[(table["level"] == "taxon") & (table["statistic"] == "symmetry")]
    # per-taxon p-values of a continuous statistic are uniform under the null
    # (reference: scipy.stats.kstest against the uniform distribution)
    assert sps.kstest(per["p_value"], "uniform").pvalue > 0.01
    data = table.loc[table["level"] == "dataset"].set_index("statistic")
    assert (data["p_value"] > 0.01).all()
    # time reversal: the excursions' mean symmetry is 0 and mean peak position 1/2 (fact of the trade)
    assert data.at["symmetry", "null_mean"] == pytest.approx(0.0, abs=0.01)
    assert data.at["peak_position", "null_mean"] == pytest.approx(0.5, abs=0.01)
    assert set(samples["statistic"]) == {"peak_position", "symmetry", "peakedness"}


def test_early_peaked_histories_are_detected():
    n = 9
    u = np.arange(1, n + 1) / (n + 1)
    shape = np.where(u < 0.2, u / 0.2, (1 - u) / 0.8)          # rises fast, falls slowly
    rng = np.random.default_rng(3)
    paths = [np.r_[0, np.clip(0.3 * shape + 0.01 * rng.standard_normal(n), 0.001, None), 0] for _ in range(30)]
    series = _series(paths)
    table, summary, _ = noise_null(series, _no_flags(series), scale="occupancy", n_null=1000,
                                   rng=np.random.default_rng(4))
    data = table.loc[table["level"] == "dataset"].set_index("statistic")
    assert data.at["symmetry", "observed"] < data.at["symmetry", "null_low"]
    assert data.at["symmetry", "p_value"] < 0.01 and data.at["symmetry", "test_p_value"] < 0.01
    assert summary["completed"]["symmetry"][2] == data.at["symmetry", "p_value"]


def test_histories_ending_in_an_interval_are_reported_apart():
    rng = np.random.default_rng(5)
    series = _series(brownian_excursions(20, 8, rng=rng))
    ids = series["taxon_id"].unique()
    flags = pd.Series(["ptb" if i < 5 else "" for i in range(len(ids))], index=ids)
    table, _, _ = noise_null(series, flags, scale="occupancy", n_null=500, rng=np.random.default_rng(6))
    assert list(table.columns) == NULL_COLUMNS
    per = table.loc[table["level"] == "taxon"].drop_duplicates("taxon_id").set_index("taxon_id")
    assert (per.loc[ids[:5], "group"] == "ends_in_interval").all()
    assert (per.loc[ids[:5], "interval_id"] == "ptb").all()
    assert (per.loc[ids[5:], "group"] == "completed").all()
    data = table.loc[table["level"] == "dataset"]
    assert set(data["group"]) == {"completed", "ends_in_interval"}
    assert data.groupby("group")["n_taxa"].first().to_dict() == {"completed": 15, "ends_in_interval": 5}
    assert table["p_value"].dropna().between(0, 1).all()


def test_short_histories_are_left_out():
    series = pd.DataFrame({"taxon_id": ["a", "a", "b", "b", "b"], "occupancy": [0.1, 0.2, 0.1, 0.3, 0.1],
                           "empirical_logit": [-2.0, -1.0, -2.0, -0.5, -2.0]})
    table, _, _ = noise_null(series, _no_flags(series), n_null=200, rng=np.random.default_rng(0))
    assert set(table.loc[table["level"] == "taxon", "taxon_id"]) == {"b"}
