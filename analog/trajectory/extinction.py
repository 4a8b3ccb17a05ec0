"""Probability that a series falls below a quasi-extinction threshold within a horizon.

Per model:

- random walks: first passage of Brownian motion with drift from the current
  distance to the threshold (diffusion approximation; Lande & Orzack 1988; Dennis,
  Munholland & Scott 1991), via :func:`analog.stats.first_passage_probability`;
- stasis: the chance that at least one of the next ``h`` independent values falls
  below the threshold;
- rise-and-fall: the chance that the projected curve plus its residual noise falls
  below the threshold in at least one of the next ``h`` bins.

The model average weights these by the Akaike weights. Parameter and model-selection
uncertainty are carried by a parametric bootstrap: series are simulated from the
fitted models (the generating model drawn with its Akaike weight), every model is
refitted, and the averaged probability is recomputed from the observed current value.
"""
from __future__ import annotations

import numpy as np

from .models import FitSet, ModelFit, SeriesBatch, curve_value, fit_models, normal_cdf, simulate

__all__ = ["model_probabilities", "averaged_probability", "bootstrap_probabilities"]

_ROWS_PER_CHUNK = 100_000  # bootstrap series fitted at once (bounds memory)


def _probability(name: str, fit: ModelFit, batch: SeriesBatch, *, threshold: float, horizon_bins: int,
                 step_myr: float, current: np.ndarray | None = None) -> np.ndarray:
    from ..stats import first_passage_probability

    p = fit.params
    cur = batch.last(batch.y) if current is None else current
    if name == "stasis":
        below = normal_cdf((threshold - p["mean_logit"]) / p["sd"])
        return 1.0 - (1.0 - below) ** horizon_bins
    if name in ("random_walk", "random_walk_drift"):
        drift = p.get("drift_per_myr", np.zeros(len(batch)))
        out = first_passage_probability(cur - threshold, drift, p["step_sd"] ** 2, horizon_bins * step_myr)
        return np.where(np.isnan(p["step_sd"]), np.nan, out)
    t_last = batch.last(batch.t)
    ahead = t_last[:, None] + step_myr * np.arange(1, horizon_bins + 1)[None, :]
    mean = curve_value(p, ahead)
    stay = 1.0 - normal_cdf((threshold - mean) / p["sd"][:, None])
    return 1.0 - np.prod(stay, axis=1)


def model_probabilities(fitset: FitSet, *, threshold: float, horizon_bins: int, step_myr: float,
                        current: np.ndarray | None = None) -> np.ndarray:
    """Probability of falling below ``threshold`` within the horizon, per series and model.

    Parameters
    ----------
    fitset : FitSet
    threshold : float
        Quasi-extinction threshold on the logit scale.
    horizon_bins : int
        Horizon in bins.
    step_myr : float
        Length of one bin in Myr (the time unit of the fits).
    current : ndarray, optional
        Current logit value of each series (default: its last observation).

    Returns
    -------
    ndarray, shape (N, M)
        NaN where a model could not be fitted.
    """
    cols = [_probability(m, fitset.fits[m], fitset.batch, threshold=threshold, horizon_bins=horizon_bins,
                         step_myr=step_myr, current=current) for m in fitset.models]
    out = np.column_stack(cols) if cols else np.zeros((len(fitset.batch), 0))
    return np.where(np.isnan(np.column_stack([fitset.fits[m].aicc for m in fitset.models])), np.nan, out)


def averaged_probability(probs: np.ndarray, weights: np.ndarray) -> np.ndarray:
    """Akaike-weighted average over models; NaN where no model could be fitted."""
    has = weights.sum(axis=1) > 0
    avg = np.clip(np.nansum(np.nan_to_num(probs) * weights, axis=1), 0.0, 1.0)  # weights sum to 1 ± rounding
    return np.where(has, avg, np.nan)


def bootstrap_probabilities(fitset: FitSet, *, threshold: float, horizon_bins: int, step_myr: float,
                            n_boot: int, rng: np.random.Generator, min_series_bins: int = 5,
                            progress=None, engine=None) -> np.ndarray:
    """Parametric-bootstrap draws of the model-averaged probability.

    Parameters
    ----------
    fitset : FitSet
        Fits to the observed series.
    threshold, horizon_bins, step_myr
        As in :func:`model_probabilities`.
    n_boot : int
        Number of draws per series.
    rng : numpy.random.Generator
    min_series_bins : int, default=5
    progress : callable, optional
        ``progress(label, done, total)``.
    engine : {'local', 'dask'} or analog.engine.Engine, optional
        Where the chunks of replicates run (default: in this process); results are identical.

    Returns
    -------
    ndarray, shape (N, n_boot)
        NaN rows for series no model could fit.

    Notes
    -----
    Each draw picks a generating model with probability equal to its Akaike weight,
    simulates a series of the same length and times from that model's fit (starting
    from the observed first value), refits every model, and evaluates the averaged
    probability at the *observed* current value, so the draws reflect uncertainty in
    the parameters and in the choice of model, not the future path itself.

    The work is cut into chunks of about 100,000 simulated series: series sorted by length
    are taken in groups, so a chunk's arrays are only as wide as its longest series, and each
    chunk has its own random stream spawned from ``rng``. The chunks depend only on the
    series and the number of replicates, so the draws are the same on every engine.
    """
    from ..engine import engine_scope, split_counts

    batch = fitset.batch
    n = len(batch)
    out = np.full((n, n_boot), np.nan)
    if n == 0 or n_boot == 0:
        return out
    group = max(1, min(n, _ROWS_PER_CHUNK // n_boot))         # series per chunk
    reps = min(n_boot, max(1, _ROWS_PER_CHUNK // group))      # replicates per chunk
    by_length = np.argsort(batch.n, kind="stable")
    series = [by_length[s:e] for s, e in split_counts(n, group)]
    spans = split_counts(n_boot, reps)
    work = [(idx, span) for idx in series for span in spans]
    chunks = [(idx, span, gen) for (idx, span), gen in zip(work, rng.spawn(len(work)))]
    shared = (fitset, threshold, horizon_bins, step_myr, min_series_bins)

    def tick(done, total):
        if progress is not None:
            progress("bootstrap", done, total)

    with engine_scope(engine) as eng:
        parts = eng.map(_bootstrap_chunk, chunks, shared=shared, progress=tick)
    for (idx, (start, stop), _), avg in zip(chunks, parts):
        out[idx, start:stop] = avg
    out[fitset.weights.sum(axis=1) <= 0] = np.nan
    return out


def _subset(fitset: FitSet, idx: np.ndarray) -> FitSet:
    """The fits of some series, with the padding cut to the longest of them."""
    b = fitset.batch
    width = max(int(b.n[idx].max()), 1) if len(idx) else 0
    batch = SeriesBatch(b.key[idx], b.t[idx, :width], b.y[idx, :width], b.n[idx], b.age0[idx])
    return FitSet(batch, {m: f.take(idx) for m, f in fitset.fits.items()}, fitset.weights[idx], fitset.models)


def _bootstrap_chunk(chunk, shared) -> np.ndarray:
    """Averaged probabilities of one chunk: shape (series of the chunk, replicates of the chunk)."""
    idx, (start, stop), rng = chunk
    full, threshold, horizon_bins, step_myr, min_series_bins = shared
    fitset = _subset(full, np.asarray(idx))
    batch = fitset.batch
    n = len(batch)
    b = stop - start
    current = batch.last(batch.y)
    cum = np.cumsum(fitset.weights, axis=1)
    rows = np.tile(np.arange(n), b)
    big = batch.take(rows)
    u = rng.random(len(rows))
    choice = (u[:, None] > cum[rows]).sum(axis=1)            # generating model index
    choice = np.minimum(choice, len(fitset.models) - 1)
    y = np.full(big.y.shape, np.nan)
    for j, m in enumerate(fitset.models):
        pick = choice == j
        if pick.any():
            sel = np.flatnonzero(pick)
            y[sel] = simulate(m, fitset.fits[m].take(rows[sel]), big.take(sel), rng)
    refit = fit_models(big.with_y(y), models=fitset.models, min_series_bins=min_series_bins)
    probs = model_probabilities(refit, threshold=threshold, horizon_bins=horizon_bins, step_myr=step_myr,
                                current=current[rows])
    return averaged_probability(probs, refit.weights).reshape(b, n).T
