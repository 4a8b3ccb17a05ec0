"""Fixtures of the briefing tests (the synthetic run itself is built in briefing_inputs.py)."""
from __future__ import annotations

import pytest
from briefing_inputs import make_results, make_study, png_figure

from analog.pipeline import RunResult


@pytest.fixture(scope="session")
def synthetic_figures():
    figs = {stem: png_figure(i) for i, stem in enumerate(
        ["forest_depth_zone", "trajectory_panels", "risk_map", "rank_scatter", "top_taxa", "unexpected_extra"])}
    figs["null_comparison"] = png_figure(99, "svg")  # SVG only: still embedded
    return figs


@pytest.fixture
def synthetic_run(tmp_path):
    analog, traj, combined, regions = make_results()
    study = make_study(tmp_path)
    return RunResult(study=study, analog=analog, trajectory=traj, combined=combined, regions=regions,
                     stages_done=["analog", "trajectory", "combine", "regions"],
                     warnings=["analog: interval I2 had a thin class <slope>"])
