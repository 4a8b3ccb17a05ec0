"""Region-by-region indices of the combined ranking."""
from __future__ import annotations

import warnings
from typing import Callable

import numpy as np
import pandas as pd
import scipy.sparse as sp

from ..errors import AnalogWarning
from ..figures.style import TIER_NAMES
from .diversity import branch_incidence, expected_diversity_losses
from .params import PARAMS, RegionParams
from .result import LINE_COLUMNS, PRESENCE_COLUMNS, SUMMARY_COLUMNS, RegionResult
from .spatial import assign_points, equal_area_crs, region_areas_km2

__all__ = ["assess_regions"]

_LINES = {"combined": ("combined_p", "tier", "draws"),
          "analog": ("analog_p", "analog_tier", "analog_draws"),
          "trajectory": ("trajectory_p", "trajectory_tier", "trajectory_draws")}


def assess_regions(study, combined_result, params: RegionParams | None = None, *,
                   rng: np.random.Generator | None = None,
                   progress: Callable[[str, int, int], None] | None = None, engine=None) -> RegionResult:
    """Assign modern occurrences to regions and summarise each region's expected losses.

    Parameters
    ----------
    study : analog.study.Study
        Uses ``modern_occurrences``, ``regions`` and ``taxa`` (for the rank tree).
    combined_result : analog.combine.CombinedResult
        The merged ranking with its draws.
    params : RegionParams, optional
        The [regions] options; defaults when omitted.
    rng : numpy.random.Generator, optional
        Accepted for the common stage signature; this stage draws no random numbers.
    progress : callable, optional
        ``progress(label, done, total)``.
    engine : {'local', 'dask'} or analog.engine.Engine, optional
        Where the spatial assignment and the diversity-loss draws run (default: in this
        process); results are identical.

    Returns
    -------
    RegionResult

    Notes
    -----
    *Assignment*: see :func:`analog.regions.spatial.assign_points` (deduplicated coordinates,
    ``intersects`` predicate, points on shared edges to the lowest region_id).
    *Presence*: a taxon is present in a region with at least ``min_records`` records there.
    *Indices* use the assessed taxa present: ``expected_losses`` is the sum of their probabilities
    (the expected number lost if losses are independent), its interval the central ``interval``
    percentiles of the same sum over the aligned draws; ``mean_combined_p`` = expected_losses /
    n_taxa (the expected share lost); ``n_top_tier`` counts taxa at or above ``top_tier``.
    The ``analog_*`` and ``trajectory_*`` columns repeat these with one line's probabilities and
    tiers, over the taxa that line assessed.
    *Diversity*: ``diversity_loss`` is the expected number of rank-tree branches (unit length per
    rank level) lost from the tree spanned by the region's assessed taxa; see
    :func:`analog.regions.diversity.expected_diversity_loss` (after Faith 2008).
    *Flags*: a region with fewer than ``min_taxa`` assessed taxa or ``min_region_records`` records
    is flagged 'insufficient data'; its numbers are reported but maps hatch it instead of
    colouring it.

    References
    ----------
    Faith, D. P. (2008). Conservation Biology 22, 1461-1470.
    """
    from ..engine import engine_scope

    with engine_scope(engine) as eng:
        return _assess(study, combined_result, params or PARAMS(), progress=progress, engine=eng)


def _assess(study, combined_result, params: RegionParams, *, progress, engine) -> RegionResult:
    notes: list[str] = []
    regions = study.regions.reset_index(drop=True)
    occ = study.modern_occurrences
    ea = equal_area_crs(regions, projection=params.projection)

    pos = assign_points(occ["decimalLongitude"].to_numpy(dtype=float), occ["decimalLatitude"].to_numpy(dtype=float),
                        regions, engine=engine)
    if progress:
        progress("regions", 1, 3)
    inside = pos >= 0
    region_ids = regions["region_id"].astype(str).to_numpy()
    unassigned = occ.loc[~inside, ["occurrenceID", "taxon_id", "decimalLatitude", "decimalLongitude"]]
    unassigned = unassigned.reset_index(drop=True)
    if len(unassigned):
        notes.append(f"{len(unassigned):,} of {len(occ):,} modern occurrences fall in no region; they are listed "
                     "in unassigned_occurrences.csv and left out of the region indices")

    records = _region_records(pos, occ["taxon_id"], region_ids)
    presence = records[["region_id", "taxon_id", "n_records"]].copy()
    presence["present"] = presence["n_records"] >= params.min_records
    rk = combined_result.rankings.set_index("taxon_id")
    presence = presence.join(rk[["scientificName", "combined_p", "tier"]], on="taxon_id")
    presence = presence[PRESENCE_COLUMNS + ["scientificName", "combined_p", "tier"]]

    summary = _indices(regions, presence, records, combined_result, study, params, notes, engine)
    if progress:
        progress("regions", 2, 3)
    summary["area_km2"] = region_areas_km2(regions, ea.crs).to_numpy()
    layer = regions[["region_id", "geometry"]].merge(summary, on="region_id", how="left")
    layer = layer[[c for c in layer.columns if c != "geometry"] + ["geometry"]]
    if progress:
        progress("regions", 3, 3)
    for msg in notes:
        warnings.warn(msg, AnalogWarning, stacklevel=3)
    return RegionResult(presence=presence, region_summary=summary, layer=layer, unassigned=int(len(unassigned)),
                        unassigned_occurrences=unassigned, projection=ea.proj, projection_label=ea.label,
                        params=params, warnings=notes)


def _note_off_centre(out: pd.DataFrame, notes: list[str]) -> None:
    """Note regions whose expected losses lie outside their own interval.

    The interval comes from the resampled scores, the point value from the point scores; when
    the resampled scores run systematically above or below them (typically when many scores
    sit near 0 or 1), a sum over many taxa can move the whole interval past the point value.
    """
    point, low, high = (out[c].to_numpy(dtype=float) for c in
                        ("expected_losses", "expected_losses_low", "expected_losses_high"))
    with np.errstate(invalid="ignore"):
        below, above = point < low, point > high
    if below.any() or above.any():
        side = "above" if below.sum() >= above.sum() else "below"
        notes.append(f"in {int(below.sum() + above.sum()):,} of {len(out):,} regions the expected number of taxa "
                     f"lost lies outside its own interval (the resampled scores run mostly {side} the point "
                     "scores, which happens when many scores sit near 0 or 1); there the interval shows the "
                     "spread but is off-centre, so quote the point value and the interval together")


def _indices(regions, presence, records, combined_result, study, params, notes, engine=None) -> pd.DataFrame:
    rid = regions["region_id"].astype(str).to_numpy()
    rk = combined_result.rankings.set_index("taxon_id")
    taxa = rk.index.to_numpy()
    present = presence[presence["present"]]
    # sparse taxa x regions presence matrix over every ranked taxon (large studies stay small)
    ti = pd.Index(taxa).get_indexer(present["taxon_id"])
    ri = pd.Index(rid).get_indexer(present["region_id"])
    known = ti >= 0
    P = sp.csr_matrix((np.ones(known.sum()), (ti[known], ri[known])), shape=(len(taxa), len(rid)))
    extra = present.loc[~known].groupby("region_id").size()  # present but not in the rankings at all

    out = pd.DataFrame({"region_id": rid, "name": regions["name"].astype(str).to_numpy()})
    out["n_records"] = np.bincount(records["region_pos"].to_numpy(), weights=records["n_records"].to_numpy(),
                                   minlength=len(rid)).astype(np.int64)
    alpha = (1.0 - params.interval) / 2.0
    top_tiers = set(TIER_NAMES[:TIER_NAMES.index(params.top_tier) + 1])
    for line, (pcol, tcol, dattr) in _LINES.items():
        p = rk[pcol].to_numpy(dtype=float)
        has = ~np.isnan(p)
        M = sp.csr_matrix(P.multiply(has[:, None].astype(float)))
        MT = M.T.tocsr()
        n = np.asarray(M.sum(axis=0)).ravel().astype(int)
        draws = getattr(combined_result, dattr).reindex(taxa).to_numpy(dtype=float)
        summed = np.asarray(MT @ np.nan_to_num(draws))
        expected = MT @ np.nan_to_num(p)
        top = rk[tcol].isin(top_tiers).to_numpy().astype(float)
        prefix = "" if line == "combined" else f"{line}_"
        cols = {"n_taxa": n, "expected_losses": expected,
                "expected_losses_low": _q(summed, alpha), "expected_losses_high": _q(summed, 1 - alpha),
                "mean_p": np.divide(expected, n, out=np.full(len(n), np.nan), where=n > 0),
                "n_top_tier": (MT @ top).astype(int)}
        for c in LINE_COLUMNS:
            name = "mean_combined_p" if (line == "combined" and c == "mean_p") else prefix + c
            out[name] = cols[c]
        if line == "combined":
            out["n_taxa_present"] = np.asarray(P.sum(axis=0)).ravel().astype(int) + \
                extra.reindex(rid, fill_value=0).to_numpy()
            out["n_taxa_unassessed"] = out["n_taxa_present"] - n
            combined_mask, combined_p, combined_draws = M, p, draws
    a = rk["analog_p"].to_numpy(dtype=float)
    t = rk["trajectory_p"].to_numpy(dtype=float)
    both = (~np.isnan(a) & ~np.isnan(t)).astype(float)
    BT = sp.csr_matrix(P.multiply(both[:, None])).T.tocsr()
    n_both = np.asarray(BT.sum(axis=1)).ravel().astype(int)
    out["n_taxa_both"] = n_both
    diff_sum = BT @ np.nan_to_num(a - t)
    out["mean_difference"] = np.divide(diff_sum, n_both, out=np.full(len(rid), np.nan), where=n_both > 0)
    out = out.join(_diversity(study, taxa, combined_mask, combined_p, combined_draws, alpha, rid, notes, engine))

    _note_off_centre(out, notes)
    few_taxa = out["n_taxa"] < params.min_taxa
    few_records = out["n_records"] < params.min_region_records
    out["data_flag"] = np.where(few_taxa | few_records, "insufficient data", "ok")
    reason = np.where(few_taxa, out["n_taxa"].map(lambda v: f"{v} assessed taxa (fewer than {params.min_taxa})"), "")
    reason2 = np.where(few_records, out["n_records"].map(
        lambda v: f"{v} records (fewer than {params.min_region_records})"), "")
    out["flag_reason"] = ["; ".join(s for s in pair if s) for pair in zip(reason, reason2)]
    rest = [c for c in out.columns if c not in SUMMARY_COLUMNS]
    return out[SUMMARY_COLUMNS + rest]


def _region_records(pos: np.ndarray, taxon_id: pd.Series, region_ids: np.ndarray) -> pd.DataFrame:
    """Records per (region, taxon) among assigned occurrences, sorted by region_id then taxon_id.

    Counted on integer codes (one count or sort over region x taxon keys) rather than by
    grouping millions of strings; the order is the string order of both ids.
    """
    codes, uniques = pd.factorize(taxon_id)
    taxa = np.asarray(pd.Index(uniques).astype(str), dtype=object)
    order = np.argsort(taxa, kind="stable")
    t_rank = np.empty(len(taxa), dtype=np.int64)
    t_rank[order] = np.arange(len(taxa))
    taxa = taxa[order]
    inside = (pos >= 0) & (codes >= 0)
    tcode = t_rank[codes[inside]]
    # region positions re-coded in region_id string order, so sorting keys sorts both ids
    r_rank = np.empty(len(region_ids), dtype=np.int64)
    r_rank[np.argsort(region_ids, kind="stable")] = np.arange(len(region_ids))
    r_of_rank = np.argsort(r_rank)
    n_t = max(len(taxa), 1)
    key = r_rank[pos[inside]] * n_t + tcode
    space = len(region_ids) * n_t
    if space <= min(max(4 * len(key), 1 << 20), 1 << 26):   # dense counts: linear time
        counts = np.bincount(key, minlength=space)
        keys = np.flatnonzero(counts)
        counts = counts[keys]
    else:
        srt = np.sort(key)
        first = np.flatnonzero(np.r_[True, srt[1:] != srt[:-1]])
        keys, counts = srt[first], np.diff(np.r_[first, len(srt)])
    rpos = r_of_rank[keys // n_t]
    return pd.DataFrame({"region_id": pd.array(region_ids[rpos], dtype="str"),
                         "taxon_id": pd.array(taxa[keys % n_t], dtype="str"),
                         "n_records": counts.astype(np.int64), "region_pos": rpos})


def _q(summed: np.ndarray, q: float) -> np.ndarray:
    if summed.shape[1] == 0:
        return np.full(summed.shape[0], np.nan)
    return np.quantile(summed, q, axis=1)


def _diversity(study, taxa, mask, p, draws, alpha, rid, notes, engine=None) -> pd.DataFrame:
    cols = ["diversity_loss", "diversity_loss_low", "diversity_loss_high", "diversity_total"]
    out = pd.DataFrame(np.nan, index=range(len(rid)), columns=cols)
    assessed = ~np.isnan(p)
    if not assessed.any():
        return out
    from ..taxonomy import build_rank_tree

    tree = build_rank_tree(study.taxa)
    ids = taxa[assessed]
    inc, _ = branch_incidence(tree, ids)
    m = sp.csc_matrix(mask)[np.flatnonzero(assessed)]
    ps = [p[assessed], np.ones(assessed.sum())]
    if draws.shape[1]:
        ps.append(np.nan_to_num(draws[assessed], nan=0.0))
    losses = expected_diversity_losses(inc, m, ps, engine=engine)  # one pass over the regions for all three
    out["diversity_loss"], out["diversity_total"] = losses[0], losses[1]
    if draws.shape[1]:
        per_draw = losses[2]
        out["diversity_loss_low"] = np.quantile(per_draw, alpha, axis=1)
        out["diversity_loss_high"] = np.quantile(per_draw, 1 - alpha, axis=1)
    return out
