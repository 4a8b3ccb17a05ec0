"""The bundled warming-interval catalogue and the scenario weighting."""
import numpy as np
import pytest

from analog.errors import AnalogError
from analog.reference import INTERVAL_COLUMNS, interval_weights, load_intervals, resolve_stage


def test_catalogue_columns_and_types():
    cat = load_intervals()
    assert tuple(cat.columns) == INTERVAL_COLUMNS
    for col in ("oldest_ma", "youngest_ma", "warming_c", "warming_low_c", "warming_high_c"):
        assert cat[col].dtype == np.float64
    assert cat["interval_id"].is_unique


def test_required_intervals_present():
    ids = set(load_intervals()["interval_id"])
    assert {"ptb", "tjb", "toa", "ctb", "petm"} <= ids


def test_catalogue_sanity():
    cat = load_intervals()
    assert (cat["oldest_ma"] > cat["youngest_ma"]).all()
    assert (cat["youngest_ma"] >= 0).all()
    assert cat["warming_c"].notna().all() and (cat["warming_c"] > 0).all()
    assert (cat["source"].str.strip().str.len() > 10).all()
    assert (cat["province"].str.strip().str.len() > 0).all()
    assert (cat["note"].str.contains("window")).all()
    ranged = cat.dropna(subset=["warming_low_c", "warming_high_c"])
    assert (ranged["warming_low_c"] <= ranged["warming_c"]).all()
    assert (ranged["warming_c"] <= ranged["warming_high_c"]).all()
    # Oldest first, windows do not overlap.
    assert cat["oldest_ma"].is_monotonic_decreasing
    assert (cat["youngest_ma"].to_numpy()[:-1] > cat["oldest_ma"].to_numpy()[1:]).all()


@pytest.mark.parametrize("iid,boundary_stage", [
    ("ptb", "Induan"),       # window ends at the base Induan, 251.902 Ma (ICS v2023/09)
    ("tjb", "Hettangian"),   # window ends at the base Hettangian, 201.4 Ma (ICS v2023/09)
    ("toa", "Toarcian"),     # window holds the base Toarcian, 184.2 Ma (ICS v2023/09)
    ("ctb", "Turonian"),     # window holds the base Turonian, 93.9 Ma (ICS v2023/09)
    ("petm", "Ypresian"),    # window holds the base Ypresian, 56.0 Ma (ICS v2023/09)
])
def test_windows_hold_the_boundary_they_are_named_for(iid, boundary_stage):
    row = load_intervals().set_index("interval_id").loc[iid]
    base, _ = resolve_stage(boundary_stage)
    assert row["youngest_ma"] <= base <= row["oldest_ma"]


def test_estimates_from_cited_sources():
    cat = load_intervals().set_index("interval_id")
    # McInerney & Wing 2011: PETM about 5-8 °C (range as in METHODS.md).
    assert (cat.loc["petm", "warming_low_c"], cat.loc["petm", "warming_high_c"]) == (5.0, 8.0)
    # Ullmann et al. 2020: Toarcian bottom water about +3.5 °C.
    assert cat.loc["toa", "warming_c"] == 3.5
    # Unverified values say so.
    assert "from memory" in cat.loc["cap", "source"]


def test_interval_weights_gaussian_kernel():
    w = interval_weights([4.0, 6.0, 2.0, 8.0, np.nan], 4.0, scale_c=2.0)
    np.testing.assert_allclose(w[:4], [1.0, np.exp(-0.5), np.exp(-0.5), np.exp(-2.0)])
    assert w[4] == 0.0
    assert w.dtype == np.float64


def test_interval_weights_shape_scalar_and_scale():
    assert interval_weights(4.0, 4.0).shape == ()
    narrow = interval_weights([6.0], 4.0, scale_c=1.0)[0]
    wide = interval_weights([6.0], 4.0, scale_c=4.0)[0]
    assert narrow < wide < 1.0


@pytest.mark.parametrize("bad", [0.0, -1.0, np.nan])
def test_interval_weights_rejects_bad_scale(bad):
    with pytest.raises(AnalogError, match="scale_c"):
        interval_weights([4.0], 4.0, scale_c=bad)
