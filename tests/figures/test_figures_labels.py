"""Label placement and colour ranges shared by the maps and charts."""
from __future__ import annotations

import itertools

import matplotlib.pyplot as plt
import numpy as np
import pytest
from matplotlib.transforms import Bbox

from analog.figures.maps import _range
from analog.figures.style import place_labels


def _place(anchors, texts, **kw):
    fig, ax = plt.subplots(figsize=(5, 4))
    ax.set_xlim(0, 10)
    ax.set_ylim(0, 10)
    arts = place_labels(ax, anchors, texts, **kw)
    r = fig.canvas.get_renderer()
    boxes = [a.get_window_extent(r) for a in arts]
    positions = [a.get_position() for a in arts]
    inside = ax.get_window_extent(r)
    plt.close(fig)
    return boxes, positions, inside


def test_crowded_labels_separate_and_stay_inside():
    anchors = [(5, 5)] * 8 + [(0.2, 0.2), (9.8, 9.8)]
    texts = [f"Region number {i}" for i in range(10)]
    boxes, _, inside = _place(anchors, texts)
    for a, b in itertools.combinations(boxes, 2):
        assert not a.overlaps(b)
    for b in boxes:
        assert inside.x0 - 0.5 <= b.x0 and b.x1 <= inside.x1 + 0.5
        assert inside.y0 - 0.5 <= b.y0 and b.y1 <= inside.y1 + 0.5


def test_labels_keep_clear_of_obstacles_and_are_deterministic():
    fig, ax = plt.subplots(figsize=(5, 4))
    ax.set_xlim(0, 10)
    ax.set_ylim(0, 10)
    x0, y0 = ax.transData.transform((4, 4))
    x1, y1 = ax.transData.transform((6, 6))
    plt.close(fig)
    block = Bbox([[x0, y0], [x1, y1]])
    boxes, pos1, _ = _place([(5, 5), (5.2, 5.1)], ["first label", "second label"], obstacles=[block])
    _, pos2, _ = _place([(5, 5), (5.2, 5.1)], ["first label", "second label"], obstacles=[block])
    assert pos1 == pos2
    for b in boxes:
        assert not b.overlaps(block)


@pytest.mark.parametrize("values, kind, want", [
    (np.array([0.32, 0.36]), "mean_p", (0.25, 0.4)),      # narrow spread widened to 0.1, rounded out to 0.05
    (np.array([0.05, 0.62]), "mean_p", (0.05, 0.65)),
    (np.array([0.0, 0.99]), "mean_p", (0.0, 1.0)),
    (np.array([np.nan, np.nan]), "mean_p", (0.0, 1.0)),
    (np.array([4.6, 6.4]), "expected_losses", (4.5, 6.5)),  # counts under 10 round to 0.5
])
def test_colour_ranges(values, kind, want):
    lo, hi = _range(values, kind)
    assert (lo, hi) == pytest.approx(want)
    finite = values[np.isfinite(values)]
    if finite.size:
        assert lo <= finite.min() and hi >= finite.max()
        assert hi - lo >= 0.1 - 1e-12 or kind != "mean_p"
