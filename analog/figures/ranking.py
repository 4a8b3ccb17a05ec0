"""Charts of the combined ranking: analog vs trajectory ranks, and the top taxa with intervals."""
from __future__ import annotations

import math

import matplotlib.pyplot as plt
import numpy as np
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.transforms import Bbox

from ..combine.compare import paired_ranks
from .params import PARAMS, FigureParams
from .style import (short_label, ANALOG_COLOUR, TIER_COLOURS, TIER_NAMES, TRAJECTORY_COLOUR, add_caption, figure_style,
                    place_labels)

__all__ = ["ranking_figures", "rank_scatter", "top_taxa_bars"]


def ranking_figures(run, *, only=None) -> dict:
    """Both ranking charts of a pipeline run, keyed by file stem.

    ``run`` is an :class:`analog.pipeline.RunResult` with ``combined`` and ``study``;
    ``only`` (a collection of stems) draws just those.
    """
    study = run.study
    params = study.config.sections.get("figures") or PARAMS()
    kw = {"data_date": study.config.data_date, "params": params}
    draw = {"rank_scatter": rank_scatter, "top_taxa": top_taxa_bars}
    return {stem: fn(run.combined, **kw) for stem, fn in draw.items() if only is None or stem in only}


def rank_scatter(combined_result, *, data_date: str | None = None, params: FigureParams | None = None):
    """Analog rank against trajectory rank for taxa with both lines, disagreements named.

    Parameters
    ----------
    combined_result : analog.combine.CombinedResult
    data_date : str, optional
        Shown in the caption.
    params : FigureParams, optional
        ``n_labelled`` sets how many of the largest disagreements are named.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    Ranks are taken among the taxa with both lines (1 = most vulnerable), so the two axes cover
    the same taxa; rank 1 sits at the top and at the right. Points on the dashed line are ranked
    alike by both lines.
    """
    params = params or PARAMS()
    pr = paired_ranks(combined_result.rankings)
    n = len(pr)
    with figure_style():
        fig = plt.figure(figsize=(params.width_in, params.width_in * 0.78))
        ax = fig.add_axes([0.1, 0.17, 0.6, 0.7])
        if n == 0:
            ax.text(0.5, 0.5, "No taxon has both lines of evidence", ha="center", va="center",
                    transform=ax.transAxes)
            ax.set_axis_off()
            add_caption(fig, "", data_date=data_date)
            return fig
        lim = (n + 0.5 + 0.02 * n, 0.5 - 0.02 * n)
        ax.plot([1, n], [1, n], ls="--", lw=0.8, color="#888888", zorder=1)
        colours = [TIER_COLOURS.get(t, "#FFFFFF") for t in pr["tier"]]
        ax.scatter(pr["analog_rank"], pr["trajectory_rank"], s=26, c=colours, edgecolors="#333333",
                   linewidths=0.45, zorder=3)
        ax.set_xlim(*lim)
        ax.set_ylim(*lim)
        ax.set_aspect("equal")
        ax.set_xlabel("Rank by analog evidence (1 = most vulnerable)")
        ax.set_ylabel("Rank by trajectory evidence (1 = most vulnerable)")
        ticks = _rank_ticks(n)
        ax.set_xticks(ticks)
        ax.set_yticks(ticks)
        kw = {"transform": ax.transAxes, "fontsize": 7.5, "color": "#555555", "style": "italic"}
        ax.text(0.98, 0.02, "analog evidence\nranks higher", ha="right", va="bottom", **kw)
        ax.text(0.02, 0.98, "trajectory evidence\nranks higher", ha="left", va="top", **kw)

        dis = combined_result.disagreements.head(params.n_labelled)
        if len(dis):
            named = pr.set_index("taxon_id").loc[dis["taxon_id"]]
            anchors = np.column_stack([named["analog_rank"], named["trajectory_rank"]])
            ax.apply_aspect()
            pts = ax.transData.transform(np.column_stack([pr["analog_rank"], pr["trajectory_rank"]]))
            r = fig.canvas.get_renderer()
            corner = [t.get_window_extent(r) for t in ax.texts]
            dots = [Bbox([[x - 4, y - 4], [x + 4, y + 4]]) for x, y in pts]
            place_labels(ax, anchors, [short_label(n, 28) for n in named["scientificName"].astype(str)], obstacles=dots + corner,
                         fontsize=7, style="italic", anchor_dot=False)

        handles = [Patch(facecolor=TIER_COLOURS[t], edgecolor="#333333", linewidth=0.45, label=t)
                   for t in TIER_NAMES if (pr["tier"] == t).any()]
        ax.legend(handles=handles, title="Combined tier", loc="upper left", bbox_to_anchor=(1.03, 1.0),
                  fontsize=7.5, title_fontsize=8)
        comp = combined_result.comparison.set_index("statistic")
        fig.text(0.02, 0.975, "Do the two lines of evidence rank taxa alike?", ha="left", va="top",
                 fontsize=11, fontweight="bold")
        fig.text(0.02, 0.935, _agreement_line(comp, n, combined_result), ha="left", va="top", fontsize=8,
                 color="#333333")
        add_caption(fig, f"Each point is one of the {n} taxa with both lines of evidence; ranks among those taxa. "
                         f"Named: the {len(dis)} largest rank differences (see disagreements.csv).",
                    data_date=data_date)
    return fig


def top_taxa_bars(combined_result, *, data_date: str | None = None, params: FigureParams | None = None):
    """Ranked bar chart of the most vulnerable taxa with interval bars and tier colours.

    Parameters
    ----------
    combined_result : analog.combine.CombinedResult
    data_date : str, optional
    params : FigureParams, optional
        ``n_top_taxa`` sets how many taxa are shown.

    Returns
    -------
    matplotlib.figure.Figure

    Notes
    -----
    Bars are the combined probability, coloured by tier; the black line is its interval from the
    pooled draws; the markers show each line's own probability. Taxa with one line of evidence
    say so at the right.
    """
    params = params or PARAMS()
    r = combined_result.rankings
    top = r[r["evidence"] != "none"].head(params.n_top_taxa).reset_index(drop=True)
    n = len(top)
    interval = getattr(combined_result.params, "interval", 0.9)
    with figure_style():
        fig = plt.figure(figsize=(params.width_in, 2.0 + 0.26 * max(n, 3)))
        H = fig.get_figheight()
        ax = fig.add_axes([0.3, 1.3 / H, 0.55, (H - 2.0) / H])
        y = np.arange(n)
        colours = [TIER_COLOURS.get(t, "#FFFFFF") for t in top["tier"]]
        ax.barh(y, top["combined_p"], color=colours, height=0.68, zorder=2)
        lo = (top["combined_p"] - top["combined_low"]).clip(lower=0)
        hi = (top["combined_high"] - top["combined_p"]).clip(lower=0)
        ax.errorbar(top["combined_p"], y, xerr=[lo, hi], fmt="none", ecolor="black", elinewidth=0.9, capsize=2.2,
                    zorder=3)
        ax.scatter(top["analog_p"], y, marker="o", s=16, facecolor=ANALOG_COLOUR, edgecolor="white", linewidths=0.5,
                   zorder=4, clip_on=False)
        ax.scatter(top["trajectory_p"], y, marker="D", s=14, facecolor=TRAJECTORY_COLOUR, edgecolor="white",
                   linewidths=0.5, zorder=4, clip_on=False)
        ax.set_yticks(y)
        ax.set_yticklabels([f"{i + 1}. {short_label(name)}" for i, name in enumerate(top["scientificName"].astype(str))],
                           fontstyle="italic", fontsize=7.5)
        ax.invert_yaxis()
        xmax = np.nanmax(np.r_[top["combined_high"], top["analog_p"], top["trajectory_p"], 0.05])
        xmax = min(1.0, math.ceil(xmax * 10 + 1e-9) / 10)
        ax.set_xlim(0, xmax)
        ax.set_xlabel("Probability of loss (relative vulnerability)")
        ax.grid(axis="x", color="#E5E5E5", linewidth=0.6, zorder=0)
        ax.set_axisbelow(True)
        for yi, ev in zip(y, top["evidence"]):
            if ev != "both":
                ax.text(1.01, yi, ev, transform=ax.get_yaxis_transform(), va="center", ha="left", fontsize=7,
                        color="#555555")
        handles = [Patch(facecolor=TIER_COLOURS[t], label=f"tier: {t}") for t in TIER_NAMES if (top["tier"] == t).any()]
        handles += [Line2D([], [], color="black", lw=0.9, label=f"{100 * interval:g}% interval"),
                    Line2D([], [], marker="o", ls="none", markerfacecolor=ANALOG_COLOUR, markeredgecolor="white",
                           label="analog evidence"),
                    Line2D([], [], marker="D", ls="none", markerfacecolor=TRAJECTORY_COLOUR, markeredgecolor="white",
                           markersize=5, label="trajectory evidence")]
        # the key sits under the axis, clear of bars of any length
        fig.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, 0.75 / H), ncol=4, fontsize=7,
                   columnspacing=1.2, handlelength=1.6)
        w = combined_result.weights
        source = {"skill": "from each line's measured skill", "user": "set in study.toml",
                  "single line": "one line of evidence only"}.get(w["source"], w["source"])
        fig.text(0.02, 1 - 0.12 / H, f"The {n} taxa ranked most vulnerable (combined evidence)", ha="left", va="top",
                 fontsize=11, fontweight="bold")
        fig.text(0.02, 1 - 0.38 / H, f"Bars: combined probability, coloured by tier. Weights: analog "
                                     f"{w['analog']:.2f}, trajectory {w['trajectory']:.2f} ({source}).",
                 ha="left", va="top", fontsize=8, color="#333333")
        add_caption(fig, "Probabilities rank taxa against each other; they are not chances of loss by a date.",
                    data_date=data_date)
    return fig


def _rank_ticks(n: int) -> list[int]:
    step = max(1, 10 ** math.floor(math.log10(max(n, 1))) // (2 if n < 5 * 10 ** math.floor(math.log10(max(n, 1)))
                                                                  else 1))
    return [1] + [t for t in range(step, n + 1, step) if t > 1]


def _agreement_line(comp, n: int, combined_result) -> str:
    def part(stat, label):
        if stat not in comp.index or not np.isfinite(comp.at[stat, "estimate"]):
            return f"{label} not computed"
        row = comp.loc[stat]
        return f"{label} = {row['estimate']:.2f} ({row['low']:.2f} to {row['high']:.2f})"

    interval = getattr(combined_result.params, "interval", 0.9)
    return (f"{part('kendall_tau_b', 'Kendall tau-b')};  {part('spearman_rho', 'Spearman rho')}  "
            f"({100 * interval:g}% bootstrap intervals; {n} taxa)")
