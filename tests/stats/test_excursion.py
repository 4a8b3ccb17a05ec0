import warnings

import numpy as np
import pandas as pd
import pytest
from scipy import stats

from analog.errors import AnalogError, AnalogWarning
from analog.stats import brownian_excursions, hat_shape

N_PATHS, N_STEPS = 6000, 500


@pytest.fixture(scope="module")
def paths():
    return brownian_excursions(N_PATHS, N_STEPS, rng=np.random.default_rng(19760601))


def _area(e):
    return ((e[:, 1:] + e[:, :-1]) / 2).sum(axis=1) / (e.shape[1] - 1)


def test_shape_ends_and_reproducibility(paths):
    assert paths.shape == (N_PATHS, N_STEPS + 1)
    assert np.all(paths[:, 0] == 0) and np.all(paths[:, -1] == 0)
    assert np.all(paths[:, 1:-1] > 0)
    again = brownian_excursions(N_PATHS, N_STEPS, rng=np.random.default_rng(19760601))
    np.testing.assert_array_equal(paths, again)
    assert brownian_excursions(0, 3, rng=1).shape == (0, 4)
    assert brownian_excursions(2, 1, rng=1).tolist() == [[0.0, 0.0], [0.0, 0.0]]


@pytest.mark.parametrize("kwargs, message", [
    ({"n_paths": 3, "n_steps": 0}, "'n_steps' parameter .* integer >= 1. Got 0"),
    ({"n_paths": -1, "n_steps": 5}, "'n_paths' parameter .* integer >= 0. Got -1"),
    ({"n_paths": 2, "n_steps": 2.5}, "'n_steps' parameter .* Got 2.5"),
])
def test_bad_sizes(kwargs, message):
    with pytest.raises(AnalogError, match=message):
        brownian_excursions(**kwargs, rng=0)


def test_rng_required():
    with pytest.raises(AnalogError, match="`rng` is required"):
        brownian_excursions(2, 4, rng=None)


@pytest.mark.parametrize("t", [0.1, 0.5, 0.8])
def test_marginal_is_scaled_maxwell(paths, t):
    # The excursion at time t is sqrt(t (1 - t)) times a chi(3) (Maxwell) variable:
    # density 2 x^2 / sqrt(2 pi t^3 (1-t)^3) exp(-x^2 / (2 t (1-t))) (Durrett, Iglehart &
    # Miller 1977, Ann. Probab. 5:117; from memory). Reference: scipy.stats.maxwell.
    k = round(t * N_STEPS)
    ref = stats.maxwell(scale=np.sqrt(t * (1 - t)))
    assert stats.kstest(paths[:, k], ref.cdf).pvalue > 1e-3


def test_marginal_mean(paths):
    # E e(t) = sqrt(8 t (1 - t) / pi), the mean of the scaled Maxwell law above
    # (Durrett, Iglehart & Miller 1977; from memory). 4.5 SE: about 100 grid points tested.
    k = np.arange(5, N_STEPS, 5)
    t = k / N_STEPS
    mean = paths[:, k].mean(axis=0)
    se = paths[:, k].std(axis=0) / np.sqrt(N_PATHS)
    assert np.max(np.abs(mean - np.sqrt(8 * t * (1 - t) / np.pi)) / se) < 4.5


def test_mean_maximum(paths):
    # E max e = sqrt(pi / 2) ~ 1.2533 (Kennedy 1976, J. Appl. Prob. 13:371, distribution of
    # the maximum; value from memory). Cross-check: by Vervaat (1979) the excursion maximum
    # is the range of a Brownian bridge, 2 * E max bridge = 2 * sqrt(pi / 8).
    # The grid maximum misses peaks between points; for a locally Brownian path the
    # shortfall is 0.5826 sqrt(dt) + o(sqrt(dt)) (Asmussen, Glynn & Pitman 1995, Ann. Appl.
    # Probab. 5:875), about 0.026 here, so compare with the shifted value at 4 SE.
    m = paths.max(axis=1)
    target = np.sqrt(np.pi / 2) - 0.5826 / np.sqrt(N_STEPS)
    assert abs(m.mean() - target) < 4 * m.std() / np.sqrt(N_PATHS)
    assert m.mean() < np.sqrt(np.pi / 2)


def test_mean_area_and_second_moment(paths):
    # E int e = sqrt(pi / 8) ~ 0.6267 and E (int e)^2 = 5 / 12 (Janson 2007, Probab. Surveys
    # 4:80, Brownian excursion area moments; values from memory). The first also follows
    # from integrating the marginal mean: sqrt(8/pi) * int sqrt(t(1-t)) dt = sqrt(8/pi) pi/8.
    # The trapezoid rule on exact grid values has negligible bias at 500 steps; 4 SE.
    a = _area(paths)
    assert abs(a.mean() - np.sqrt(np.pi / 8)) < 4 * a.std() / np.sqrt(N_PATHS)
    a2 = a**2
    assert abs(a2.mean() - 5 / 12) < 4 * a2.std() / np.sqrt(N_PATHS)


def test_mean_shape_is_symmetric(paths):
    # Fact of the trade: the excursion is invariant under t -> 1 - t, so its mean rises as
    # it falls; a random walk pinned to zero at both ends draws symmetric hats on average.
    k = np.arange(1, N_STEPS // 2)
    diff = paths[:, k] - paths[:, N_STEPS - k]
    z = diff.mean(axis=0) / (diff.std(axis=0) / np.sqrt(N_PATHS))
    assert np.max(np.abs(z)) < 4.5
    shape = hat_shape(paths)
    for col, centre in [("peak_position", 0.5), ("symmetry", 0.0)]:
        x = shape[col].to_numpy()
        assert abs(x.mean() - centre) < 4 * x.std() / np.sqrt(N_PATHS), col
    # and a reversed path has mirrored statistics
    rev = hat_shape(paths[:50, ::-1])
    np.testing.assert_allclose(rev["peak_position"], 1 - shape["peak_position"][:50], atol=1e-12)
    np.testing.assert_allclose(rev["symmetry"], -shape["symmetry"][:50], atol=1e-12)
    np.testing.assert_allclose(rev["peakedness"], shape["peakedness"][:50], rtol=1e-12)


def test_hat_shape_hand_cases():
    # Triangle with apex at u = 1/3: centroid at the mean of its vertices' u, (0 + 1/3 + 1)/3
    # = 4/9, so symmetry = 2 * 4/9 - 1 = -1/9; area 1, max 2, peakedness 2 (plane geometry).
    got = hat_shape(np.array([[0.0, 2.0, 1.0, 0.0],   # the same triangle sampled at thirds
                              [0.0, 1.0, 2.0, 1.0],   # tent rising to the last point
                              [1.0, 1.0, 1.0, 1.0],   # flat
                              [0.0, 0.0, 0.0, 0.0]]))  # no area
    np.testing.assert_allclose(got.loc[0, ["peak_position", "symmetry", "peakedness"]],
                               [1 / 3, -1 / 9, 2.0], atol=1e-12)
    # ramp 0,1,2 over u in [0, 2/3] then down to 1: area 1/3*(0.5+1.5+1.5) = 7/6;
    # moment (1/18)*[1*(2/3)] + (1/18)*[1*(4/3)+2*(5/3)] + (1/18)*[2*(7/3)+1*(8/3)]
    #       = (1/18)*(2/3 + 14/3 + 22/3) = 38/54; c = (38/54)/(7/6) = 38/63
    np.testing.assert_allclose(got.loc[1, ["peak_position", "symmetry", "peakedness"]],
                               [2 / 3, 2 * 38 / 63 - 1, 2 / (7 / 6)], atol=1e-12)
    np.testing.assert_allclose(got.loc[2, ["peak_position", "symmetry", "peakedness"]],
                               [0.5, 0.0, 1.0], atol=1e-12)
    assert got.loc[3, ["peak_position", "symmetry", "peakedness"]].isna().all()
    assert got["n_points"].tolist() == [4, 4, 4, 4]


def test_hat_shape_parabola_peakedness():
    # u (1 - u): max 1/4 over mean 1/6 = 3/2 (calculus); fine grid, trapezoid error O(h^2)
    u = np.linspace(0, 1, 2001)
    got = hat_shape(u * (1 - u), times=u)
    assert got.loc[0, "peakedness"] == pytest.approx(1.5, rel=1e-6)
    assert got.loc[0, "symmetry"] == pytest.approx(0.0, abs=1e-12)


def test_hat_shape_missing_irregular_and_ragged():
    # NaN points are skipped: same triangle as above with a gap, and with uneven times
    tri = hat_shape([0.0, 2.0, np.nan, 0.0], times=[0.0, 1.0, 2.0, 3.0])
    np.testing.assert_allclose(tri.loc[0, ["peak_position", "symmetry", "peakedness"]],
                               [1 / 3, -1 / 9, 2.0], atol=1e-12)
    same = hat_shape([0.0, 2.0, 0.0], times=[100.0, 110.0, 130.0])
    np.testing.assert_allclose(same.to_numpy()[:, 1:], tri.to_numpy()[:, 1:], atol=1e-12)
    assert tri.loc[0, "n_points"] == 3

    ragged = hat_shape({"a": [0.0, 2.0, 1.0, 0.0], "b": [0.0, 1.0, 0.0], "c": [1.0, np.nan]})
    assert list(ragged.index) == ["a", "b", "c"]
    assert ragged.loc["b", "symmetry"] == pytest.approx(0.0, abs=1e-12)
    assert ragged.loc["c", ["peak_position", "symmetry", "peakedness"]].isna().all()
    assert ragged.loc["c", "n_points"] == 1

    frame = pd.DataFrame([[0.0, 1.0, 0.0]], index=["x"])
    assert list(hat_shape(frame).index) == ["x"]
    assert len(hat_shape(np.empty((0, 5)))) == 0


def test_hat_shape_baseline():
    series = np.array([-1.0, 1.0, -1.0])
    with pytest.warns(AnalogWarning, match="negative values.*baseline='min'"):
        got = hat_shape(series)
    assert got[["peak_position", "symmetry", "peakedness"]].isna().all(axis=None)
    with warnings.catch_warnings():
        warnings.simplefilter("error")
        lifted = hat_shape(series, baseline="min")
    np.testing.assert_allclose(lifted.iloc[0, 1:], [0.5, 0.0, 2.0], atol=1e-12)
    with pytest.raises(AnalogError, match="`baseline` was 'mean'"):
        hat_shape(series, baseline="mean")


def test_hat_shape_bad_times():
    with pytest.raises(AnalogError, match="must increase strictly.*series 1"):
        hat_shape([[0, 1, 0], [0, 1, 0]], times=[[0, 1, 2], [0, 2, 2]])
    with pytest.raises(AnalogError, match="does not fit"):
        hat_shape([[0, 1, 0]], times=[0, 1])
