"""Figures of the trajectory evidence: occupancy histories with fitted curves, and the noise null."""
from __future__ import annotations

import numpy as np
import pandas as pd
from matplotlib.figure import Figure
from matplotlib.lines import Line2D
from matplotlib.patches import Patch
from matplotlib.ticker import MaxNLocator

from .style import (short_label, CATEGORICAL, NO_DATA_COLOUR, TRAJECTORY_COLOUR, add_caption, figure_style,
                    fixed_label_positions, panel_title)

__all__ = ["trajectory_panels", "null_comparison"]

_NCOLS = 4
_TICK_STEPS = [1, 2, 2.5, 5, 10]
_CURVE_COLOUR = CATEGORICAL[0]
_FLAG_COLOUR = CATEGORICAL[5]
_STAT_TITLES = {"peak_position": ("Where the peak falls", "Peak position (0 = first bin, 1 = last bin)"),
                "symmetry": ("Symmetry of the history", "Centre of mass offset (−1 early … +1 late)"),
                "peakedness": ("How sharp the peak is", "Peak height / mean height")}


def _expit(x):
    return 1.0 / (1.0 + np.exp(-np.asarray(x, dtype=float)))


def _panel_axes(fig, nrows, ncols, *, left, right, top, bottom, width, height, gap_x, gap_y):
    """A fixed grid of axes placed in inches: no layout engine, so a draw is one pass.

    ``top`` and ``bottom`` are the bands above the first row and below the last; ``gap_y``
    is the space between one row's axes and the next row's, ``gap_x`` between columns.
    Positions are closed-form, so every render places the axes on the same numbers.
    """
    W, H = fig.get_size_inches()
    axes = []
    for r in range(nrows):
        y0 = H - top - height - r * (height + gap_y)
        for c in range(ncols):
            x0 = left + c * (width + gap_x)
            axes.append(fig.add_axes((x0 / W, y0 / H, width / W, height / H)))
    return np.array(axes)


def _pick_taxa(result, study, taxa, max_panels):
    """Figure key -> ordered taxon ids."""
    occ_ids = set(result.occupancy["taxon_id"])
    if taxa is not None:
        chosen = [str(t) for t in taxa if str(t) in occ_ids][:max_panels]
        return {"trajectories_selected": chosen} if chosen else {}
    out = {}
    risk = result.risk.loc[result.risk["trajectory_p"].notna()].sort_values(
        ["trajectory_p", "taxon_id"], ascending=[False, True], kind="stable")
    if len(risk):
        out["trajectories_extant"] = risk["taxon_id"].head(max_panels).tolist()
    extant = set(study.taxa.loc[study.taxa["extant"].astype(bool), "taxon_id"].astype(str))
    fitted = result.fits.loc[result.fits["preferred"] & ~result.fits["taxon_id"].isin(extant)]
    if len(fitted):
        longest = fitted.sort_values(["n_fitted", "taxon_id"], ascending=[False, True], kind="stable")
        out["trajectories_extinct"] = longest["taxon_id"].head(max_panels).tolist()
    return out


def _model_curve(result, taxon, model, first_age, last_age, ahead):
    """The preferred model drawn on the occupancy scale: ``(ages, mid, low, high)`` or None.

    Stasis and the curves are drawn over the series and ``ahead`` Myr beyond its last
    bin. A random walk has no curve through the data; it is drawn as its projection
    from the last bin over ``ahead`` Myr: expected path and 95% band.
    """
    from ..trajectory.models import curve_value

    fs = result.fitset
    if fs is None or model not in fs.fits:
        return None
    idx = np.flatnonzero(fs.batch.key == taxon)
    if not len(idx):
        return None
    i = idx[0]
    fit = fs.fits[model].take([i])
    if model in ("random_walk", "random_walk_drift"):
        ages = np.linspace(last_age, last_age - ahead, 40)
        s = last_age - ages
        y_last = fs.batch.last(fs.batch.y)[i]
        mu = fit.params.get("drift_per_myr", np.zeros(1))[0]
        half = 1.96 * fit.params["step_sd"][0] * np.sqrt(s)
        mid = y_last + mu * s
        return ages, _expit(mid), _expit(mid - half), _expit(mid + half)
    ages = np.linspace(first_age, last_age - ahead, 160)
    t = fs.batch.age0[i] - ages
    if model == "stasis":
        val = np.full(len(t), fit.params["mean_logit"][0])
    else:
        val = curve_value(fit.params, t[None, :])[0]
    return ages, _expit(val), None, None


def trajectory_panels(result, study, *, taxa=None, max_panels: int = 24, only=None) -> dict[str, Figure]:
    """Small multiples of occupancy histories with the preferred model's curve.

    Parameters
    ----------
    result : TrajectoryResult
        From :func:`analog.trajectory.run_trajectory`.
    study : Study
        For taxon names and which taxa are extant.
    taxa : sequence of str, optional
        Taxon ids to draw (one figure, ``trajectories_selected``). By default two
        figures: the extant taxa with the highest trajectory scores
        (``trajectories_extant``) and the longest completed histories
        (``trajectories_extinct``).
    max_panels : int, default=24
    only : collection of str, optional
        Keys to draw (default: all).

    Returns
    -------
    dict of str -> matplotlib.figure.Figure

    Notes
    -----
    Points are occupancy per bin; open points are bins with fewer sampled units than
    ``min_sampled`` (kept in the fits, shown so they are not over-read). The line is
    the preferred model on the occupancy scale (inverse logit of the fitted values);
    a random walk, which has no curve through the data, is drawn as its projection
    from the last bin with a 95% band. The dotted line is the quasi-extinction
    threshold; the shaded strip after the last bin of an extant taxon is the projection
    horizon the score refers to.
    """
    names = dict(zip(study.taxa["taxon_id"].astype(str), study.taxa["scientificName"].astype(str)))
    occ = result.occupancy
    fits = result.fits
    pref = fits.loc[fits["preferred"]].set_index("taxon_id") if len(fits) else pd.DataFrame()
    risk = result.risk.set_index("taxon_id") if len(result.risk) else pd.DataFrame()
    p = result.params
    thr = p.threshold_occupancy
    horizon = p.horizon_bins * result.step_myr
    out = {}
    for key, ids in _pick_taxa(result, study, taxa, max_panels).items():
        if only is not None and key not in only:
            continue
        n = len(ids)
        ncols = min(_NCOLS, n)
        nrows = int(np.ceil(n / ncols))
        n_keys = 4 if key == "trajectories_extinct" else 5
        legend_cols = n_keys if ncols >= 3 else 2
        legend_rows = int(np.ceil(n_keys / legend_cols))
        # inches: panel, its two-line title above, tick labels below; bands for heading and foot
        width, height, title_h, ticks_h = 2.05, 1.45, 0.38, 0.3
        left, right, head = 0.72, 0.2, 0.42
        foot = 0.24 + 0.22 + 0.2 * legend_rows + 0.42   # tick labels, axis label, key, caption
        size = (left + ncols * width + (ncols - 1) * 0.5 + right,
                head + nrows * (title_h + height) + (nrows - 1) * ticks_h + foot)
        with figure_style():
            fig = Figure(figsize=size)
            axes = _panel_axes(fig, nrows, ncols, left=left, right=right, top=head + title_h, bottom=foot,
                               width=width, height=height, gap_x=0.5, gap_y=ticks_h + title_h)
            for ax, taxon in zip(axes, ids):
                rows = occ.loc[occ["taxon_id"] == taxon]
                age = rows["bin_mid_ma"].to_numpy()
                val = rows["occupancy"].to_numpy()
                low = rows["low_sample"].to_numpy(bool)
                ax.plot(age, val, color=TRAJECTORY_COLOUR, lw=0.8, alpha=0.7)
                ax.plot(age[~low], val[~low], "o", ms=3.2, color=TRAJECTORY_COLOUR)
                ax.plot(age[low], val[low], "o", ms=3.2, mfc="white", mec=TRAJECTORY_COLOUR)
                is_extant = taxon in risk.index
                seen = age[np.isfinite(val)] if np.isfinite(val).any() else age
                first_age, last_age = float(np.max(seen)), float(np.min(seen))
                ahead = horizon if is_extant else 0.0
                lo_age = last_age - ahead if is_extant else np.nanmin(age) - 0.5 * result.step_myr
                hi_age = np.nanmax(age) + 0.5 * result.step_myr
                reading = ""
                if taxon in pref.index:
                    reading = pref.at[taxon, "reading"]
                    drawn = _model_curve(result, taxon, pref.at[taxon, "model"], first_age, last_age, ahead)
                    if drawn is not None:
                        ages_c, mid, low_c, high_c = drawn
                        ax.plot(ages_c, mid, color=_CURVE_COLOUR, lw=1.3)
                        if low_c is not None:
                            ax.fill_between(ages_c, low_c, high_c, color=_CURVE_COLOUR, alpha=0.18, lw=0)
                if is_extant:
                    ax.axvspan(last_age, last_age - ahead, color=NO_DATA_COLOUR, alpha=0.6, lw=0, zorder=0)
                ax.axhline(thr, color="#555555", lw=0.7, ls=":")
                ax.set_xlim(hi_age, lo_age)
                top = np.nanmax(val) if np.isfinite(val).any() else thr
                ax.set_ylim(0, max(top * 1.15, thr * 2, 0.02))
                title = short_label(names.get(taxon, taxon), 30)
                sub = reading or "too short to model"
                if is_extant and pd.notna(risk.at[taxon, "trajectory_p"]):
                    sub += f"; score {risk.at[taxon, 'trajectory_p']:.2f}"
                panel_title(ax, f"{title}\n{sub}", fontsize=8)
                fixed_label_positions(ax)
                ax.tick_params(labelsize=7)
                # four ticks a side: enough to read ages and shares, and fewer labels to lay out
                ax.xaxis.set_major_locator(MaxNLocator(4, steps=_TICK_STEPS))
                ax.yaxis.set_major_locator(MaxNLocator(4, steps=_TICK_STEPS))
            for ax in axes[n:]:
                ax.remove()
            W, H = size
            # one label per axis for the whole grid, instead of one per row or column
            fig.text(0.12 / W, (H - head - 0.5 * (size[1] - head - foot)) / H, "Occupancy (share of sampled units)",
                     rotation=90, ha="left", va="center", fontsize=8)
            fig.text((left + 0.5 * (size[0] - left - right)) / W, (foot - 0.24) / H, "Age (Ma)",
                     ha="center", va="top", fontsize=8)
            heading = {"trajectories_extant": "Occupancy histories of the extant taxa with the highest trajectory scores",
                       "trajectories_extinct": "Occupancy histories of the longest-lived extinct taxa",
                       "trajectories_selected": "Occupancy histories"}[key]
            fig.text(0.5, 1 - 0.12 / H, heading, ha="center", va="top", fontsize=10, fontweight="bold")
            handles = [Line2D([], [], color=TRAJECTORY_COLOUR, marker="o", ms=4, lw=0.8, label="occupancy"),
                       Line2D([], [], color=TRAJECTORY_COLOUR, marker="o", ms=4, mfc="white", lw=0,
                              label=f"bin with < {p.min_sampled} sampled units"),
                       Line2D([], [], color=_CURVE_COLOUR, lw=1.3, label="preferred model (walks: projection, 95% band)"),
                       Line2D([], [], color="#555555", lw=0.7, ls=":", label=f"threshold ({thr:g})")]
            if key != "trajectories_extinct":
                handles.append(Patch(color=NO_DATA_COLOUR, label=f"projection horizon ({horizon:g} Myr)"))
            fig.legend(handles=handles, loc="upper center", bbox_to_anchor=(0.5, (foot - 0.44) / H),
                       ncols=legend_cols, fontsize=7)
            add_caption(fig, "Scores rank lineages by their own occupancy history; the horizon is geological time.",
                        data_date=study.config.data_date)
        out[key] = fig
    return out


def null_comparison(result) -> dict[str, Figure]:
    """Observed hat-shape statistics against the Brownian-excursion null.

    Parameters
    ----------
    result : TrajectoryResult

    Returns
    -------
    dict of str -> matplotlib.figure.Figure
        ``{'noise_null': Figure}`` (empty if no completed history was long enough).

    Notes
    -----
    Grey: length-matched excursions (what pinned noise alone draws). Orange: completed
    histories; red outline: histories ending in a catalogue interval (not expected to
    be symmetric). Vertical lines mark the means; each panel states the dataset-level
    p-value of the mean and of the KS test.
    """
    table = result.noise_null
    samples = result.null_samples
    if table is None or not len(table) or samples is None or not len(samples):
        return {}
    per = table.loc[table["level"] == "taxon"]
    data = table.loc[table["level"] == "dataset"]
    with figure_style():
        W, H = 10.5, 3.8
        fig = Figure(figsize=(W, H))
        axes = _panel_axes(fig, 1, 3, left=0.62, right=0.13, top=0.74, bottom=1.13, width=2.85, height=1.93,
                           gap_x=0.6, gap_y=0.0)
        for ax, stat in zip(axes, _STAT_TITLES):
            null = samples.loc[(samples["statistic"] == stat) & (samples["group"] == "completed"), "value"]
            if not len(null):
                null = samples.loc[samples["statistic"] == stat, "value"]
            obs = per.loc[(per["statistic"] == stat) & (per["group"] == "completed"), "observed"].dropna()
            flag = per.loc[(per["statistic"] == stat) & (per["group"] == "ends_in_interval"), "observed"].dropna()
            values = np.concatenate([null.to_numpy(float), obs.to_numpy(float), flag.to_numpy(float)])
            lo, hi = np.nanquantile(values, [0.001, 0.999]) if len(values) else (0, 1)
            edges = np.linspace(lo, hi, 31)
            ax.hist(null, bins=edges, density=True, color=NO_DATA_COLOUR, label="excursions (noise null)")
            if len(obs):
                ax.hist(obs, bins=edges, density=True, histtype="step", lw=1.6, color=TRAJECTORY_COLOUR,
                        label=f"completed histories (n = {len(obs)})")
                ax.axvline(obs.mean(), color=TRAJECTORY_COLOUR, lw=1.2)
            if len(flag):
                ax.hist(flag, bins=edges, density=True, histtype="step", lw=1.2, ls="--", color=_FLAG_COLOUR,
                        label=f"ending in a catalogue interval (n = {len(flag)})")
            ax.axvline(float(np.mean(null)), color="#777777", lw=1.0, ls="--")
            title, xlabel = _STAT_TITLES[stat]
            row = data.loc[(data["statistic"] == stat) & (data["group"] == "completed")]
            if len(row):
                r = row.iloc[0]
                title += f"\nmean {r['observed']:.2f} vs {r['null_mean']:.2f}; p = {r['p_value']:.2g}, KS p = {r['test_p_value']:.2g}"
            panel_title(ax, title, fontsize=8.5)
            ax.set_xlabel(xlabel)
            ax.set_ylabel("Density")
            fixed_label_positions(ax, x=-0.13, y=-0.16)
        handles, labels = axes[0].get_legend_handles_labels()
        fig.legend(handles, labels, loc="upper center", bbox_to_anchor=(0.5, 0.62 / H), ncols=3, fontsize=7.5)
        fig.text(0.5, 1 - 0.1 / H, "Are completed occupancy histories more hat-shaped than pinned noise?",
                 ha="center", va="top", fontsize=10, fontweight="bold")
        add_caption(fig, "Null: Brownian excursions (norm of a 3-D Brownian bridge) with the same number of bins.")
    return {"noise_null": fig}
