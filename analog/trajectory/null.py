"""The noise null: are completed occupancy histories more hat-shaped than pinned noise?

A random walk conditioned to start and end at zero draws hats on its own. Its
continuous limit is the standard Brownian excursion (the norm of a 3-dimensional
Brownian bridge), simulated exactly at the grid points by
:func:`analog.stats.brownian_excursions`. Each completed (extinct) series of ``n``
bins is compared with the ``n`` interior points of excursions on ``n + 2`` grid
points, using :func:`analog.stats.hat_shape` (peak position, symmetry, peakedness).

Scale matters for peakedness (not for peak position): the models work on logit
occupancy, so by default the logit series is compared, heights measured from each
series' own minimum, the null's interior points measured the same way. On the
occupancy scale the series is framed by zero occupancy one bin before its first and
one bin after its last occurrence and compared with whole excursions.
"""
from __future__ import annotations

import numpy as np
import pandas as pd
from scipy import stats as sps

from ..errors import AnalogError

__all__ = ["noise_null", "NULL_COLUMNS", "STATISTICS"]

STATISTICS = ("peak_position", "symmetry", "peakedness")
NULL_COLUMNS = ["level", "group", "taxon_id", "statistic", "observed", "null_mean", "null_low", "null_high",
                "percentile", "p_value", "test", "test_statistic", "test_p_value", "n_taxa", "n_bins",
                "interval_id"]
_GROUPS = {"completed": "completed histories not ending in a catalogue interval",
           "ends_in_interval": "histories whose last occurrence falls in a catalogue interval"}


def _rows(series: pd.DataFrame, scale: str) -> tuple[np.ndarray, np.ndarray, np.ndarray]:
    """Series as padded rows: occupancy framed by zeros, or logit occupancy as it is."""
    codes, keys = pd.factorize(series["taxon_id"].astype(str), sort=False)
    pos = series.groupby(codes, sort=False).cumcount().to_numpy()
    n = np.bincount(codes, minlength=len(keys))
    pad = 1 if scale == "occupancy" else 0
    h = np.full((len(keys), (int(n.max()) if len(n) else 0) + 2 * pad), np.nan)
    column = "occupancy" if scale == "occupancy" else "empirical_logit"
    h[codes, pos + pad] = series[column].to_numpy(float)
    if pad:
        h[np.arange(len(keys)), 0] = 0.0
        h[np.arange(len(keys)), n + 1] = 0.0
    return np.asarray(keys, dtype=object), h, n


def noise_null(series: pd.DataFrame, ends_in: pd.Series, *, scale: str = "logit", n_null: int = 2000,
               level: float = 0.95, rng: np.random.Generator, min_bins: int = 3) -> tuple[pd.DataFrame, dict, pd.DataFrame]:
    """Compare completed occupancy histories with Brownian excursions of the same length.

    Parameters
    ----------
    series : DataFrame
        Completed (extinct) series, one row per taxon and bin ordered old → young:
        ``taxon_id, occupancy, empirical_logit`` (NaN = bin without sampled units).
    ends_in : Series
        Index ``taxon_id`` → interval id(s) the last occurrence falls in ('' for none).
    scale : {'logit', 'occupancy'}, default='logit'
        'logit': the series' logit occupancy, heights measured from its own minimum,
        against the interior points of excursions measured the same way. 'occupancy':
        occupancy with a zero one bin before the first and one after the last
        occurrence, against whole excursions on as many points.
    n_null : int, default=2000
        Excursions simulated per series length.
    level : float, default=0.95
        Coverage of ``null_low`` / ``null_high``.
    rng : numpy.random.Generator
    min_bins : int, default=3
        Shorter series are left out (their shape says nothing).

    Returns
    -------
    table : DataFrame
        Columns :data:`NULL_COLUMNS`. ``level='taxon'`` rows (three per taxon) give the
        observed statistic, the mean and central interval of the null for that length,
        the percentile of the observation in the null, and a two-sided Monte Carlo
        p-value. ``level='dataset'`` rows, per group, compare the mean over taxa with
        the null distribution of that mean (``p_value``) and the observed values with
        the length-matched null values by a two-sample Kolmogorov–Smirnov test
        (``test_statistic``, ``test_p_value``).
    summary : dict
        ``{group: {statistic: (observed mean, null mean, p, KS p)}}`` for the text summary.
    samples : DataFrame
        ``group, statistic, value``: length-matched null values pooled over each group's
        taxa (at most 20 000 per group and statistic), for figures.

    Notes
    -----
    Excursions are symmetric in time, so their mean peak position is 1/2 and mean
    symmetry 0. Histories that end at a mass extinction are cut short and are not
    expected to be symmetric; they are tested separately (group ``ends_in_interval``).
    Sampling gaps (bins without sampled units) are skipped by the shape statistics.

    References
    ----------
    Liow, L. H. & Stenseth, N. C. (2007). The rise and fall of species. Proc. R. Soc. B
    274, 2745-2752.

    Pitman, J. W. (1975). One-dimensional Brownian motion and the three-dimensional
    Bessel process. Adv. Appl. Prob. 7, 511-526.
    """
    from ..stats import brownian_excursions, hat_shape

    if scale not in ("logit", "occupancy"):
        raise AnalogError(f"`scale` was {scale!r} but is expected to be in {{'logit', 'occupancy'}}")
    baseline = "zero" if scale == "occupancy" else "min"
    keys, h, n = _rows(series, scale)
    keep = n >= min_bins
    keys, h, n = keys[keep], h[keep], n[keep]
    if len(keys) == 0:
        return pd.DataFrame(columns=NULL_COLUMNS), {}, pd.DataFrame(columns=["group", "statistic", "value"])
    observed = hat_shape(h, baseline=baseline)  # positions as time: bins are equal steps of the series
    observed.index = keys
    alpha = (1.0 - level) / 2.0

    null_by_len = {}
    for length in np.unique(n):
        paths = brownian_excursions(n_null, int(length) + 1, rng=rng)
        if scale == "logit":
            paths = paths[:, 1:-1]  # the n interior points, like an observed series
        null_by_len[int(length)] = hat_shape(paths, baseline=baseline)[list(STATISTICS)].to_numpy()

    if ends_in.index.is_unique:
        ends = np.array(ends_in.reindex(keys).to_numpy(dtype=object), dtype=object)
        ends[pd.isna(ends)] = ""
    else:
        ends = np.array([ends_in.get(k, "") for k in keys], dtype=object)
    groups = np.where([bool(e) for e in ends], "ends_in_interval", "completed")
    rows = []
    for j, stat in enumerate(STATISTICS):
        obs = observed[stat].to_numpy()
        null_mean = np.empty(len(keys))
        lo = np.empty(len(keys))
        hi = np.empty(len(keys))
        below = np.empty(len(keys))
        above = np.empty(len(keys))
        ties = np.empty(len(keys))
        for length, null in null_by_len.items():
            sel = n == length
            col = null[:, j]
            null_mean[sel] = col.mean()
            lo[sel], hi[sel] = np.quantile(col, [alpha, 1.0 - alpha])
            srt = np.sort(col)
            below[sel] = np.searchsorted(srt, obs[sel], side="left")
            above[sel] = len(col) - np.searchsorted(srt, obs[sel], side="right")
            ties[sel] = len(col) - below[sel] - above[sel]
        m = float(n_null)
        pct = (below + 0.5 * ties) / m
        # two-sided Monte Carlo p-value with the usual +1 correction (common practice)
        p = np.minimum(1.0, 2.0 * np.minimum((below + ties + 1.0) / (m + 1.0), (above + ties + 1.0) / (m + 1.0)))
        rows.append(pd.DataFrame({
            "level": "taxon", "group": groups, "taxon_id": keys, "statistic": stat, "observed": obs,
            "null_mean": null_mean, "null_low": lo, "null_high": hi, "percentile": pct,
            "p_value": np.where(np.isnan(obs), np.nan, p), "test": "percentile in length-matched excursions",
            "test_statistic": np.nan, "test_p_value": np.nan, "n_taxa": 1, "n_bins": n,
            "interval_id": ends}))
    taxon_rows = pd.concat(rows, ignore_index=True)
    taxon_rows["_o"] = np.tile(np.arange(len(keys)), len(STATISTICS))
    taxon_rows["_s"] = np.repeat(np.arange(len(STATISTICS)), len(keys))
    taxon_rows = taxon_rows.sort_values(["_o", "_s"], kind="stable").reset_index(drop=True)

    data_rows, summary, samples = [], {}, []
    n_rep = max(n_null, 1000)
    for group in _GROUPS:
        sel = np.flatnonzero(groups == group)
        if len(sel) == 0:
            continue
        summary[group] = {}
        for j, stat in enumerate(STATISTICS):
            obs = observed[stat].to_numpy()[sel]
            ok = ~np.isnan(obs)
            if not ok.any():
                continue
            lens = n[sel][ok]
            # null of the mean over taxa: one length-matched excursion per taxon, repeated
            total = np.zeros(n_rep)
            for L, count in zip(*np.unique(lens, return_counts=True)):
                col = np.nan_to_num(null_by_len[int(L)][:, j])
                total += col[rng.integers(0, n_null, (n_rep, count))].sum(axis=1)
            null_means = total / len(lens)
            obs_mean = float(obs[ok].mean())
            lo, hi = np.quantile(null_means, [alpha, 1.0 - alpha])
            below = float((null_means <= obs_mean).sum())
            above = float((null_means >= obs_mean).sum())
            p_mean = min(1.0, 2.0 * min((below + 1.0) / (n_rep + 1.0), (above + 1.0) / (n_rep + 1.0)))
            pooled = np.concatenate([null_by_len[int(L)][:, j] for L in lens])
            pooled = pooled[~np.isnan(pooled)]
            shown = pooled if len(pooled) <= 20000 else pooled[rng.choice(len(pooled), 20000, replace=False)]
            samples.append(pd.DataFrame({"group": group, "statistic": stat, "value": shown}))
            ks = sps.ks_2samp(obs[ok], pooled)  # two-sample Kolmogorov–Smirnov (scipy.stats.ks_2samp)
            data_rows.append({
                "level": "dataset", "group": group, "taxon_id": "", "statistic": stat, "observed": obs_mean,
                "null_mean": float(null_means.mean()), "null_low": lo, "null_high": hi,
                "percentile": (below - 0.5 * float((null_means == obs_mean).sum())) / n_rep,
                "p_value": p_mean,
                "test": "mean over taxa vs null means; KS test of values vs length-matched excursions",
                "test_statistic": float(ks.statistic), "test_p_value": float(ks.pvalue),
                "n_taxa": int(ok.sum()), "n_bins": float(np.mean(lens)), "interval_id": ""})
            summary[group][stat] = (obs_mean, float(null_means.mean()), p_mean, float(ks.pvalue))
    table = pd.concat([pd.DataFrame(data_rows, columns=NULL_COLUMNS), taxon_rows[NULL_COLUMNS]],
                      ignore_index=True)
    samples = (pd.concat(samples, ignore_index=True) if samples
               else pd.DataFrame(columns=["group", "statistic", "value"]))
    return table, summary, samples
