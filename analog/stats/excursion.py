"""Standard Brownian excursions and shape statistics of single-peaked series."""
from __future__ import annotations

import warnings
from collections.abc import Mapping

import numpy as np
import pandas as pd

from ..errors import AnalogError, AnalogWarning

__all__ = ["brownian_excursions", "hat_shape"]

# normal draws generated per block, to bound memory for large requests
_BLOCK_DRAWS = 3_000_000


def brownian_excursions(n_paths, n_steps, *, rng):
    """Simulate standard Brownian excursions on [0, 1] on a regular grid.

    Parameters
    ----------
    n_paths : int
        Number of independent paths, ``>= 0``.
    n_steps : int
        Number of grid steps, ``>= 1``; path ``i`` is sampled at
        ``t = k / n_steps`` for ``k = 0, ..., n_steps``.
    rng : numpy.random.Generator or int
        Source of randomness (an int is used as a seed).

    Returns
    -------
    ndarray of shape (n_paths, n_steps + 1)
        Non-negative paths, exactly 0 at both ends.

    Notes
    -----
    A standard Brownian excursion has the law of the Euclidean norm of a
    3-dimensional Brownian bridge from 0 to 0 on [0, 1] (the Bessel(3)
    bridge; Williams 1974, Pitman 1975; Revuz & Yor 1999, ch. XI-XII). Each
    bridge coordinate is built as ``W(t) - t W(1)`` from a Brownian motion
    with exact Gaussian increments, so the grid values have exactly the
    excursion's finite-dimensional law: there is no discretization error at
    the grid points. Functionals that depend on the path *between* grid
    points (for example the maximum) are still approximated by their grid
    versions, which are biased low by ``O(n_steps ** -0.5)``.

    The marginal at ``t`` is ``sqrt(t (1 - t))`` times a chi variable with
    3 degrees of freedom (a Maxwell law), so ``E e(t) = sqrt(8 t (1 - t) / pi)``;
    the law is invariant under time reversal ``t -> 1 - t``.

    References
    ----------
    Pitman, J. W. (1975). One-dimensional Brownian motion and the
    three-dimensional Bessel process. Adv. Appl. Prob. 7, 511-526.

    Williams, D. (1974). Path decomposition and continuity of local time for
    one-dimensional diffusions, I. Proc. London Math. Soc. 28, 738-768.

    Revuz, D. & Yor, M. (1999). Continuous Martingales and Brownian Motion,
    3rd ed. Springer.

    Durrett, R. T., Iglehart, D. L. & Miller, D. R. (1977). Weak convergence
    to Brownian meander and Brownian excursion. Ann. Probab. 5, 117-129.
    """
    n_paths = _count("n_paths", n_paths, minimum=0)
    n_steps = _count("n_steps", n_steps, minimum=1)
    rng = _generator(rng)

    out = np.zeros((n_paths, n_steps + 1))
    frac = np.arange(1, n_steps + 1) / n_steps
    block = max(1, _BLOCK_DRAWS // (3 * n_steps))
    for start in range(0, n_paths, block):
        stop = min(start + block, n_paths)
        steps = rng.standard_normal((stop - start, n_steps, 3)) * np.sqrt(1.0 / n_steps)
        walk = np.cumsum(steps, axis=1)
        bridge = walk - frac[None, :, None] * walk[:, -1:, :]
        out[start:stop, 1:] = np.sqrt(np.einsum("ijk,ijk->ij", bridge, bridge))
    out[:, -1] = 0.0  # exact zero, not round-off
    return out


def hat_shape(paths, times=None, *, baseline="zero"):
    """Peak position, symmetry and peakedness of single-peaked series.

    Works for simulated excursions and for observed series of any length;
    missing values (NaN) are skipped.

    Parameters
    ----------
    paths : array_like, sequence of array_like, or mapping
        One series (1-D), several of equal length (2-D, one per row; a
        DataFrame keeps its index), several of different lengths (a list of
        1-D arrays), or a mapping ``name -> 1-D series`` (names become the
        index).
    times : array_like or sequence of array_like, optional
        Time of each value, increasing within a series. ``None`` (default)
        uses positions 0, 1, 2, ... For 1-D or 2-D ``paths`` a 1-D array is
        shared by all rows; otherwise give one array per series with the same
        shapes as ``paths``.
    baseline : {'zero', 'min'}, default='zero'
        Heights are measured from 0 (``'zero'``; series with negative values
        get NaN statistics and a warning) or from each series' own minimum
        (``'min'``).

    Returns
    -------
    pandas.DataFrame
        One row per series with columns ``n_points`` (finite values used),
        ``peak_position``, ``symmetry`` and ``peakedness``. Statistics are NaN
        for series with fewer than 3 finite values or zero area.

    Notes
    -----
    Time is rescaled so the first and last finite values sit at ``u = 0`` and
    ``u = 1``; the series is read as the piecewise-linear curve through its
    points, and areas are exact for that curve (trapezoid rule).

    - ``peak_position``: ``u`` at the maximum; if several points tie for the
      maximum, their mean ``u``.
    - ``symmetry``: centre-of-mass offset ``2 c - 1`` where
      ``c = int u h(u) du / int h(u) du``. It lies in [-1, 1]: 0 for a curve
      symmetric about its midpoint, negative when the area lies mostly in the
      first half (early bulk, long tail), positive when mostly in the second
      half. Unlike a split at the peak it does not depend on locating the
      peak, so it is steadier in noisy series.
    - ``peakedness``: maximum over mean height (``max h / int h du``). It is
      1 for a flat series, 2 for a tent (triangle) of any peak position,
      3/2 for the parabola ``u (1 - u)`` and grows as the peak narrows.

    For a standard Brownian excursion ``E[peak_position] = 1/2`` and
    ``E[symmetry] = 0`` by time reversal; these statistics give the null
    against which observed hats are compared.

    References
    ----------
    Chung, K. L. (1976). Excursions in Brownian motion. Ark. Mat. 14,
    155-177.

    Janson, S. (2007). Brownian excursion area, Wright's constants in graph
    enumeration, and other Brownian areas. Probab. Surveys 4, 80-145.
    """
    if baseline not in ("zero", "min"):
        raise AnalogError(f"`baseline` was {baseline!r} but is expected to be in "
                          "{'zero', 'min'}")
    h, t, index = _as_rows(paths, times)
    n_rows, n_cols = h.shape
    cols = ["n_points", "peak_position", "symmetry", "peakedness"]
    if n_rows == 0:
        return pd.DataFrame({c: np.array([], dtype=int if c == "n_points" else float)
                             for c in cols}, index=index)

    valid = np.isfinite(h) & np.isfinite(t)
    if not valid.all():
        # move each row's finite points to the front, keeping their order
        order = np.argsort(~valid, axis=1, kind="stable")
        h = np.take_along_axis(np.where(valid, h, np.nan), order, axis=1)
        t = np.take_along_axis(np.where(valid, t, np.nan), order, axis=1)
        valid = np.take_along_axis(valid, order, axis=1)
    n_valid = valid.sum(axis=1)

    seg = valid[:, 1:] & valid[:, :-1]
    with np.errstate(invalid="ignore"):
        bad_time = np.any(seg & ~(np.diff(t, axis=1) > 0), axis=1)
    if bad_time.any():
        rows = [str(index[i]) for i in np.flatnonzero(bad_time)[:5]]
        raise AnalogError("`times` must increase strictly within each series; "
                          f"they do not in series {', '.join(rows)}")

    with np.errstate(invalid="ignore", divide="ignore"):
        if baseline == "min":
            h = h - np.nanmin(np.where(valid, h, np.inf), axis=1, keepdims=True)
        negative = np.any(valid & (h < 0), axis=1)
        if negative.any():
            warnings.warn(
                f"{int(negative.sum())} series have negative values; their shape statistics "
                "were set to NaN. Pass baseline='min' to measure heights from each series' "
                "minimum.", AnalogWarning, stacklevel=2)

        last = np.take_along_axis(t, np.maximum(n_valid - 1, 0)[:, None], axis=1)[:, 0]
        u = (t - t[:, :1]) / (last - t[:, 0])[:, None]
        u0, u1, h0, h1 = u[:, :-1], u[:, 1:], h[:, :-1], h[:, 1:]
        du = np.where(seg, u1 - u0, 0.0)
        area = np.sum(np.where(seg, du * (h0 + h1) / 2, 0.0), axis=1)
        # exact first moment of the linear interpolant on each segment
        moment = np.sum(np.where(seg, du / 6 * (h0 * (2 * u0 + u1) + h1 * (u0 + 2 * u1)), 0.0),
                        axis=1)
        hmax = np.max(np.where(valid, h, -np.inf), axis=1)
        at_max = valid & (h == hmax[:, None])
        peak = np.sum(np.where(at_max, u, 0.0), axis=1) / at_max.sum(axis=1)

        usable = (n_valid >= 3) & ~negative & (area > 0)
        res = pd.DataFrame({
            "n_points": n_valid.astype(int),
            "peak_position": np.where(usable, peak, np.nan),
            "symmetry": np.where(usable, 2 * moment / area - 1, np.nan),
            "peakedness": np.where(usable, hmax / area, np.nan),
        }, index=index)
    return res


def _as_rows(paths, times):
    """Return heights and times as NaN-padded 2-D float arrays, plus a row index."""
    index = None
    if isinstance(paths, Mapping):
        index = pd.Index(list(paths.keys()))
        paths = list(paths.values())
        if isinstance(times, Mapping):
            times = [times[k] for k in index]
    elif isinstance(paths, pd.DataFrame):
        index = paths.index
        paths = paths.to_numpy(dtype=float, na_value=np.nan)
    elif isinstance(paths, pd.Series):
        paths = paths.to_numpy(dtype=float, na_value=np.nan)

    ragged = isinstance(paths, (list, tuple)) and len(paths) > 0 and all(
        np.ndim(p) == 1 for p in paths) and len({len(p) for p in paths}) > 1
    if ragged or (isinstance(paths, (list, tuple)) and index is not None):
        rows = [np.asarray(p, dtype=float).ravel() for p in paths]
        width = max((len(r) for r in rows), default=0)
        h = np.full((len(rows), width), np.nan)
        for i, r in enumerate(rows):
            h[i, :len(r)] = r
        if times is None:
            t = np.broadcast_to(np.arange(width, dtype=float), h.shape).copy()
        else:
            if len(times) != len(rows) or any(np.size(a) != len(r) for a, r in zip(times, rows)):
                raise AnalogError("`times` must give one array per series, each as long as "
                                  "its series")
            t = np.full_like(h, np.nan)
            for i, a in enumerate(times):
                t[i, :len(rows[i])] = np.asarray(a, dtype=float).ravel()
    else:
        h = np.asarray(paths, dtype=float)
        if h.ndim == 1:
            h = h[None, :]
        if h.ndim != 2:
            raise AnalogError(f"`paths` must be 1-D or 2-D; got {h.ndim} dimensions")
        if times is None:
            t = np.broadcast_to(np.arange(h.shape[1], dtype=float), h.shape).copy()
        else:
            t = np.asarray(times, dtype=float)
            try:
                t = np.broadcast_to(t, h.shape).copy()
            except ValueError:
                raise AnalogError(f"`times` of shape {t.shape} does not fit `paths` of shape "
                                  f"{h.shape}") from None
    if index is None:
        index = pd.RangeIndex(h.shape[0])
    return h, t, index


def _count(name, value, *, minimum):
    if isinstance(value, bool) or not isinstance(value, (int, np.integer)) or value < minimum:
        raise AnalogError(f"The {name!r} parameter of brownian_excursions must be an integer "
                          f">= {minimum}. Got {value!r} instead.")
    return int(value)


def _generator(rng):
    if rng is None:
        raise AnalogError("`rng` is required: pass a numpy.random.Generator or an integer seed")
    return np.random.default_rng(rng)
