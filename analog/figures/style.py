"""One figure style for every chart and map the tool draws.

Palettes are colour-blind safe (ColorBrewer sequential and diverging schemes,
Brewer & Harrower; viridis family). Tier colours are a purple ramp of the
project's own choosing, deliberately unlike any assessment body's scheme.
Figure functions return ``matplotlib.figure.Figure`` objects and never save;
the output writer saves them.
"""
from __future__ import annotations

from contextlib import contextmanager

import matplotlib

matplotlib.use("Agg")
import matplotlib.pyplot as plt  # noqa: E402

from .._resources import resource_dir  # noqa: E402

SEQUENTIAL = "YlGnBu"       # risk, low -> high (ColorBrewer, colour-blind safe)
DIVERGING = "PuOr_r"        # analog minus trajectory, centred on zero (ColorBrewer, colour-blind safe)
CATEGORICAL = ["#0072B2", "#E69F00", "#009E73", "#CC79A7", "#56B4E9", "#D55E00", "#F0E442", "#000000"]
# Okabe & Ito (2008) colour-blind-safe qualitative palette.
ANALOG_COLOUR = "#0072B2"
TRAJECTORY_COLOUR = "#E69F00"
COMBINED_COLOUR = "#3B3B3B"
NO_DATA_COLOUR = "#DDDDDD"
NO_DATA_HATCH = "////"

# Relative vulnerability tiers, most to least; plain names of the project's own.
TIER_NAMES = ("highest", "high", "moderate", "lower")
TIER_COLOURS = {"highest": "#3f007d", "high": "#6a51a3", "moderate": "#9e9ac8", "lower": "#dadaeb"}

CAUTION = ("Relative vulnerability from deep-time evidence; not a forecast or a formal threat "
           "assessment. Defer to official assessments and expert review.")


def short_label(text, max_chars: int = 36) -> str:
    """A name cut to ``max_chars`` characters with an ellipsis, for labels in figures.

    Tables and the briefing keep full names; a figure cannot grow to fit a 1,000-character name.
    """
    text = str(text)
    return text if len(text) <= max_chars else text[: max_chars - 1].rstrip() + "\u2026"


def style_path():
    """Path of the shipped matplotlib style sheet (maps/analog.mplstyle)."""
    return resource_dir("maps") / "analog.mplstyle"


@contextmanager
def figure_style():
    """Context manager applying the project style sheet."""
    with plt.style.context(str(style_path())):
        yield


def add_caption(fig, text: str, *, data_date: str | None = None):
    """Caption line at the foot of a figure: data note, date and the short caution."""
    parts = [text] if text else []
    if data_date:
        parts.append(f"Data as of {data_date}.")
    parts.append(CAUTION)
    text = "  ".join(parts)
    art = fig.text(0.01, 0.005, text, ha="left", va="bottom", fontsize=6.5, color="#444444", wrap=True)
    # matplotlib's own wrapping measures the line word by word at every draw; the lines are
    # fixed here once instead (the Text keeps the whole caption as its text)
    art._get_wrapped_text = _FixedLines(art, text, wrap_to_width(text, 0.98 * fig.get_figwidth(), fontsize=6.5))
    return fig


class _FixedLines:
    """Stands in for ``Text._get_wrapped_text``: the lines found once, while the text is unchanged."""

    def __init__(self, art, text: str, lines: str):
        self.art, self.text, self.lines = art, text, lines

    def __call__(self) -> str:
        if self.art.get_text() == self.text:
            return self.lines
        return type(self.art)._get_wrapped_text(self.art)


def wrap_to_width(text: str, width_in: float, *, fontsize: float) -> str:
    """Break ``text`` into lines about ``width_in`` inches long at ``fontsize`` points.

    One measurement of the whole string gives the mean character width, and lines are
    filled to that. Matplotlib's own ``wrap=True`` measures a growing line word by word at
    every draw, which costs far more than the rest of a caption.
    """
    import textwrap

    from matplotlib.font_manager import FontProperties
    from matplotlib.textpath import TextToPath

    if not text:
        return text
    width_pt = TextToPath().get_text_width_height_descent(text, FontProperties(size=fontsize), ismath=False)[0]
    per_char = width_pt / len(text)
    # 5 % spare: hinted raster text runs a little wider than these outline metrics
    n_chars = max(20, int(0.95 * width_in * 72 / per_char)) if per_char > 0 else len(text)
    return textwrap.fill(text, n_chars, break_on_hyphens=False)

def panel_title(ax, text: str, *, fontsize: float = 8, pad_pt: float = 4.0, **kw):
    """A left-aligned axes title at a fixed height just above the axes.

    Giving ``y`` stops matplotlib from re-placing the title clear of the axes' decorations
    at every draw, which with many small panels is a large share of the render time. Use it
    where nothing is drawn above the axes (no top ticks or labels).
    """
    return ax.set_title(text, loc="left", fontsize=fontsize, fontweight="normal", y=1.0, pad=pad_pt, **kw)


def fixed_label_positions(ax, *, x: float = -0.2, y: float = -0.16):
    """Place an axes' x and y labels at fixed axes-fraction offsets.

    Matplotlib otherwise re-places them clear of the tick labels of this axes and its
    siblings at every draw (a text layout of every tick label). ``x`` is the horizontal
    offset of the y label, ``y`` the vertical offset of the x label.
    """
    ax.xaxis.set_label_coords(0.5, y)
    ax.yaxis.set_label_coords(x, 0.5)


def _sign(x: float) -> float:
    return 1.0 if x > 0 else (-1.0 if x < 0 else 0.0)


def _push_apart(pos, half, obs, box, max_iter: int):
    """The pushes of :func:`place_labels` on display coordinates, in plain floats.

    Each pass visits the pairs in a fixed order and moves both labels of an overlapping pair
    apart along the axis of least overlap, then moves a label off any obstacle (the least move
    that stays inside the axes), then keeps every label inside the axes. Plain Python floats
    give the same numbers as numpy arrays of two elements at a fraction of the cost.
    """
    import numpy as np

    n = len(pos)
    px, py = [float(v) for v in pos[:, 0]], [float(v) for v in pos[:, 1]]
    hx, hy = [float(v) for v in half[:, 0]], [float(v) for v in half[:, 1]]
    ob = [(float(c[0]), float(c[1]), float(h[0]), float(h[1])) for c, h in obs]
    x0, y0, x1, y1 = (float(v) for v in box)
    lo_x, lo_y = [x0 + h for h in hx], [y0 + h for h in hy]
    hi_x, hi_y = [x1 - h for h in hx], [y1 - h for h in hy]
    for _ in range(max_iter):
        moved = False
        for i in range(n):
            for j in range(i + 1, n):
                dx, dy = px[j] - px[i], py[j] - py[i]
                ox, oy = hx[i] + hx[j] - abs(dx), hy[i] + hy[j] - abs(dy)
                if ox > 0 and oy > 0:
                    if oy < ox or oy == ox:           # y has the least overlap (ties go to y)
                        sign = _sign(dy) or 1.0
                        py[i] -= sign * oy / 2 + 0.5
                        py[j] += sign * oy / 2 + 0.5
                    else:
                        sign = _sign(dx) or 1.0
                        px[i] -= sign * ox / 2 + 0.5
                        px[j] += sign * ox / 2 + 0.5
                    moved = True
            for cx, cy, ohx, ohy in ob:
                dx, dy = px[i] - cx, py[i] - cy
                ox, oy = hx[i] + ohx - abs(dx), hy[i] + ohy - abs(dy)
                if ox > 0 and oy > 0:
                    # least move first; if that leaves the axes, go round the other way or axis
                    sx, sy = _sign(dx) or 1.0, _sign(dy) or 1.0
                    tries = sorted([(ox + 0.5, 0, sx), (oy + 0.5, 1, sy)])
                    tries += [(2 * ohx + hx[i] * 2 - ox + 0.5, 0, -sx), (2 * ohy + hy[i] * 2 - oy + 0.5, 1, -sy)]
                    for dist, a, sgn in tries:
                        coord, lo, hi = (px, lo_x, hi_x) if a == 0 else (py, lo_y, hi_y)
                        new = coord[i] + sgn * dist
                        if lo[i] <= new <= hi[i]:
                            coord[i] = new
                            break
                    else:
                        dist, a, sgn = tries[0]
                        coord = px if a == 0 else py
                        coord[i] += sgn * dist
                    moved = True
        for i in range(n):   # inside the axes (np.clip(pos, lo, max(lo, hi)))
            px[i] = min(max(px[i], lo_x[i]), max(lo_x[i], hi_x[i]))
            py[i] = min(max(py[i], lo_y[i]), max(lo_y[i], hi_y[i]))
        if not moved:
            break
    return np.column_stack([px, py]) if n else pos


# -- map and chart details (added with the maps) ------------------------------------------------
# Analog minus trajectory on maps: ColorBrewer PuOr, orange where the trajectory line is higher
# (as TRAJECTORY_COLOUR), purple where the analog line is higher; centred on zero.
DIFFERENCE_CMAP = "PuOr"
CONTEXT_FILL = "#E4E1D9"     # context polygons (e.g. land) under the regions; keyed on maps
CONTEXT_LINE = "#9C9C9C"     # context lines (e.g. a coastline)
REGION_EDGE = "#4D4D4D"      # region borders
NO_DATA_EDGE = "#7A7A7A"     # hatch lines of insufficient-data regions
LABEL_BOX = {"boxstyle": "round,pad=0.18", "facecolor": "white", "edgecolor": "none", "alpha": 0.82}
LEADER_LINE = {"color": "#555555", "linewidth": 0.6}


def place_labels(ax, anchors, texts, *, obstacles=(), fontsize: float = 7.5, max_iter: int = 400,
                 pad_px: float = 2.0, anchor_dot: bool = True, priority=None, **text_kw):
    """Write ``texts`` near ``anchors`` (data coordinates) so that no two labels overlap.

    Labels start centred on their anchors and are pushed apart, pair by pair along the axis of
    least overlap, until none overlap each other, the ``obstacles`` (display-space Bboxes such
    as a scale bar) or the axes edge. The order of pushes is fixed, so the result is
    deterministic. A label that ends up away from its anchor gets a leader line (and a dot at
    the anchor when ``anchor_dot``).

    With ``priority`` (label indices, most important first), labels that still overlap a label
    of higher priority or an obstacle after the pushes are left out, so none collide. Returns
    the Text artists drawn.
    """
    import numpy as np

    fig = ax.figure
    ax.apply_aspect()  # fixes the data-to-display transform without a full draw
    renderer = fig.canvas.get_renderer()
    anchors = np.asarray(anchors, dtype=float).reshape(-1, 2)
    kw = {"ha": "center", "va": "center", "fontsize": fontsize, "zorder": 6, "bbox": LABEL_BOX}
    kw.update(text_kw)
    arts = [ax.text(x, y, s, **kw) for (x, y), s in zip(anchors, texts)]
    if not arts:
        return arts
    ext = [a.get_window_extent(renderer) for a in arts]
    half = np.array([[e.width / 2 + pad_px, e.height / 2 + pad_px] for e in ext])
    pos = ax.transData.transform(anchors)
    start = pos.copy()
    box = ax.get_window_extent(renderer)
    obs = [(np.array([(b.x0 + b.x1) / 2, (b.y0 + b.y1) / 2]), np.array([b.width / 2, b.height / 2]))
           for b in obstacles]
    pos = _push_apart(pos, half, obs, (box.x0, box.y0, box.x1, box.y1), max_iter)
    shown = np.ones(len(arts), dtype=bool)
    if priority is not None:
        shown[:] = False
        ink = half - pad_px  # the label boxes themselves, without the spacing the pushes keep
        for i in priority:
            others = [(pos[j], ink[j]) for j in np.flatnonzero(shown)] + obs
            shown[i] = not any(np.all(np.abs(pos[i] - c) < ink[i] + h) for c, h in others)
        for a, keep in zip(arts, shown):
            if not keep:
                a.remove()
    inv = ax.transData.inverted()
    for a, p, s, h, anchor, keep in zip(arts, pos, start, half, anchors, shown):
        if not keep:
            continue
        a.set_position(inv.transform(p))
        if np.hypot(*(p - s)) > 0.8 * h[1]:
            # the line stops at the edge of the label's box, not under its text
            v = s - p
            t = min(h[0] / abs(v[0]) if v[0] else np.inf, h[1] / abs(v[1]) if v[1] else np.inf)
            if t >= 1:
                continue
            end = inv.transform(p + v * t)
            ax.plot([anchor[0], end[0]], [anchor[1], end[1]], zorder=5, **LEADER_LINE)
            if anchor_dot:
                ax.plot([anchor[0]], [anchor[1]], marker="o", markersize=1.8, color=LEADER_LINE["color"], zorder=5)
    return [a for a, keep in zip(arts, shown) if keep]
