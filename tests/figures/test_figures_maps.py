"""Risk maps: what is coloured, what is hatched, scales, labels, furniture."""
from __future__ import annotations

import itertools
import sys
import warnings
from pathlib import Path
from types import SimpleNamespace

import geopandas as gpd
import matplotlib.pyplot as plt
import numpy as np
import pytest
from matplotlib.colors import TwoSlopeNorm, to_rgba
from matplotlib.patches import Rectangle
from shapely.geometry import LineString

from analog.combine import PARAMS as COMBINE
from analog.combine import combine_evidence
from analog.errors import AnalogWarning
from analog.figures import maps
from analog.figures.params import PARAMS as FIGS
from analog.figures.style import CAUTION, NO_DATA_COLOUR, NO_DATA_HATCH, SEQUENTIAL
from analog.regions import assess_regions

sys.path.insert(0, str(Path(__file__).resolve().parents[1] / "combine"))
from synthetic_inputs import make_lines, make_study  # noqa: E402


@pytest.fixture(scope="module")
def results():
    study = make_study()
    analog, traj = make_lines(study)
    with warnings.catch_warnings():
        warnings.simplefilter("ignore", AnalogWarning)
        combined = combine_evidence(study, analog, traj, COMBINE(n_boot=50), rng=np.random.default_rng(1))
        regions = assess_regions(study, combined, rng=np.random.default_rng(2))
    yield study, combined, regions
    plt.close("all")


def _map_axes(fig):
    return [ax for ax in fig.axes if not hasattr(ax, "_colorbar") and ax.get_xlim()[1] > 1000]


def _fills(ax):
    """(facecolours, hatch, number of shapes) of the filled region collections, in drawing order."""
    return [(c.get_facecolors(), c.get_hatch(), len(c.get_paths())) for c in ax.collections if c.get_zorder() == 2]


def _label_boxes(fig, ax):
    r = fig.canvas.get_renderer()
    return [t.get_window_extent(r) for t in ax.texts if t.get_bbox_patch() is not None]


def test_flagged_regions_are_hatched_never_coloured(results):
    study, _, res = results
    fig = maps.risk_map(res, data_date="2026-11-01")
    ax = _map_axes(fig)[0]
    fills = _fills(ax)
    s = res.region_summary
    flagged = s["data_flag"] != "ok"
    coloured, hatched = fills[0], fills[1]
    assert coloured[1] is None and coloured[2] == (~flagged).sum()
    assert hatched[1] == NO_DATA_HATCH and hatched[2] == flagged.sum()
    np.testing.assert_allclose(hatched[0][0], to_rgba(NO_DATA_COLOUR))
    # coloured regions carry the colour of their value on the bar's scale
    cbar = next(a for a in fig.axes if hasattr(a, "_colorbar"))._colorbar
    want = plt.get_cmap(SEQUENTIAL)(cbar.norm(s.loc[~flagged, "mean_combined_p"].to_numpy()))
    np.testing.assert_allclose(coloured[0], want)
    assert cbar.norm.vmin <= s.loc[~flagged, "mean_combined_p"].min()
    assert cbar.norm.vmax >= s.loc[~flagged, "mean_combined_p"].max()
    assert "expected share of taxa lost" in cbar.ax.get_ylabel()


def test_caption_projection_and_scale_bar(results):
    _, _, res = results
    fig = maps.risk_map(res, data_date="2026-11-01")
    texts = [t.get_text() for t in fig.texts]
    assert any("Data as of 2026-11-01." in t and CAUTION in t for t in texts)
    ax = _map_axes(fig)[0]
    ax_texts = [t.get_text() for t in ax.texts]
    assert any(res.projection_label in t for t in ax_texts)
    # scale bar: the two segments together span the stated length, in projected metres
    km = next(t for t in ax_texts if t.endswith(" km"))
    length_m = float(km.split()[0]) * 1000
    segs = [p for p in ax.patches if isinstance(p, Rectangle) and p.get_zorder() == 7]
    assert sum(p.get_width() for p in segs) == pytest.approx(length_m)
    assert float(km.split()[0]) in (1, 2, 5, 10, 20, 50, 100, 200, 500, 1000)


@pytest.mark.parametrize("draw", [maps.risk_map, maps.side_by_side_maps, maps.difference_map])
def test_region_labels_do_not_overlap(results, draw):
    _, _, res = results
    fig = draw(res)
    for ax in _map_axes(fig):
        boxes = _label_boxes(fig, ax)
        assert len(boxes) == len(res.region_summary)
        for a, b in itertools.combinations(boxes, 2):
            assert not a.overlaps(b), "two region labels overlap"


def test_side_by_side_share_one_scale(results):
    _, _, res = results
    fig = maps.side_by_side_maps(res)
    cbars = [a._colorbar for a in fig.axes if hasattr(a, "_colorbar")]
    assert len(cbars) == 1
    norm = cbars[0].norm
    s = res.region_summary
    ok = s["data_flag"] == "ok"
    for ax, col in zip(_map_axes(fig), ("analog_mean_p", "trajectory_mean_p")):
        colours = _fills(ax)[0][0]
        np.testing.assert_allclose(colours, plt.get_cmap(SEQUENTIAL)(norm(s.loc[ok, col].to_numpy())))


def test_difference_map_diverges_around_zero(results):
    _, _, res = results
    fig = maps.difference_map(res)
    cbar = next(a for a in fig.axes if hasattr(a, "_colorbar"))._colorbar
    assert isinstance(cbar.norm, TwoSlopeNorm)
    assert cbar.norm.vcenter == 0 and cbar.norm.vmin == -cbar.norm.vmax
    d = res.region_summary.loc[res.region_summary["data_flag"] == "ok", "mean_difference"]
    assert cbar.norm.vmax >= d.abs().max()


def test_context_layer_is_drawn_under_the_regions(results):
    _, _, res = results
    coast = gpd.GeoDataFrame(geometry=[LineString([(9.5, 39.5), (16.5, 44.5)]),
                                       LineString([(100, 0), (101, 1)])],  # far away: clipped off
                             crs="EPSG:4326")
    fig = maps.risk_map(res, context=coast)
    ax = _map_axes(fig)[0]
    under = [c for c in ax.collections if c.get_zorder() == 1]
    assert len(under) == 1 and len(under[0].get_paths()) == 1
    fig2 = maps.risk_map(res, context=coast, params=FIGS(show_context=False))
    assert not [c for c in _map_axes(fig2)[0].collections if c.get_zorder() == 1]


def test_map_figures_and_inset(results):
    study, combined, res = results
    run = SimpleNamespace(study=study, combined=combined, regions=res)
    figs = maps.map_figures(run)
    assert list(figs) == ["risk_map", "risk_map_by_line", "risk_difference_map"]
    inset = maps.region_inset("R2", res)
    assert inset.get_figwidth() == pytest.approx(2.4)
    with pytest.raises(KeyError, match="region_id 'nowhere' is not among the regions"):
        maps.region_inset("nowhere", res)


def test_holes_stay_empty(results):
    """R2 has a hole (holding the small island region R6): the part of the hole around the island
    must stay unfilled (matplotlib fills by non-zero winding, so ring orientation matters).
    Checked on the rendered pixels."""
    import pyproj

    _, _, res = results
    fig = maps.risk_map(res, params=FIGS(label_regions=False))
    ax = _map_axes(fig)[0]
    fig.canvas.draw()
    img = np.asarray(fig.canvas.buffer_rgba())
    to_map = pyproj.Transformer.from_crs("EPSG:4326", res.projection, always_xy=True)

    def pixel(lon, lat):
        x, y = ax.transData.transform(to_map.transform(lon, lat))
        return img[int(round(img.shape[0] - y)), int(round(x)), :3]

    np.testing.assert_array_equal(pixel(12.84, 43.16), [255, 255, 255])    # in the hole, off the island
    assert not np.array_equal(pixel(12.4, 43.6), [255, 255, 255])          # R2's body is coloured


@pytest.fixture(scope="module")
def many_regions(results):
    """The same result on a 20 x 20 grid of small regions, with values rising to the north-east."""
    import copy

    from shapely.geometry import box

    _, _, res = results
    row = res.layer.iloc[[0]]
    cells = [box(10 + 0.1 * i, 40 + 0.1 * j, 10.1 + 0.1 * i, 40.1 + 0.1 * j) for j in range(20) for i in range(20)]
    layer = gpd.GeoDataFrame(row.drop(columns="geometry").loc[row.index.repeat(len(cells))].reset_index(drop=True),
                             geometry=cells, crs="EPSG:4326")
    layer["region_id"] = [f"G{k:03d}" for k in range(len(cells))]
    layer["name"] = [f"Cell {k}" for k in range(len(cells))]
    layer["data_flag"] = "ok"
    rank = np.arange(len(cells)) / len(cells)
    for col in ("mean_combined_p", "analog_mean_p", "trajectory_mean_p"):
        layer[col] = 0.1 + 0.5 * rank
    layer["mean_difference"] = np.linspace(-0.2, 0.3, len(cells))
    many = copy.copy(res)
    many.layer = layer
    many.region_summary = layer.drop(columns="geometry").assign(flag_reason="", area_km2=100.0)
    return many


@pytest.mark.parametrize("draw", [maps.risk_map, maps.side_by_side_maps, maps.difference_map])
def test_many_regions_label_the_highest_without_collisions_and_say_so(many_regions, draw):
    params = FIGS(max_region_labels=15)
    fig = draw(many_regions, params=params)
    top = {f"Cell {k}" for k in range(385, 400)}  # the 15 highest values (and largest differences)
    for ax in _map_axes(fig):
        boxes = _label_boxes(fig, ax)
        assert 0 < len(boxes) <= 15
        for a, b in itertools.combinations(boxes, 2):
            assert not a.overlaps(b), "two region labels overlap"
        shown = {t.get_text().split("\n")[0] for t in ax.texts if t.get_bbox_patch() is not None}
        assert shown <= top, "labels go to the regions with the highest values first"
    caption = " ".join(t.get_text() for t in fig.texts)
    assert "of the 400 regions" in caption and "region_summary.csv lists every region" in caption


def test_few_regions_are_all_labelled_with_no_note(results):
    _, _, res = results
    fig = maps.risk_map(res)
    assert "Labels name" not in " ".join(t.get_text() for t in fig.texts)
