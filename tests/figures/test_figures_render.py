"""Rendering: the same figure gives the same bytes, whatever was rendered before and in whichever process."""
from __future__ import annotations

import sys
import warnings
from pathlib import Path

import matplotlib.pyplot as plt
import numpy as np
import pytest

from analog.combine import PARAMS as COMBINE
from analog.combine import combine_evidence
from analog.errors import AnalogWarning
from analog.figures.trajectories import trajectory_panels
from analog.output import render_figure, tight_bbox
from analog.pipeline import RunResult, render_figures
from analog.trajectory import TrajectoryParams, run_trajectory

_TESTS = Path(__file__).resolve().parents[1]
sys.path.insert(0, str(_TESTS / "combine"))
sys.path.insert(0, str(_TESTS / "trajectory"))
from synthetic_inputs import make_lines, make_study  # noqa: E402
from trajectory_sim import planted_histories  # noqa: E402


@pytest.fixture(scope="module")
def trajectory():
    study = planted_histories()
    params = TrajectoryParams(units="locality", age_handling="single_bin", n_bootstrap=20, n_null=300,
                              n_skill_boot=100)
    yield study, run_trajectory(study, params, rng=np.random.default_rng(3))
    plt.close("all")


def _panels(trajectory):
    study, res = trajectory
    return trajectory_panels(res, study, only=("trajectories_extant",))


def test_svg_does_not_depend_on_what_was_rendered_before(trajectory):
    # A layout engine re-solved at every draw moved the panels by rounding-level amounts
    # depending on the previous draw; SVG clip-path ids hash those coordinates, so the file
    # changed with the render order. The fixed grid makes it independent.
    fresh = {k: render_figure(f, "svg", dpi=30) for k, f in _panels(trajectory).items()}
    after_png = {}
    for k, f in _panels(trajectory).items():
        render_figure(f, "png", dpi=30)
        after_png[k] = render_figure(f, "svg", dpi=30)
    assert set(fresh) == {"trajectories_extant"}
    for k in fresh:
        assert fresh[k] == after_png[k], k


def test_one_layout_pass_gives_the_tight_area(trajectory):
    # reference: matplotlib's own bbox_inches='tight' (savefig) on the same figure
    fig = _panels(trajectory)["trajectories_extant"]
    png_ours = render_figure(fig, "png", dpi=30, bbox=tight_bbox(fig))
    png_tight = render_figure(fig, "png", dpi=30)
    size = [int.from_bytes(d[16:20], "big") for d in (png_ours, png_tight)], \
        [int.from_bytes(d[20:24], "big") for d in (png_ours, png_tight)]
    for pair in size:
        assert abs(pair[0] - pair[1]) <= 1


@pytest.fixture(scope="module")
def combined_run():
    study = make_study()
    analog, traj = make_lines(study)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        combined = combine_evidence(study, analog, traj, COMBINE(n_boot=50), rng=np.random.default_rng(1))
    yield RunResult(study=study, combined=combined)   # the two ranking charts
    plt.close("all")


def test_two_processes_write_the_same_files_as_one(combined_run):
    one = render_figures(combined_run, dpi=30, workers=1)
    two = render_figures(combined_run, dpi=30, workers=2)
    assert list(one) == ["rank_scatter", "top_taxa"]
    assert list(two) == list(one)
    for stem in one:
        assert list(one[stem]) == ["png", "svg"] == list(two[stem])
        for fmt in one[stem]:
            assert one[stem][fmt] == two[stem][fmt], f"{stem}.{fmt}"
