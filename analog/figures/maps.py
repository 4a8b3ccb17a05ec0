"""Maps of regional risk: combined, analog beside trajectory, and their difference.

Every map is drawn in the equal-area projection the regions stage chose (named on the map),
with a scale bar, a colour bar with units, non-overlapping region labels, the optional context
layer underneath, hatching for regions with insufficient data, and a caption with the data date
and the caution. Functions return Figures; the output writer saves them.
"""
from __future__ import annotations

import math

import matplotlib.pyplot as plt
import numpy as np
import pyproj
from matplotlib.colors import Normalize, TwoSlopeNorm
from matplotlib.patches import Patch, Rectangle
from matplotlib.transforms import Bbox

from .params import PARAMS, FigureParams
from .style import (short_label, CONTEXT_FILL, LABEL_BOX, CONTEXT_LINE, DIFFERENCE_CMAP, NO_DATA_COLOUR, NO_DATA_EDGE, NO_DATA_HATCH,
                    REGION_EDGE, SEQUENTIAL, add_caption, figure_style, place_labels)

__all__ = ["map_figures", "risk_map", "side_by_side_maps", "difference_map", "region_inset", "MAP_UNITS"]

MAP_UNITS = {
    "mean_p": "Mean probability of loss among assessed taxa\n(= expected share of taxa lost; relative scale)",
    "expected_losses": "Expected number of taxa lost\n(sum of probabilities; relative scale)",
}
_COLUMNS = {"mean_p": {"combined": "mean_combined_p", "analog": "analog_mean_p", "trajectory": "trajectory_mean_p"},
            "expected_losses": {"combined": "expected_losses", "analog": "analog_expected_losses",
                                "trajectory": "trajectory_expected_losses"}}
_TITLE_H, _FOOT_H = 0.55, 0.6   # inches above and below the maps


def map_figures(run, *, only=None) -> dict:
    """All maps of a pipeline run, keyed by file stem.

    ``run`` is an :class:`analog.pipeline.RunResult` with ``regions`` and ``study``;
    ``only`` (a collection of stems) draws just those.
    """
    study = run.study
    params = study.config.sections.get("figures") or PARAMS()
    kw = {"context": study.context, "data_date": study.config.data_date, "params": params}
    draw = {"risk_map": risk_map, "risk_map_by_line": side_by_side_maps, "risk_difference_map": difference_map}
    return {stem: fn(run.regions, **kw) for stem, fn in draw.items() if only is None or stem in only}


# -- public figures ------------------------------------------------------------------------------

def risk_map(region_result, *, context=None, data_date: str | None = None, params: FigureParams | None = None):
    """Choropleth of combined risk by region.

    Parameters
    ----------
    region_result : analog.regions.RegionResult
    context : GeoDataFrame, optional
        Drawn under the regions (polygons filled pale, lines grey).
    data_date : str, optional
        Shown in the caption.
    params : FigureParams, optional
        ``map_value`` {'mean_p', 'expected_losses'}, default='mean_p' chooses the colour variable.

    Returns
    -------
    matplotlib.figure.Figure
    """
    params = params or PARAMS()
    col = _COLUMNS[params.map_value]["combined"]
    with figure_style():
        m = _MapData(region_result, context, params)
        values = m.values(col)
        flagged = m.flagged(values)
        norm = Normalize(*_range(values[~flagged], params.map_value))
        fig, ax, cax = m.single_figure()
        m.draw(ax, values, plt.get_cmap(SEQUENTIAL), norm, flagged)
        obstacles = m.furniture(ax)
        if params.label_regions:
            m.labels(ax, values, flagged, obstacles, with_values=params.label_values, fontsize=7.5)
        _colourbar(fig, cax, plt.get_cmap(SEQUENTIAL), norm, MAP_UNITS[params.map_value], orientation="vertical")
        _no_data_legend(fig, m, anchor=(cax.get_position().x0 - 0.015, cax.get_position().y0 - 0.03))
        _title(fig, "Relative risk from warming, by region (combined evidence)",
               "Analog and trajectory evidence pooled; darker = higher expected losses among the taxa assessed")
        add_caption(fig, _caption(region_result, params, note=m.label_note), data_date=data_date)
    return fig


def side_by_side_maps(region_result, *, context=None, data_date: str | None = None,
                      params: FigureParams | None = None):
    """Analog and trajectory risk by region, side by side on one colour scale.

    Each panel uses the taxa that line assessed; one colour bar serves both, so equal colours
    mean equal values. Parameters and return as :func:`risk_map`.
    """
    params = params or PARAMS()
    cols = _COLUMNS[params.map_value]
    with figure_style():
        m = _MapData(region_result, context, params)
        va, vt = m.values(cols["analog"]), m.values(cols["trajectory"])
        fa, ft = m.flagged(va), m.flagged(vt)
        norm = Normalize(*_range(np.r_[va[~fa], vt[~ft]], params.map_value))
        cmap = plt.get_cmap(SEQUENTIAL)
        fig, axes, cax = m.pair_figure()
        for i, (ax, v, f, title) in enumerate(((axes[0], va, fa, "Analog evidence"),
                                                (axes[1], vt, ft, "Trajectory evidence"))):
            m.draw(ax, v, cmap, norm, f)
            ax.set_title(title, fontsize=9.5, loc="left")
            # one scale bar (left panel) and one projection note (under the right panel)
            obstacles = m.furniture(ax, small=True, note=i == 1, bar=i == 0, note_below=True)
            if params.label_regions:
                m.labels(ax, v, f, obstacles, with_values=False, fontsize=6.5)
        _colourbar(fig, cax, cmap, norm, MAP_UNITS[params.map_value].replace("\n", " ").replace(
            "= expected share of taxa lost", "expected share lost"), orientation="horizontal")
        pos = cax.get_position()
        _no_data_legend(fig, m, anchor=(pos.x1 + 0.07, (pos.y0 + pos.y1) / 2), loc="center left")
        _title(fig, "Risk by region from each line of evidence",
               "Same colour scale in both panels; each panel uses the taxa that line of evidence assessed")
        add_caption(fig, _caption(region_result, params, note=m.label_note), data_date=data_date)
    return fig


def difference_map(region_result, *, context=None, data_date: str | None = None,
                   params: FigureParams | None = None):
    """Analog minus trajectory risk by region, diverging colours centred on zero.

    The value is the mean of (analog_p − trajectory_p) over the region's taxa that have both
    lines (``mean_difference``), so the two sides are compared on the same taxa.
    Parameters and return as :func:`risk_map`.
    """
    params = params or PARAMS()
    with figure_style():
        m = _MapData(region_result, context, params)
        values = m.values("mean_difference")
        flagged = m.flagged(values)
        finite = values[~flagged]
        lim = _nice_up(np.nanmax(np.abs(finite))) if finite.size and np.isfinite(finite).any() else 0.1
        norm = TwoSlopeNorm(vcenter=0.0, vmin=-lim, vmax=lim)
        cmap = plt.get_cmap(DIFFERENCE_CMAP)
        fig, ax, cax = m.single_figure()
        m.draw(ax, values, cmap, norm, flagged)
        obstacles = m.furniture(ax)
        if params.label_regions:
            m.labels(ax, values, flagged, obstacles, with_values=params.label_values, fontsize=7.5, signed=True)
        cb = _colourbar(fig, cax, cmap, norm, "Analog minus trajectory\n(difference in mean probability of loss)",
                        orientation="vertical")
        cb.ax.text(2.6, 1.02, "analog higher", transform=cb.ax.transAxes, ha="center", va="bottom", fontsize=7)
        cb.ax.text(2.6, -0.02, "trajectory higher", transform=cb.ax.transAxes, ha="center", va="top", fontsize=7)
        _no_data_legend(fig, m, anchor=(cax.get_position().x0 - 0.01, cax.get_position().y0 - 0.08))
        _title(fig, "Where the two lines of evidence disagree, by region",
               "Purple: analog evidence points to higher risk; orange: trajectory evidence does. "
               "Same taxa on both sides")
        add_caption(fig, _caption(region_result, params, taxa="taxa with both lines of evidence",
                                     note=m.label_note),
                    data_date=data_date)
    return fig


def region_inset(region_id: str, region_result, *, context=None, params: FigureParams | None = None,
                 size_in: float = 2.4):
    """Small locator map: the whole study area, one region highlighted in its risk colour.

    Parameters
    ----------
    region_id : str
    region_result : analog.regions.RegionResult
    context : GeoDataFrame, optional
    params : FigureParams, optional
    size_in : float, default=2.4
        Width of the figure in inches.

    Returns
    -------
    matplotlib.figure.Figure
    """
    params = params or PARAMS()
    col = _COLUMNS[params.map_value]["combined"]
    with figure_style():
        m = _MapData(region_result, context, params)
        ids = m.layer["region_id"].astype(str).to_numpy()
        if region_id not in set(ids):
            raise KeyError(f"region_id {region_id!r} is not among the regions ({', '.join(ids[:10])}...)")
        values = m.values(col)
        flagged = m.flagged(values)
        norm = Normalize(*_range(values[~flagged], params.map_value))
        fig = plt.figure(figsize=(size_in, size_in * min(max(m.aspect, 0.5), 1.6)))
        ax = fig.add_axes([0.02, 0.02, 0.96, 0.96])
        target = ids == region_id
        shown = np.where(target, values, np.nan)
        m.draw(ax, shown, plt.get_cmap(SEQUENTIAL), norm, flagged & target, others="#EDEDED")
        _add_lines(ax, m.layer[target].boundary, color="black", linewidth=1.4, zorder=4)
        m.frame(ax)
    return fig


# -- helpers -------------------------------------------------------------------------------------

class _MapData:
    """The region layer and context in the map projection, with the drawing steps they share."""

    def __init__(self, region_result, context, params):
        self.result = region_result
        self.params = params
        self.label_note = ""  # set when only some regions are labelled
        self._labelled_counts: list[int] = []  # labels drawn, per map panel
        self.crs = pyproj.CRS.from_user_input(region_result.projection)
        self.layer = region_result.layer.to_crs(self.crs).reset_index(drop=True)
        x0, y0, x1, y1 = self.layer.total_bounds
        pad = 0.06 * max(x1 - x0, y1 - y0)
        self.extent = (x0 - pad, x1 + pad, y0 - pad, y1 + pad)
        self.aspect = (self.extent[3] - self.extent[2]) / (self.extent[1] - self.extent[0])
        self.context = None
        if context is not None and params.show_context and len(context):
            self.context = _clip_context(context, self.layer, self.extent, self.crs)

    def values(self, column: str) -> np.ndarray:
        return self.layer[column].to_numpy(dtype=float)

    def flagged(self, values: np.ndarray) -> np.ndarray:
        """Insufficient data, or nothing to show: hatched, never coloured as low risk."""
        return (self.layer["data_flag"].astype(str).to_numpy() != "ok") | ~np.isfinite(values)

    # figure layouts
    def _map_size(self, width_frac: float) -> tuple[float, float]:
        w = self.params.width_in * width_frac
        h = w * self.aspect
        if h > 7.5:  # tall study areas: keep the page height reasonable
            w, h = w * 7.5 / h, 7.5
        return w, h

    def single_figure(self):
        W = self.params.width_in
        mw, mh = self._map_size(0.72)
        H = mh + _TITLE_H + _FOOT_H
        fig = plt.figure(figsize=(W, H))
        ax = fig.add_axes([0.02, _FOOT_H / H, mw / W, mh / H])
        cax = fig.add_axes([0.02 + mw / W + 0.05, (_FOOT_H + 0.42 * mh) / H, 0.022, 0.5 * mh / H])
        return fig, ax, cax

    def pair_figure(self):
        W = self.params.width_in
        mw, mh = self._map_size(0.47)
        foot = _FOOT_H + 0.8
        H = mh + _TITLE_H + 0.25 + foot
        fig = plt.figure(figsize=(W, H))
        axes = [fig.add_axes([0.02 + i * 0.5, foot / H, mw / W, mh / H]) for i in range(2)]
        cax = fig.add_axes([0.12, (_FOOT_H + 0.36) / H, 0.48, 0.12 / H])
        return fig, axes, cax

    # drawing
    def draw(self, ax, values, cmap, norm, flagged, *, others: str | None = None):
        self.frame(ax)
        if self.context is not None:
            is_poly = self.context.geom_type.str.contains("Polygon").to_numpy()
            if is_poly.any():
                _add_polygons(ax, self.context.geometry[is_poly], facecolor=CONTEXT_FILL, edgecolor=CONTEXT_LINE,
                              linewidth=0.5, zorder=1)
            if (~is_poly).any():
                _add_lines(ax, self.context.geometry[~is_poly], color=CONTEXT_LINE, linewidth=0.7, zorder=1)
        geoms = self.layer.geometry
        coloured = ~flagged & np.isfinite(values)
        if coloured.any():
            _add_polygons(ax, geoms[coloured], facecolor=cmap(norm(values[coloured])), edgecolor="none",
                          linewidth=0, zorder=2)
        rest = ~coloured & ~flagged
        if others is not None and rest.any():
            _add_polygons(ax, geoms[rest], facecolor=others, edgecolor="none", linewidth=0, zorder=2)
        if flagged.any():
            _add_polygons(ax, geoms[flagged], facecolor=NO_DATA_COLOUR, edgecolor=NO_DATA_EDGE, hatch=NO_DATA_HATCH,
                          linewidth=0, zorder=2)
        _add_lines(ax, self.layer.boundary, color=REGION_EDGE, linewidth=0.6, zorder=3)

    def frame(self, ax):
        ax.set_xlabel("")
        ax.set_ylabel("")
        ax.set_xlim(*self.extent[:2])
        ax.set_ylim(*self.extent[2:])
        ax.set_aspect("equal")
        ax.set_xticks([])
        ax.set_yticks([])
        for s in ax.spines.values():
            s.set_visible(True)
            s.set_color("#BBBBBB")
            s.set_linewidth(0.6)

    def furniture(self, ax, *, small: bool = False, note: bool = True, bar: bool = True,
                  note_below: bool = False) -> list[Bbox]:
        """Scale bar and projection note; returns their display boxes (labels keep clear of them)."""
        fig = ax.figure
        fs = 5.8 if small else 6.5
        boxes = []
        ax.apply_aspect()
        r = fig.canvas.get_renderer()
        if note:
            text = f"{self.result.projection_label}; scale true near the centre" if note_below else \
                f"{self.result.projection_label}\nscale true near the centre"
            xy, va = ((1.0, -0.015), "top") if note_below else ((0.99, 0.012), "bottom")
            art = ax.text(*xy, text, transform=ax.transAxes, ha="right", va=va, fontsize=fs, color="#555555",
                          zorder=7, linespacing=1.15)
            if not note_below:
                boxes.append(art.get_window_extent(r))
        if bar and self.params.scale_bar:
            arts = _scale_bar(ax, self.extent, fontsize=fs)
            boxes.append(Bbox.union([a.get_window_extent(r) for a in arts]))
        return boxes

    def labels(self, ax, values, flagged, obstacles, *, with_values: bool, fontsize: float, signed: bool = False):
        field = "name" if self.params.label_field == "name" else "region_id"
        names = [short_label(n, 28) for n in self.layer[field].astype(str)]
        pts = self.layer.geometry.representative_point()
        anchors = np.column_stack([pts.x.to_numpy(), pts.y.to_numpy()])
        texts = []
        for name, v, f in zip(names, values, flagged):
            if not with_values:
                texts.append(name)
            elif f:
                texts.append(f"{name}\n(insufficient data)")
            else:
                texts.append(f"{name}\n{v:+.2f}" if signed else f"{name}\n{_fmt_value(v, self.params.map_value)}")
        ax.apply_aspect()
        keep, order = self._labelled(ax, texts, values, flagged, fontsize, signed)
        # regions smaller on the page than a label are kept clear, so their fill (or hatching)
        # stays visible; their labels move off with a leader line
        small = []
        for geom in self.layer.geometry.iloc[keep]:
            x0, y0, x1, y1 = geom.bounds
            (a, b), (c, d) = ax.transData.transform([(x0, y0), (x1, y1)])
            if (c - a) < 40 or (d - b) < 25:  # pixels at 100 dpi
                small.append(Bbox([[a - 2, b - 2], [c + 2, d + 2]]))
        shown = place_labels(ax, anchors[keep], [texts[i] for i in keep], obstacles=list(obstacles) + small,
                             fontsize=fontsize, linespacing=1.05, priority=order)
        self._labelled_counts.append(len(shown))
        n = len(texts)
        if min(self._labelled_counts) < n:
            what = "largest differences" if signed else "highest values"
            c = self._labelled_counts
            counts = f"{c[0]} (left panel) and {c[1]} (right panel)" if len(c) == 2 else str(c[-1])
            self.label_note = (f"Labels name {counts} of the {n:,} regions ({what} first; labels that "
                               "would overlap are left out); region_summary.csv lists every region.")

    def _labelled(self, ax, texts, values, flagged, fontsize, signed) -> tuple[np.ndarray, np.ndarray]:
        """Indices of the regions to label (layer order), and their order of importance.

        Every region when they fit: at most ``max_region_labels``, with labels covering at most
        an eighth of the map (a limit chosen by looking at maps of 50 and 500 regions: denser
        labels are pushed off their regions onto tangles of leader lines). Otherwise
        the regions with the highest values (largest differences when ``signed``; regions
        without data last) are labelled. Labels that still collide after placement are left
        out, least important first, and ``self.label_note`` says so for the caption.
        """
        n = len(texts)
        renderer = ax.figure.canvas.get_renderer()
        probe = ax.text(0, 0, "", ha="center", va="center", fontsize=fontsize, bbox=LABEL_BOX, linespacing=1.05)
        areas = []
        for t in dict.fromkeys(texts):
            probe.set_text(t)
            e = probe.get_window_extent(renderer)
            areas.append(e.width * e.height)
        probe.remove()
        box = ax.get_window_extent(renderer)
        room = int(0.12 * box.width * box.height / max(float(np.median(areas)), 1.0)) if areas else n
        k = min(n, int(self.params.max_region_labels), room)
        v = np.abs(values) if signed else np.asarray(values, dtype=float)
        priority = np.where(np.asarray(flagged) | ~np.isfinite(v), -np.inf, v)
        ranked = np.argsort(-priority, kind="stable")[:k]
        keep = np.sort(ranked)
        # positions of the kept labels in ``keep``, most important first
        order = np.searchsorted(keep, ranked)
        return keep, order


def _rings_path(geom):
    """One matplotlib Path for a (Multi)Polygon with its holes.

    Matplotlib fills by the non-zero winding rule, so rings are oriented first (exterior
    counter-clockwise, holes clockwise) for holes to stay empty.
    """
    from matplotlib.path import Path
    from shapely.geometry.polygon import orient

    polys = [orient(p, sign=1.0) for p in getattr(geom, "geoms", [geom])]
    verts, codes = [], []
    for poly in polys:
        for ring in [poly.exterior, *poly.interiors]:
            xy = np.asarray(ring.coords)[:, :2]
            c = np.full(len(xy), Path.LINETO, dtype=np.uint8)
            c[0] = Path.MOVETO
            c[-1] = Path.CLOSEPOLY
            verts.append(xy)
            codes.append(c)
    return Path(np.concatenate(verts), np.concatenate(codes))


def _add_polygons(ax, geoms, **kw):
    """Polygons as one PatchCollection (drawn directly: no intermediate canvas draws)."""
    from matplotlib.collections import PatchCollection
    from matplotlib.patches import PathPatch

    patches = [PathPatch(_rings_path(g)) for g in geoms if g is not None and not g.is_empty]
    coll = PatchCollection(patches, **kw)
    ax.add_collection(coll, autolim=False)
    return coll


def _add_lines(ax, geoms, **kw):
    """(Multi)LineStrings and polygon boundaries as one LineCollection."""
    from matplotlib.collections import LineCollection

    segs = []
    for g in geoms:
        if g is None or g.is_empty:
            continue
        for part in getattr(g, "geoms", [g]):
            segs.append(np.asarray(part.coords)[:, :2])
    coll = LineCollection(segs, **kw)
    ax.add_collection(coll, autolim=False)
    return coll


def _clip_context(context, layer, extent, crs):
    """Context features near the map, projected; clipped in geographic space first so far-away
    features cannot fold over in the azimuthal projection."""
    from shapely.geometry import box

    frame = box(extent[0], extent[2], extent[1], extent[3])
    import geopandas as gpd

    frame_geo = gpd.GeoSeries([frame], crs=crs).to_crs("EPSG:4326")
    minx, miny, maxx, maxy = frame_geo.total_bounds
    dx, dy = (maxx - minx) * 0.3, (maxy - miny) * 0.3
    ctx = context.to_crs("EPSG:4326") if context.crs is not None else context
    ctx = ctx.clip(box(minx - dx, miny - dy, maxx + dx, maxy + dy))
    ctx = ctx[~ctx.is_empty]
    return ctx.to_crs(crs) if len(ctx) else None


def _scale_bar(ax, extent, *, fontsize: float):
    """Two-segment scale bar in the lower left; length a round number near a fifth of the width."""
    width_m = extent[1] - extent[0]
    height_m = extent[3] - extent[2]
    target_km = width_m / 5 / 1000
    exp = 10 ** math.floor(math.log10(target_km))
    length_km = max(m * exp for m in (1, 2, 5) if m * exp <= target_km)
    L = length_km * 1000
    x0 = extent[0] + 0.04 * width_m
    y0 = extent[2] + 0.05 * height_m
    h = 0.012 * height_m + 0.004 * width_m
    # a pale backing card keeps the bar readable over dark regions
    arts = [ax.add_patch(Rectangle((x0 - 0.015 * width_m, y0 - 0.02 * height_m), L + 0.06 * width_m,
                                   h * 1.6 + 0.07 * height_m, facecolor="white", edgecolor="none", alpha=0.85,
                                   zorder=6.5)),
            ax.add_patch(Rectangle((x0, y0), L / 2, h, facecolor="#333333", edgecolor="#333333", lw=0.6, zorder=7)),
            ax.add_patch(Rectangle((x0 + L / 2, y0), L / 2, h, facecolor="white", edgecolor="#333333", lw=0.6,
                                   zorder=7))]
    for frac, text in ((0, "0"), (1, f"{length_km:g} km")):  # labels above the bar's ends
        arts.append(ax.text(x0 + frac * L, y0 + h * 1.6, text, ha="center", va="bottom", fontsize=fontsize,
                            zorder=7, color="#333333"))
    return arts


def _range(values: np.ndarray, kind: str) -> tuple[float, float]:
    """Colour range: the data range rounded outward (0.05 for probabilities, a round number of
    taxa for counts), never narrower than 0.1 (or 10 % of the largest count) so that small
    differences between regions do not span the whole palette."""
    v = values[np.isfinite(values)]
    if not v.size:
        return 0.0, 1.0
    if kind == "mean_p":
        step, min_span = 0.05, 0.1
    else:
        step = 10 ** math.floor(math.log10(max(v.max(), 1e-9))) / 2
        min_span = max(0.1 * v.max(), step)
    lo, hi = v.min(), v.max()
    if hi - lo < min_span:
        mid = (hi + lo) / 2
        lo, hi = mid - min_span / 2, mid + min_span / 2
    lo = max(0.0, math.floor(lo / step + 1e-9) * step)
    hi = math.ceil(hi / step - 1e-9) * step
    if kind == "mean_p":
        hi = min(hi, 1.0)
    return lo, hi


def _nice_up(x: float) -> float:
    if not np.isfinite(x) or x <= 0:
        return 0.05
    return math.ceil(x / 0.05) * 0.05


def _fmt_value(v: float, kind: str) -> str:
    return f"{v:.2f}" if kind == "mean_p" else f"{v:.1f} taxa"


def _colourbar(fig, cax, cmap, norm, label, *, orientation):
    from matplotlib.cm import ScalarMappable

    sm = ScalarMappable(norm=norm, cmap=cmap)
    cb = fig.colorbar(sm, cax=cax, orientation=orientation)
    cb.set_label(label, fontsize=7.5)
    cb.ax.tick_params(labelsize=7)
    cb.outline.set_linewidth(0.5)
    return cb


def _no_data_legend(fig, m, *, anchor, loc: str = "upper left"):
    """Key for the hatched insufficient-data regions and the context layer, when shown."""
    handles = []
    if m.flagged(np.zeros(len(m.layer))).any():
        crit = getattr(m.result.params, "min_taxa", None)
        recs = getattr(m.result.params, "min_region_records", None)
        label = "Insufficient data"
        if crit is not None:
            label += f"\n(< {crit} taxa or\n< {recs} records)"
        handles.append(Patch(facecolor=NO_DATA_COLOUR, edgecolor=NO_DATA_EDGE, hatch=NO_DATA_HATCH, label=label))
    if m.context is not None and m.context.geom_type.str.contains("Polygon").any():
        handles.append(Patch(facecolor=CONTEXT_FILL, edgecolor=CONTEXT_LINE, linewidth=0.5,
                             label="Context layer\n(not assessed)"))
    if handles:
        fig.legend(handles=handles, loc=loc, bbox_to_anchor=anchor, fontsize=7, handlelength=2.2, handleheight=1.6,
                   frameon=False)


def _title(fig, title: str, subtitle: str):
    H = fig.get_figheight()
    fig.text(0.02, 1 - 0.12 / H, title, ha="left", va="top", fontsize=11, fontweight="bold")
    fig.text(0.02, 1 - 0.36 / H, subtitle, ha="left", va="top", fontsize=8, color="#333333")


def _caption(region_result, params, taxa: str = "assessed taxa", note: str = "") -> str:
    what = ("Colour: mean probability of loss among a region's " + taxa if params.map_value == "mean_p"
            else "Colour: expected number of " + taxa + " lost")
    hatched = (region_result.region_summary["data_flag"] != "ok").any()
    return (f"{what}, from modern occurrence records."
            + (" Hatched: too few taxa or records to map (not low risk)." if hatched else "")
            + f" {region_result.unassigned:,} records fell outside every region."
            + (f" {note}" if note else ""))
