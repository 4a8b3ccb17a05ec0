"""First passage of Brownian motion with drift to an absorbing threshold."""
from __future__ import annotations

import numpy as np
from scipy.special import log_ndtr, ndtr

__all__ = ["first_passage_probability"]


def first_passage_probability(distance, drift, variance, horizon):
    """Probability that Brownian motion with drift reaches a lower threshold by a horizon.

    The process is ``X(t) = d + mu * t + sigma * W(t)`` with ``W`` standard
    Brownian motion, started at distance ``d`` above an absorbing threshold
    at 0. The result is ``P(min_{0 <= t <= T} X(t) <= 0)``.

    Parameters
    ----------
    distance : float or array_like
        Starting distance ``d`` above the threshold. ``d <= 0`` means the
        threshold is already reached (probability 1).
    drift : float or array_like
        Drift ``mu`` per unit time. Positive drift moves *away* from the
        threshold, negative drift towards it.
    variance : float or array_like
        Variance ``sigma**2`` per unit time, ``>= 0``. Zero gives the
        deterministic path ``d + mu * t``.
    horizon : float or array_like
        Horizon ``T >= 0`` in the same time unit. ``np.inf`` is allowed
        (eventual passage).

    Returns
    -------
    float or ndarray
        Probability in [0, 1], broadcast over the inputs. NaN where any input
        is NaN, the variance is negative or the horizon is negative.

    Notes
    -----
    For ``d > 0``, ``sigma > 0`` and ``0 < T < inf``

    .. math::

        P = \\Phi\\left(\\frac{-d - \\mu T}{\\sigma\\sqrt{T}}\\right)
          + e^{-2\\mu d/\\sigma^2}\\,
            \\Phi\\left(\\frac{-d + \\mu T}{\\sigma\\sqrt{T}}\\right).

    The second term is evaluated as ``exp(-2 mu d / sigma^2 + log Phi(.))``
    with :func:`scipy.special.log_ndtr`, so large ``|mu d / sigma^2|`` neither
    overflows nor loses the term. With drift towards the threshold
    (``mu < 0``) the passage time is inverse Gaussian with mean ``d / |mu|``
    and shape ``d**2 / sigma**2``; with ``mu > 0`` it is the same law
    (drift ``|mu|``) scaled by the eventual-passage probability
    ``exp(-2 mu d / sigma^2)``; with ``mu = 0`` it is the Lévy law, and the
    formula reduces exactly to ``2 Phi(-d / (sigma sqrt(T)))``.

    Special cases are exact: ``T = 0`` gives 0 for ``d > 0``;
    ``sigma = 0`` gives 1 when ``d + mu T <= 0`` and 0 otherwise;
    ``T = inf`` gives 1 for ``mu <= 0`` and ``exp(-2 mu d / sigma^2)`` for
    ``mu > 0``; ``d = inf`` gives 0; ``mu = -inf`` gives 1 and
    ``mu = +inf`` gives 0 (for ``d > 0``, ``T > 0``).

    References
    ----------
    Lande, R. & Orzack, S. H. (1988). Extinction dynamics of age-structured
    populations in a fluctuating environment. PNAS 85, 7418-7421.

    Dennis, B., Munholland, P. L. & Scott, J. M. (1991). Estimation of growth
    and extinction parameters for endangered species. Ecological Monographs
    61, 115-143.

    Cox, D. R. & Miller, H. D. (1965). The Theory of Stochastic Processes.
    Methuen, London (first passage of the Wiener process with drift).
    """
    d, mu, var, t = np.broadcast_arrays(*(np.asarray(a, dtype=float)
                                          for a in (distance, drift, variance, horizon)))
    out = np.full(d.shape, np.nan)

    bad = np.isnan(d) | np.isnan(mu) | np.isnan(var) | np.isnan(t) | (var < 0) | (t < 0)
    ok = ~bad
    at = ok & (d <= 0)
    out[at] = 1.0
    live = ok & (d > 0)

    far = live & np.isposinf(d)
    out[far] = 0.0
    live &= ~far

    now = live & (t == 0)
    out[now] = 0.0
    live &= ~now

    # infinite drift: immediate passage (towards) or none (away)
    out[live & np.isneginf(mu)] = 1.0
    out[live & np.isposinf(mu)] = 0.0
    live &= np.isfinite(mu)

    endless = live & np.isposinf(t)
    with np.errstate(divide="ignore", invalid="ignore", over="ignore"):
        # eventual passage: certain unless drifting away with noise
        det = endless & (var == 0)
        out[det] = np.where(mu[det] < 0, 1.0, 0.0)
        sto = endless & (var > 0)
        out[sto] = np.where(mu[sto] <= 0, 1.0,
                            np.exp(-2.0 * mu[sto] * d[sto] / var[sto]))
        live &= ~endless

        det = live & (var == 0)
        out[det] = np.where(d[det] + mu[det] * t[det] <= 0, 1.0, 0.0)
        live &= ~det

        # all remaining entries: finite d > 0, finite mu, var > 0, 0 < T < inf
        dd, mm, vv, tt = d[live], mu[live], var[live], t[live]
        s = np.sqrt(vv * tt)
        first = ndtr((-dd - mm * tt) / s)
        second = np.exp(-2.0 * mm * dd / vv + log_ndtr((-dd + mm * tt) / s))
        out[live] = np.clip(first + second, 0.0, 1.0)

    return out[()] if out.ndim == 0 else out
