"""Matching modern taxa to fossil relatives by taxonomy and traits."""
from __future__ import annotations

from dataclasses import dataclass

import numpy as np
import pandas as pd

from ..stats.gower import gower_blocks
from ..study import RANK_COLUMNS, TraitSpec
from ..taxonomy import RANK_LEVELS

__all__ = ["Matches", "match_relatives", "NUMERIC_DIFFERENCE"]

# A numeric trait "differs" in a reason string when the two values are further apart than
# this share of the trait's observed range (our own reading threshold, not a published rule).
NUMERIC_DIFFERENCE = 0.10

# modern x fossil pairs compared at once: bounds each temporary matrix to about 32 MB
BLOCK_PAIRS = 4_000_000


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
                    min_similarity: float = 0.5, block_pairs: int | None = None) -> Matches:
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
    block_pairs : int, optional
        Modern x fossil pairs compared at once (blocks of modern taxa; at least one modern
        taxon per block); default ``BLOCK_PAIRS``. The block size changes no result, only
        the memory held.

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

    Distances are computed for one block of modern taxa at a time and only the ``k`` best
    candidates of each are kept (a partition, then a stable sort of those ``k``), so memory
    grows with ``block_pairs`` and ``n_modern x k``, not with ``n_modern x n_fossil``.

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
    n_mod, n_fos = len(modern), len(fossil)
    k = int(n_relatives)
    if n_mod == 0 or n_fos == 0:
        return Matches(pd.DataFrame({c: pd.Series(dtype=float) for c in _COLUMNS}),
                       np.full((n_mod, k), -1), np.zeros((n_mod, k)), np.zeros(n_mod, dtype=int))
    modern = modern.reset_index(drop=True)
    fossil = fossil.reset_index(drop=True)
    mod_ids = modern["taxon_id"].astype(str).to_numpy()
    fos_ids = fossil["taxon_id"].astype(str).to_numpy()
    rows_per_block = max(1, int(BLOCK_PAIRS if block_pairs is None else block_pairs) // n_fos)
    top, order, trait_top, depth_top = _top_relatives(modern, fossil, traits, mod_ids, fos_ids, k,
                                                      float(taxonomy_weight), rows_per_block)
    keep = top >= min_similarity
    index = np.where(keep, order, -1)
    similarity = np.where(keep, top, 0.0)
    n_kept = keep.sum(axis=1)

    ee, rr = np.nonzero(keep)
    ff = order[ee, rr]
    shared = np.asarray(RANK_LEVELS, dtype=object)[depth_top[ee, rr]]
    reasons = _reasons(modern, fossil, traits, ee, ff, shared)
    table = pd.DataFrame({
        "taxon_id": pd.array(mod_ids[ee], dtype="str"),
        "relative_id": pd.array(fos_ids[ff], dtype="str"),
        "relative_rank": (rr + 1).astype(int),
        "similarity": top[ee, rr],
        "shared_rank": pd.array(["none" if _no_rank(s) else str(s) for s in shared], dtype="str"),
        "trait_distance": trait_top[ee, rr],
        "reason": pd.array(reasons, dtype="str"),
    })
    return Matches(table, index, similarity, n_kept)


def _top_relatives(modern, fossil, traits, mod_ids, fos_ids, k, w, rows_per_block):
    """The ``k`` most similar fossil taxa of every modern taxon, one block of modern taxa at a time.

    Returns ``(similarity, fossil row, trait distance, shared-rank depth)``, each of shape
    ``(n_mod, min(k, n_fos))``, relatives in the order of a stable sort on descending
    similarity over candidates ordered by ``taxon_id``. Only one block of the
    modern x fossil matrices is held at a time.
    """
    from ..taxonomy import depth_distance, shared_rank_depth_blocks

    n_mod, n_fos = len(modern), len(fossil)
    kk = min(k, n_fos)
    # candidates in taxon_id order (ties in similarity go to the smaller id): every distance
    # depends only on the pair, not on the row order, so the fossil table is put in that order
    by_id = np.argsort(fos_ids, kind="stable")
    fossil = fossil.iloc[by_id].reset_index(drop=True)
    ranks = [c for c in RANK_COLUMNS if c in modern.columns] + ["taxon_id"]
    depth_blocks = shared_rank_depth_blocks(modern[ranks], fossil[ranks], block_rows=rows_per_block)
    names = list(traits)
    if names:
        kinds = {n: traits[n].kind for n in names}
        levels = {n: list(traits[n].levels) for n in names if traits[n].kind == "ordinal" and traits[n].levels}
        trait_blocks = gower_blocks(modern[names], fossil[names], kinds, levels=levels, block_rows=rows_per_block)
    else:
        trait_blocks = ((rows, np.full((rows.stop - rows.start, n_fos), np.nan))
                        for rows, _ in _row_blocks(n_mod, rows_per_block))
    # a taxon is never its own relative: (modern row, fossil column) pairs with the same id
    id_codes, _ = pd.factorize(np.concatenate([mod_ids, fos_ids[by_id]]))
    pairs = pd.DataFrame({"code": id_codes[:n_mod], "row": np.arange(n_mod)}).merge(
        pd.DataFrame({"code": id_codes[n_mod:], "col": np.arange(n_fos)}), on="code")
    self_row, self_col = pairs["row"].to_numpy(), pairs["col"].to_numpy()
    # taxonomic distance and its weighted share per depth (8 values), looked up per pair
    levels8 = np.arange(len(RANK_LEVELS), dtype=np.int8)
    tax_by_depth = depth_distance(levels8)
    wtax_by_depth = w * tax_by_depth
    top = np.empty((n_mod, kk))
    order = np.empty((n_mod, kk), dtype=np.intp)
    trait_top = np.empty((n_mod, kk))
    depth_top = np.empty((n_mod, kk), dtype=np.int8)
    for (rows, depth), (rows_t, trait_d) in zip(depth_blocks, trait_blocks):
        if rows != rows_t:
            raise RuntimeError("taxonomic and trait blocks out of step")
        trait_d = np.asarray(trait_d, dtype=float)
        # 1 - (w * taxonomic + (1 - w) * trait), or 1 - taxonomic where no trait can be compared
        sim = np.multiply(1 - w, trait_d)
        sim += wtax_by_depth[depth]
        gap = np.isnan(trait_d)
        if gap.any():
            sim[gap] = tax_by_depth[depth[gap]]
        np.subtract(1.0, sim, out=sim)
        here = (self_row >= rows.start) & (self_row < rows.stop)
        sim[self_row[here] - rows.start, self_col[here]] = -np.inf
        cols = _top_k_stable(sim, kk)
        order[rows] = by_id[cols]
        top[rows] = np.take_along_axis(sim, cols, axis=1)
        trait_top[rows] = np.take_along_axis(trait_d, cols, axis=1)
        depth_top[rows] = np.take_along_axis(depth, cols, axis=1)
    return top, order, trait_top, depth_top


def _row_blocks(n: int, step: int):
    for start in range(0, n, step):
        yield slice(start, min(n, start + step)), None


def _top_k_stable(sim: np.ndarray, k: int) -> np.ndarray:
    """Columns of the first ``k`` entries of a stable sort of each row on descending ``sim``.

    The same columns, in the same order, as ``np.argsort(-sim, axis=1, kind='stable')[:, :k]``,
    found with a partition: every entry above the row's k-th largest value, then entries equal
    to it in column order until there are ``k``; the ``k`` are then sorted stably.
    ``sim`` holds no NaN (use -inf).
    """
    n, m = sim.shape
    if k <= 0 or n == 0:
        return np.empty((n, max(k, 0)), dtype=np.intp)
    kth = np.take_along_axis(sim, np.argpartition(sim, m - k, axis=1)[:, m - k:m - k + 1], axis=1)
    chosen = sim > kth
    need = k - chosen.sum(axis=1)
    tied = sim == kth
    short = np.flatnonzero(tied.sum(axis=1) > need)      # rows with more ties than places left
    if short.size:
        sub = tied[short]
        sub &= np.cumsum(sub, axis=1) <= need[short, None]
        tied[short] = sub
    chosen |= tied
    cols = np.nonzero(chosen)[1].reshape(n, k)            # ascending column within each row
    vals = np.take_along_axis(sim, cols, axis=1)
    return np.take_along_axis(cols, np.argsort(-vals, axis=1, kind="stable"), axis=1)



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
