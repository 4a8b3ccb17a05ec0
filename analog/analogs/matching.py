"""Matching modern taxa to fossil relatives by taxonomy and traits."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from .. import stats
from ..study import RANK_COLUMNS, TraitSpec

__all__ = ["Matches", "match_relatives", "NUMERIC_DIFFERENCE"]

# A numeric trait "differs" in a reason string when the two values are further apart than
# this share of the trait's observed range (our own reading threshold, not a published rule).
NUMERIC_DIFFERENCE = 0.10


@dataclass(frozen=True)
class Matches:
    """Kept fossil relatives of each modern taxon.

    Attributes
    ----------
    table : DataFrame
        matches.csv: ``taxon_id, relative_id, relative_rank, similarity, shared_rank,
        trait_distance, reason``.
    index : ndarray of int, shape (E, k)
        Row of each kept relative in the fossil table (-1 = none).
    similarity : ndarray, shape (E, k)
        Their similarity (0 where none).
    n_relatives : ndarray of int, shape (E,)
    """

    table: pd.DataFrame
    index: np.ndarray
    similarity: np.ndarray
    n_relatives: np.ndarray


_COLUMNS = ["taxon_id", "relative_id", "relative_rank", "similarity", "shared_rank", "trait_distance", "reason"]


def _no_rank(value) -> bool:
    return value is None or (isinstance(value, float) and np.isnan(value)) or str(value).strip().lower() in (
        "", "none", "nan", "<na>", "root")


def match_relatives(modern: pd.DataFrame, fossil: pd.DataFrame, traits: dict[str, TraitSpec], *,
                    taxonomy_weight: float = 0.5, n_relatives: int = 5,
                    min_similarity: float = 0.5) -> Matches:
    """The most similar fossil relatives of each modern taxon.

    Parameters
    ----------
    modern : DataFrame
        Modern taxa (Study taxa rows): ``taxon_id``, the rank columns and the trait columns.
    fossil : DataFrame
        Candidate fossil relatives, same columns (taxa at risk in at least one interval).
    traits : dict of str -> TraitSpec
    taxonomy_weight : float, default=0.5
        Share ``w`` of taxonomic distance in the combined distance.
    n_relatives : int, default=5
    min_similarity : float, default=0.5

    Returns
    -------
    Matches

    Notes
    -----
    similarity = 1 - (w * taxonomic distance + (1 - w) * Gower trait distance), both in
    [0, 1]. The taxonomic distance counts rank levels up to the lowest shared rank;
    the trait distance is Gower's (1971) mixed-type distance with Podani's (1999)
    treatment of ordinal traits, over the traits known for both taxa. Where no trait can
    be compared the taxonomic distance alone is used (and vice versa). A taxon is never
    its own relative. Ties are broken by relative ``taxon_id``. Modern taxa with no
    candidate at or above ``min_similarity`` get no rows: no relative is invented.

    The reason names the lowest shared rank and the traits that differ: classes that
    differ for categorical, ordinal and binary traits; numeric values further apart than
    10 % of the trait's observed range.

    References
    ----------
    Gower, J. C. (1971). A general coefficient of similarity and some of its properties.
    Biometrics 27, 857-871.
    Podani, J. (1999). Extending Gower's general coefficient of similarity to ordinal
    characters. Taxon 48, 331-340.
    """
    from ..taxonomy import taxonomic_distance_matrix

    n_mod, n_fos = len(modern), len(fossil)
    k = int(n_relatives)
    if n_mod == 0 or n_fos == 0:
        return Matches(pd.DataFrame({c: pd.Series(dtype=float) for c in _COLUMNS}),
                       np.full((n_mod, k), -1), np.zeros((n_mod, k)), np.zeros(n_mod, dtype=int))
    ranks = [c for c in RANK_COLUMNS if c in modern.columns] + ["taxon_id"]
    tax_d, shared = taxonomic_distance_matrix(modern[ranks].reset_index(drop=True),
                                              fossil[ranks].reset_index(drop=True))
    tax_d = np.asarray(tax_d, dtype=float)
    shared = np.asarray(shared, dtype=object)
    names = list(traits)
    if names:
        kinds = {n: traits[n].kind for n in names}
        levels = {n: list(traits[n].levels) for n in names if traits[n].kind == "ordinal" and traits[n].levels}
        trait_d = np.asarray(stats.gower_distance(modern[names].reset_index(drop=True),
                                                  fossil[names].reset_index(drop=True), kinds, levels=levels),
                             dtype=float)
    else:
        trait_d = np.full((n_mod, n_fos), np.nan)
    w = float(taxonomy_weight)
    dist = np.where(np.isnan(trait_d), tax_d, np.where(np.isnan(tax_d), trait_d, w * tax_d + (1 - w) * trait_d))
    sim = 1.0 - dist
    mod_ids = modern["taxon_id"].astype(str).to_numpy()
    fos_ids = fossil["taxon_id"].astype(str).to_numpy()
    sim[mod_ids[:, None] == fos_ids[None, :]] = -np.inf
    sim = np.where(np.isnan(sim), -np.inf, sim)

    # stable sort on descending similarity, candidates pre-ordered by taxon_id
    by_id = np.argsort(fos_ids, kind="stable")
    order = by_id[np.argsort(-sim[:, by_id], axis=1, kind="stable")][:, :k]
    top = np.take_along_axis(sim, order, axis=1)
    keep = top >= min_similarity
    index = np.where(keep, order, -1)
    similarity = np.where(keep, top, 0.0)
    n_kept = keep.sum(axis=1)

    ee, rr = np.nonzero(keep)
    ff = order[ee, rr]
    reasons = _reasons(modern.reset_index(drop=True), fossil.reset_index(drop=True), traits, ee, ff,
                       shared[ee, ff])
    table = pd.DataFrame({
        "taxon_id": pd.array(mod_ids[ee], dtype="str"),
        "relative_id": pd.array(fos_ids[ff], dtype="str"),
        "relative_rank": (rr + 1).astype(int),
        "similarity": top[ee, rr],
        "shared_rank": pd.array(["none" if _no_rank(s) else str(s) for s in shared[ee, ff]], dtype="str"),
        "trait_distance": trait_d[ee, ff],
        "reason": pd.array(reasons, dtype="str"),
    })
    return Matches(table, index, similarity, n_kept)


def _reasons(modern: pd.DataFrame, fossil: pd.DataFrame, traits: dict[str, TraitSpec],
             ee: np.ndarray, ff: np.ndarray, shared: np.ndarray) -> list[str]:
    """Readable reason per kept pair: lowest shared rank, traits that differ or are unknown."""
    differs = np.zeros((len(traits), ee.size), dtype=bool)
    unknown = np.zeros((len(traits), ee.size), dtype=bool)
    for t, (name, spec) in enumerate(traits.items()):
        if spec.kind in ("numeric", "binary"):
            both = pd.concat([pd.to_numeric(modern[name], errors="coerce"),
                              pd.to_numeric(fossil[name], errors="coerce")])
            a = pd.to_numeric(modern[name], errors="coerce").to_numpy(dtype=float)[ee]
            b = pd.to_numeric(fossil[name], errors="coerce").to_numpy(dtype=float)[ff]
            unknown[t] = ~(np.isfinite(a) & np.isfinite(b))
            if spec.kind == "binary":
                differs[t] = ~unknown[t] & (a != b)
            else:
                span = float(both.max() - both.min()) if both.notna().any() else 0.0
                differs[t] = ~unknown[t] & (np.abs(a - b) > NUMERIC_DIFFERENCE * span)
        else:
            a = modern[name].astype(object).to_numpy()[ee]
            b = fossil[name].astype(object).to_numpy()[ff]
            unknown[t] = pd.isna(a) | pd.isna(b)
            differs[t] = ~unknown[t] & (a.astype(str) != b.astype(str))
    labels = [spec.display for spec in traits.values()]
    out = []
    for n in range(ee.size):
        rank = shared[n]
        parts = ["no shared rank" if _no_rank(rank) else f"same {rank}"]
        diff = [labels[t] for t in range(len(labels)) if differs[t, n]]
        unk = [labels[t] for t in range(len(labels)) if unknown[t, n]]
        if labels:
            parts.append(f"differs in {', '.join(diff)}" if diff else
                         ("same traits" if not unk else "other traits alike"))
        if unk:
            parts.append(f"unknown: {', '.join(unk)}")
        out.append("; ".join(parts))
    return out
