"""Ranking charts: rank scatter and top-taxa bars."""
from __future__ import annotations

import itertools
import sys
import warnings
from pathlib import Path
from types import SimpleNamespace

import matplotlib.pyplot as plt
import numpy as np
import pytest
from matplotlib.colors import to_rgba
from scipy import stats

from analog.combine import PARAMS as COMBINE
from analog.combine import combine_evidence
from analog.errors import AnalogWarning
from analog.figures import ranking
from analog.figures.params import PARAMS as FIGS
from analog.figures.style import TIER_COLOURS

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "combine"))
from synthetic_inputs import make_lines, make_study  # noqa: E402


@pytest.fixture(scope="module")
def combined():
    study = make_study()
    analog, traj = make_lines(study)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        out = combine_evidence(study, analog, traj, COMBINE(n_boot=50), rng=np.random.default_rng(1))
    yield study, out
    plt.close("all")


def test_rank_scatter_points_and_named_disagreements(combined):
    _, res = combined
    fig = ranking.rank_scatter(res, data_date="2026-11-01", params=FIGS(n_labelled=6))
    ax = fig.axes[0]
    both = res.rankings[res.rankings["evidence"] == "both"]
    offsets = ax.collections[0].get_offsets()
    assert len(offsets) == len(both)
    # positions are ranks among the taxa with both lines (scipy.stats.rankdata, 1 = most vulnerable)
    np.testing.assert_allclose(offsets[:, 0], stats.rankdata(-both["analog_p"]))
    np.testing.assert_allclose(offsets[:, 1], stats.rankdata(-both["trajectory_p"]))
    assert ax.xaxis_inverted() and ax.yaxis_inverted()
    labels = [t for t in ax.texts if t.get_bbox_patch() is not None]
    assert [t.get_text() for t in labels] == res.disagreements["scientificName"].head(6).tolist()
    r = fig.canvas.get_renderer()
    for a, b in itertools.combinations([t.get_window_extent(r) for t in labels], 2):
        assert not a.overlaps(b)
    tau = res.comparison.set_index("statistic").at["kendall_tau_b", "estimate"]
    assert any(f"Kendall tau-b = {tau:.2f}" in t.get_text() for t in fig.texts)


def test_top_taxa_bars(combined):
    _, res = combined
    fig = ranking.top_taxa_bars(res, params=FIGS(n_top_taxa=12))
    ax = fig.axes[0]
    top = res.rankings.head(12)
    bars = ax.patches[:12]
    np.testing.assert_allclose([b.get_width() for b in bars], top["combined_p"])
    for b, tier in zip(bars, top["tier"]):
        np.testing.assert_allclose(b.get_facecolor(), to_rgba(TIER_COLOURS[tier]))
    # interval bars span combined_low..combined_high
    seg = next(c for c in ax.collections if c.get_segments() and len(c.get_segments()) == 12)
    ends = np.array([[s[0][0], s[1][0]] for s in seg.get_segments()])
    np.testing.assert_allclose(np.sort(ends, axis=1), top[["combined_low", "combined_high"]].to_numpy())
    notes = [t.get_text() for t in ax.texts]
    assert notes.count("analog only") == int((top["evidence"] == "analog only").sum())
    assert notes.count("trajectory only") == int((top["evidence"] == "trajectory only").sum())
    ticks = [t.get_text() for t in ax.get_yticklabels()]
    assert ticks[0] == f"1. {top['scientificName'].iloc[0]}"


def test_ranking_figures_keys(combined):
    study, res = combined
    figs = ranking.ranking_figures(SimpleNamespace(study=study, combined=res))
    assert list(figs) == ["rank_scatter", "top_taxa"]
