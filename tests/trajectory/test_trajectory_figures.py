"""Trajectory figures: keys, panels, labels; nothing is saved."""
import matplotlib
import numpy as np
import pytest
from matplotlib.figure import Figure

from analog.figures.trajectories import null_comparison, trajectory_panels
from analog.trajectory import TrajectoryParams, run_trajectory
from trajectory_sim import planted_histories

matplotlib.use("Agg")


@pytest.fixture(scope="module")
def run():
    study = planted_histories()
    params = TrajectoryParams(units="locality", age_handling="single_bin", n_bootstrap=20, n_null=300,
                              n_skill_boot=100)
    return study, run_trajectory(study, params, rng=np.random.default_rng(3))


def _texts(fig):
    return [t.get_text() for t in fig.findobj(matplotlib.text.Text)]


def test_default_panels(run):
    study, res = run
    figs = trajectory_panels(res, study)
    assert set(figs) == {"trajectories_extant", "trajectories_extinct"}
    extant = figs["trajectories_extant"]
    assert isinstance(extant, Figure)
    shown = [ax for ax in extant.axes if ax.get_visible()]
    assert len(shown) == res.risk["trajectory_p"].notna().sum()
    # highest score first; titles name the taxon and its reading
    top = res.risk.sort_values("trajectory_p", ascending=False).iloc[0]
    assert shown[0].get_title(loc="left").startswith(top["scientificName"])
    texts = " ".join(_texts(extant))
    assert "Age (Ma)" in texts and "Occupancy" in texts and "threshold" in texts
    assert len(figs["trajectories_extinct"].axes) >= 4


def test_selected_panels_respect_the_limit(run):
    study, res = run
    figs = trajectory_panels(res, study, taxa=["hat0", "flat1", "not-a-taxon", "decline2"], max_panels=2)
    fig = figs["trajectories_selected"]
    titles = [ax.get_title(loc="left") for ax in fig.axes if ax.get_visible()]
    assert len(titles) == 2 and titles[0].startswith("Genus hat0") and titles[1].startswith("Genus flat1")


def test_null_comparison(run):
    _, res = run
    figs = null_comparison(res)
    assert list(figs) == ["noise_null"]
    axes = figs["noise_null"].axes
    assert [ax.get_xlabel().split(" ")[0] for ax in axes[:3]] == ["Peak", "Centre", "Peak"]
    assert "excursions (noise null)" in " ".join(_texts(figs["noise_null"]))
