"""Interval fates: which fossil taxa were at risk in each warming interval, and which were lost.

Boundary-crosser logic (Foote 2000) on first and last occurrences, repeated over
draws of point ages (the age Monte Carlo).
"""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

__all__ = ["FateDraws", "compute_fates", "draw_ages", "first_last", "window_fates", "DRAW_BLOCK_VALUES"]

# point ages (draws x occurrences) held at once while computing first and last appearances:
# 8 million float64 values, 64 MB per array
DRAW_BLOCK_VALUES = 8_000_000


@dataclass(frozen=True)
class FateDraws:
    """Fates of fossil taxa in each interval, for every age draw.

    Attributes
    ----------
    taxon_ids : ndarray of str, shape (T,)
        Taxa with at least one fossil occurrence, sorted.
    interval_ids : ndarray of str, shape (I,)
    at_risk, lost : ndarray of bool, shape (D, I, T)
        Per age draw ``d``, interval ``i`` and taxon ``t``. ``lost`` implies ``at_risk``.
    first, last : ndarray of float, shape (D, T)
        First and last appearance (Ma) per draw; ``last`` is 0 for extant taxa.
    """

    taxon_ids: np.ndarray
    interval_ids: np.ndarray
    at_risk: np.ndarray
    lost: np.ndarray
    first: np.ndarray
    last: np.ndarray
    coarse_occurrences: int = 0
    coarse_only_taxa: tuple[str, ...] = ()

    @property
    def n_draws(self) -> int:
        return self.at_risk.shape[0]

    def shares(self) -> pd.DataFrame:
        """fates.csv: ``interval_id, taxon_id, p_at_risk, p_lost`` (shares of age draws).

        Only taxon-interval pairs at risk in at least one draw are listed.
        """
        p_risk = self.at_risk.mean(axis=0)
        p_lost = self.lost.mean(axis=0)
        ii, tt = np.nonzero(p_risk > 0)
        return pd.DataFrame({
            "interval_id": pd.array(self.interval_ids[ii], dtype="str"),
            "taxon_id": pd.array(self.taxon_ids[tt], dtype="str"),
            "p_at_risk": p_risk[ii, tt],
            "p_lost": p_lost[ii, tt],
        })


def draw_ages(oldest: np.ndarray, youngest: np.ndarray, *, n_draws: int,
              rng: np.random.Generator) -> np.ndarray:
    """Point ages drawn uniformly within each ``[youngest, oldest]`` range.

    Parameters
    ----------
    oldest, youngest : array of float, shape (n,)
    n_draws : int
        With 1, the range midpoints are returned and ``rng`` is not used.
    rng : numpy.random.Generator

    Returns
    -------
    ndarray, shape (n_draws, n)
    """
    oldest = np.asarray(oldest, dtype=float)
    youngest = np.asarray(youngest, dtype=float)
    if n_draws == 1:
        return ((oldest + youngest) / 2.0)[None, :]
    u = rng.random((n_draws, oldest.size))
    return youngest[None, :] + u * (oldest - youngest)[None, :]


def first_last(ages: np.ndarray, starts: np.ndarray) -> tuple[np.ndarray, np.ndarray]:
    """First (oldest) and last (youngest) age per group of columns.

    ``ages`` has shape (D, n) with columns sorted by group; ``starts`` are the
    column indices where each group begins. Returns two (D, n_groups) arrays.
    """
    return np.maximum.reduceat(ages, starts, axis=1), np.minimum.reduceat(ages, starts, axis=1)


def window_fates(first: np.ndarray, last: np.ndarray, oldest: np.ndarray, youngest: np.ndarray, *,
                 at_risk_rule: str = "overlap", drop_singletons: bool = True,
                 sampled: np.ndarray | None = None) -> tuple[np.ndarray, np.ndarray]:
    """At-risk and lost flags from first/last appearances and interval windows.

    Parameters
    ----------
    first, last : array, shape (D, T)
        First and last appearance ages (Ma, older = larger).
    oldest, youngest : array, shape (I,)
        Window edges of each interval (Ma).
    at_risk_rule : {'overlap', 'crossers'}, default='overlap'
    drop_singletons : bool, default=True
    sampled : bool array, shape (D, I, T), optional
        Whether the taxon has an occurrence inside the window; when given, only
        sampled taxa are at risk (no range-through).

    Returns
    -------
    at_risk, lost : bool arrays, shape (D, I, T)

    Notes
    -----
    A window is the half-open age span ``(youngest, oldest]``. With ``'overlap'``
    a taxon is at risk when its range reaches into the window: first appearance
    older than the young edge (``first > youngest``) and last appearance no older
    than the old edge (``last <= oldest``). ``'crossers'`` also requires
    ``first > oldest`` (the range crosses the old edge; Foote 2000). A taxon at
    risk is lost when its last appearance falls in the window (``last > youngest``);
    one that ranges to or past the young edge survived. With ``drop_singletons``
    taxa whose whole range lies inside the window (``first <= oldest`` and
    ``last > youngest``) are left out: they would all count as lost.
    """
    f = first[:, None, :]
    last_ = last[:, None, :]
    o = np.asarray(oldest, dtype=float)[None, :, None]
    y = np.asarray(youngest, dtype=float)[None, :, None]
    reaches = last_ <= o
    if at_risk_rule == "overlap":
        at_risk = (f > y) & reaches
    elif at_risk_rule == "crossers":
        at_risk = (f > o) & reaches
    else:
        raise ValueError(f"`at_risk_rule` was {at_risk_rule!r} but is expected to be in {{'overlap', 'crossers'}}")
    ends_inside = last_ > y
    if drop_singletons:
        at_risk &= ~((f <= o) & ends_inside)
    if sampled is not None:
        at_risk &= sampled
    return at_risk, at_risk & ends_inside


def compute_fates(taxa: pd.DataFrame, occurrences: pd.DataFrame, intervals: pd.DataFrame, *,
                  age_draws: int = 20, at_risk_rule: str = "overlap", drop_singletons: bool = True,
                  range_through: bool = True, max_age_range: float = 0.0,
                  rng: np.random.Generator, draw_block: int | None = None) -> FateDraws:
    """Fates of every fossil taxon in every interval, over age draws.

    Parameters
    ----------
    taxa : DataFrame
        ``taxon_id``, ``extant`` (the Study contract).
    occurrences : DataFrame
        ``taxon_id``, ``oldest_ma``, ``youngest_ma``.
    intervals : DataFrame
        ``interval_id``, ``oldest_ma``, ``youngest_ma``.
    age_draws : int, default=20
        Number of draws of point ages (1 = range midpoints).
    at_risk_rule : {'overlap', 'crossers'}, default='overlap'
        See :func:`window_fates`.
    drop_singletons : bool, default=True
    range_through : bool, default=True
        If false, a taxon is at risk only in windows holding one of its occurrences.
    max_age_range : float, default=0.0
        Occurrences whose age range (``oldest_ma - youngest_ma``) is wider than this many
        Myr are left out (0 keeps all). A taxon known only from such occurrences has no fates.
    rng : numpy.random.Generator
    draw_block : int, optional
        Age draws computed at once (default: as many as keep one block of point ages near
        ``DRAW_BLOCK_VALUES`` numbers). The block size changes no result: the generator
        fills consecutive blocks with the same numbers as one array of every draw.

    Returns
    -------
    FateDraws

    Notes
    -----
    Extant taxa range through to the Recent (their last appearance is set to 0 Ma),
    so they count as survivors of every window their range reaches into.

    Last occurrences come before true extinction (Signor & Lipps 1982): taxa lost in
    a window but last sampled before it are missed (not at risk), and poorly sampled
    survivors may look lost. Both bias loss rates; the guards above only reduce that.

    References
    ----------
    Foote, M. (2000). Origination and extinction components of taxonomic diversity:
    general problems. Paleobiology 26(S4), 74-102.
    Signor, P. W. & Lipps, J. H. (1982). Sampling bias, gradual extinction patterns and
    catastrophes in the fossil record. GSA Special Paper 190, 291-296.
    """
    coarse = 0
    # taxon codes by hashing (pandas) and sorting only the distinct ids: np.unique on millions
    # of strings sorts them all, and np.setdiff1d on object arrays compares every pair
    raw_codes, distinct = pd.factorize(occurrences["taxon_id"].astype(str).to_numpy())
    distinct = np.asarray(distinct, dtype=object)
    oldest = occurrences["oldest_ma"].to_numpy(dtype=float)
    youngest = occurrences["youngest_ma"].to_numpy(dtype=float)
    if max_age_range and max_age_range > 0:
        fine = (oldest - youngest) <= max_age_range
        coarse = int((~fine).sum())
        raw_codes, oldest, youngest = raw_codes[fine], oldest[fine], youngest[fine]
    present = np.zeros(distinct.size, dtype=bool)
    present[raw_codes] = True
    kept = np.flatnonzero(present)
    kept = kept[np.argsort(distinct[kept], kind="stable")]     # sorted ids, as np.unique gives them
    taxon_ids = distinct[kept]
    gone = np.flatnonzero(~present)
    coarse_only = tuple(distinct[gone[np.argsort(distinct[gone], kind="stable")]])
    position = np.empty(distinct.size, dtype=np.intp)
    position[kept] = np.arange(kept.size)
    codes = position[raw_codes]
    order = np.argsort(codes, kind="stable")
    codes = codes[order]
    oldest = oldest[order]
    youngest = youngest[order]
    int_ids = intervals["interval_id"].astype(str).to_numpy()
    w_old = intervals["oldest_ma"].to_numpy(dtype=float)
    w_young = intervals["youngest_ma"].to_numpy(dtype=float)
    n_draws = int(age_draws)
    if taxon_ids.size == 0:
        empty = np.zeros((n_draws, len(int_ids), 0), dtype=bool)
        return FateDraws(taxon_ids, int_ids, empty, empty.copy(), np.zeros((n_draws, 0)), np.zeros((n_draws, 0)),
                         coarse, coarse_only)

    starts = np.flatnonzero(np.r_[True, codes[1:] != codes[:-1]])
    first = np.empty((n_draws, taxon_ids.size))
    last = np.empty((n_draws, taxon_ids.size))
    sampled = None if range_through else np.empty((n_draws, len(int_ids), taxon_ids.size), dtype=bool)
    # draws in blocks: only a block of point ages (draws x occurrences) is held at a time; the
    # generator fills consecutive blocks with the same numbers as one (draws, occurrences) array
    step = draw_block if draw_block is not None else DRAW_BLOCK_VALUES // max(oldest.size, 1)
    step = min(max(1, int(step)), n_draws)
    for d0 in range(0, n_draws, step):
        d1 = min(n_draws, d0 + step)
        if n_draws == 1:
            ages = draw_ages(oldest, youngest, n_draws=1, rng=rng)      # range midpoints
        else:
            ages = youngest[None, :] + rng.random((d1 - d0, oldest.size)) * (oldest - youngest)[None, :]
        first[d0:d1], last[d0:d1] = first_last(ages, starts)
        if sampled is not None:
            for i in range(len(int_ids)):  # few intervals; each step is vectorized over draws and occurrences
                inside = (ages > w_young[i]) & (ages <= w_old[i])
                sampled[d0:d1, i, :] = np.logical_or.reduceat(inside, starts, axis=1)
        del ages
    extant = (taxa.set_index(taxa["taxon_id"].astype(str))["extant"]
              .reindex(taxon_ids).fillna(False).to_numpy(dtype=bool))
    last[:, extant] = 0.0

    at_risk, lost = window_fates(first, last, w_old, w_young, at_risk_rule=at_risk_rule,
                                 drop_singletons=drop_singletons, sampled=sampled)
    return FateDraws(taxon_ids, int_ids, at_risk, lost, first, last, coarse, coarse_only)
