"""Forest plots of selectivity: odds of loss per trait class in each warming interval, and pooled."""
from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Polygon
from matplotlib.ticker import FuncFormatter, NullFormatter

from ..study import TraitSpec
from .style import ANALOG_COLOUR, COMBINED_COLOUR, add_caption, figure_style

__all__ = ["forest_plots", "forest_plot"]

_OR_LIMITS = (1e-2, 1e2)   # odds ratios beyond these are drawn as arrows at the edge


def forest_plots(result, traits: dict[str, TraitSpec], *, only=None) -> dict[str, Figure]:
    """One forest plot per trait, keyed ``forest_<trait>``.

    Parameters
    ----------
    result : AnalogResult
        From :func:`analog.analogs.run_analog`.
    traits : dict of str -> TraitSpec
        The study's traits (for display names).
    only : collection of str, optional
        Keys to draw (default: all).

    Returns
    -------
    dict of str -> matplotlib.figure.Figure
        Traits without estimates (for example left out of the model) get no figure.
    """
    sel = result.selectivity
    if sel is None or sel.empty or "trait" not in sel:
        return {}
    out = {}
    for name in [t for t in traits if (sel["trait"] == t).any()]:
        if only is None or f"forest_{name}" in only:
            out[f"forest_{name}"] = forest_plot(result, name, traits[name])
    return out


def _label_for(spec: TraitSpec, rows: pd.DataFrame) -> tuple[str, str]:
    """(title, x-axis reading) for one trait."""
    what = spec.display
    if len(what) > 1 and what[1].islower():  # 'Body size' -> 'body size', keep 'pH' or '°C' as written
        what = what[0].lower() + what[1:]
    if spec.kind == "categorical":
        ref = rows["unit"].iloc[0].removeprefix("vs ").strip() if len(rows) else ""
        return (f"Odds of loss in past warming intervals by {what} (compared with {ref})",
                f"Odds ratio of loss vs {ref} (log scale)")
    if spec.kind == "ordinal":
        return (f"Odds of loss in past warming intervals per step up in {what}",
                "Odds ratio of loss per step (log scale)")
    if spec.kind == "numeric":
        return (f"Odds of loss in past warming intervals per standard deviation of {what}",
                f"Odds ratio of loss {rows['unit'].iloc[0] if len(rows) else 'per SD'} (log scale)")
    return (f"Odds of loss in past warming intervals: {what} (yes vs no)",
            "Odds ratio of loss, yes vs no (log scale)")


def _counts(n_risk, n_lost) -> str:
    def fmt(v):
        return f"{v:.0f}" if abs(v - round(v)) < 0.05 else f"{v:.1f}"
    return f"{fmt(n_risk)} / {fmt(n_lost)}"


def forest_plot(result, trait: str, spec: TraitSpec) -> Figure:
    """Forest plot of one trait: each class term's interval estimates and pooled diamond.

    Parameters
    ----------
    result : AnalogResult
    trait : str
        Trait column name.
    spec : TraitSpec

    Returns
    -------
    matplotlib.figure.Figure
        Odds ratios on a log axis with a line at 1; each interval row shows its
        confidence interval, taxa at risk / lost and its warming-similarity weight;
        the pooled random-effects estimate is a diamond. Hollow markers flag classes
        too thin to estimate well.
    """
    sel = result.selectivity
    rows = sel[sel["trait"] == trait]
    weights = result.interval_weights.set_index("interval_id")
    terms = list(dict.fromkeys(rows["term"]))
    level = (result.params.ci_level if getattr(result, "params", None) is not None else 0.95)

    # y layout: per term a header line, one line per interval, then the pooled line
    items = []
    for term in terms:
        block = rows[rows["term"] == term]
        items.append(("header", block.iloc[0]))
        for _, r in block[block["scope"] != "pooled"].iterrows():
            items.append(("interval", r))
        pooled = block[block["scope"] == "pooled"]
        if len(pooled):
            items.append(("pooled", pooled.iloc[0]))
    n = len(items)
    title, xlabel = _label_for(spec, rows)

    top_in, bottom_in, row_in = 0.7, 1.05, 0.24   # fixed margins in inches, so any row count reads alike
    height = top_in + bottom_in + row_in * n
    with figure_style():
        fig = Figure(figsize=(7.5, height))
        ax = fig.add_axes((0.30, bottom_in / height, 0.45, row_in * n / height))
        ys = np.arange(n)[::-1].astype(float)
        finite = rows[["ci_low", "ci_high"]].to_numpy(dtype=float).ravel()
        finite = np.exp(finite[np.isfinite(finite)])
        lo = max(_OR_LIMITS[0], min(0.5, finite.min() / 1.3)) if finite.size else 0.25
        hi = min(_OR_LIMITS[1], max(2.0, finite.max() * 1.3)) if finite.size else 4.0
        ax.set_xscale("log")
        ax.set_xlim(lo, hi)
        # odds ratios written as plain numbers (0.1, 1, 10), not powers of ten; on a short axis
        # (under 1.5 decades) the 2s and 5s are labelled too
        ax.xaxis.set_major_formatter(FuncFormatter(_odds_label))
        ax.xaxis.set_minor_formatter(FuncFormatter(_odds_label) if np.log10(hi / lo) < 1.5 else NullFormatter())
        ax.set_ylim(-0.8, n - 0.2)
        ax.axvline(1.0, color="#555555", lw=0.8, zorder=0)
        labels = []
        for y, (kind, r) in zip(ys, items):
            if kind == "header":
                text = r["label"].split(": ", 1)[-1] if r["label"] else r["term"]
                labels.append(text)
                continue
            est = float(np.exp(r["log_odds"])) if np.isfinite(r["log_odds"]) else np.nan
            cl = float(np.exp(r["ci_low"])) if np.isfinite(r["ci_low"]) else 0.0
            ch = float(np.exp(r["ci_high"])) if np.isfinite(r["ci_high"]) else np.inf
            x0, x1 = max(cl, lo), min(ch, hi)
            if kind == "interval":
                iid = r["scope"]
                name = weights.at[iid, "name"] if iid in weights.index and "name" in weights else iid
                w = float(weights.at[iid, "weight"]) if iid in weights.index else np.nan
                labels.append(f"   {name}")
                if np.isfinite(est):
                    thin = bool(r.get("flag", ""))
                    ax.plot([x0, x1], [y, y], color=ANALOG_COLOUR, lw=1.2, solid_capstyle="butt")
                    ax.plot([min(max(est, lo), hi)], [y], marker="s", ms=3 + 5 * (w if np.isfinite(w) else 0.5),
                            color=ANALOG_COLOUR, mfc="white" if thin else ANALOG_COLOUR, mew=1.2, ls="none")
                    _arrows(ax, y, cl, ch, lo, hi, ANALOG_COLOUR)
                else:
                    ax.text(1.0, y, "not estimable", ha="center", va="center", fontsize=7, color="#777777")
                ax.text(1.03, y, _counts(r["n_at_risk"], r["n_lost"]), transform=ax.get_yaxis_transform(),
                        ha="left", va="center", fontsize=7.5)
                ax.text(1.26, y, f"{w:.2f}" if np.isfinite(w) else "–", transform=ax.get_yaxis_transform(),
                        ha="left", va="center", fontsize=7.5)
            else:
                labels.append("   Pooled (random effects)")
                if np.isfinite(est):
                    h = 0.32
                    ax.add_patch(Polygon([(x0, y), (min(max(est, lo), hi), y + h), (x1, y),
                                          (min(max(est, lo), hi), y - h)], closed=True, color=COMBINED_COLOUR))
                    _arrows(ax, y, cl, ch, lo, hi, COMBINED_COLOUR)
                else:
                    ax.text(1.0, y, "not estimable", ha="center", va="center", fontsize=7, color="#777777")
                ax.text(1.03, y, _counts(r["n_at_risk"], r["n_lost"]), transform=ax.get_yaxis_transform(),
                        ha="left", va="center", fontsize=7.5, fontweight="bold")
                ax.text(1.26, y, f"k={int(result.pooling.set_index('term').at[r['term'], 'k'])}"
                        if r["term"] in set(result.pooling["term"]) else "",
                        transform=ax.get_yaxis_transform(), ha="left", va="center", fontsize=7.5)
        ax.set_yticks(ys)
        ax.set_yticklabels(labels)
        for tick, (kind, _) in zip(ax.get_yticklabels(), items):
            if kind == "header":
                tick.set_fontweight("bold")
        ax.tick_params(axis="y", length=0)
        ax.spines["left"].set_visible(False)
        ax.set_xlabel(xlabel)
        ax.text(1.03, n - 0.2, "at risk / lost", transform=ax.get_yaxis_transform(), ha="left", va="bottom",
                fontsize=7.5, fontweight="bold")
        ax.text(1.26, n - 0.2, "weight", transform=ax.get_yaxis_transform(), ha="left", va="bottom",
                fontsize=7.5, fontweight="bold")
        ax.text(0.0, n - 0.2, "← lost less often", transform=ax.get_yaxis_transform(), ha="left",
                va="bottom", fontsize=7, color="#555555")
        ax.text(1.0, n - 0.2, "lost more often →", transform=ax.get_yaxis_transform(), ha="right",
                va="bottom", fontsize=7, color="#555555")
        fig.text(0.02, 1 - 0.2 / height, title, ha="left", va="top", fontsize=10, fontweight="bold")
        handles = [Line2D([], [], color=ANALOG_COLOUR, marker="s", lw=1.2, label="one interval (size = weight)"),
                   Line2D([], [], color=ANALOG_COLOUR, marker="s", mfc="white", lw=1.2,
                          label="too few taxa to estimate well"),
                   Line2D([], [], color=COMBINED_COLOUR, marker="D", lw=0, label="pooled")]
        fig.legend(handles=handles, loc="lower center", ncol=3, fontsize=7,
                   bbox_to_anchor=(0.5, 0.36 / height))
        add_caption(fig, f"Bars: {level:.0%} confidence intervals (Firth logistic regression over age draws); "
                         "counts are averages over age draws; weight = similarity of the interval's warming "
                         "to the scenario.")
    return fig


def _odds_label(value, _pos=None) -> str:
    """Tick label of an odds ratio: 0.01, 0.2, 1, 5, 100 (minor ticks other than 2s and 5s unlabelled)."""
    mantissa = value / 10 ** np.floor(np.log10(value) + 1e-9)
    if not any(abs(mantissa - m) < 1e-6 for m in (1, 2, 5)):
        return ""
    return f"{value:g}"


def _arrows(ax, y, cl, ch, lo, hi, colour):
    """Arrow heads where an interval runs past the axis."""
    if cl < lo:
        ax.plot([lo], [y], marker="<", color=colour, ms=5, ls="none")
    if ch > hi:
        ax.plot([hi], [y], marker=">", color=colour, ms=5, ls="none")
